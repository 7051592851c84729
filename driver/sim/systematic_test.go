package sim

import (
	"fmt"
	"math"
	"math/rand/v2"
	"reflect"
	"sort"
	"testing"

	"rolloff/configs"
	"rolloff/configs/configstest"
	"rolloff/driver/profile"
	"rolloff/driver/sim/model"
)

// component is one drawn error with its ± limit.
type component struct {
	name  string
	value float64
	limit float64
}

// components lists every drawn error of e with the limit its
// specification gives (cfg's figures), in a fixed order.
func components(cfg *Config, e *SystematicErrors) []component {
	var out []component
	s := &cfg.Spec
	for i, g := range e.ConverterRangeGain {
		out = append(out, component{fmt.Sprintf("converter range %d gain", i), g, s.Converter.RangeGainPct / 100})
	}
	for k, f := range e.ConverterFlatness {
		out = append(out, component{fmt.Sprintf("converter band %d flatness", k), f, s.Converter.Flatness[k].FlatnessPct / 100})
	}
	out = append(out, component{"converter linearity", e.ConverterLinearity, s.Converter.LinearityPct / 100})
	for i, rangeV := range cfg.Voltmeter.RangesV {
		a, _ := dcAccuracyFor(s.Voltmeter.Accuracy, rangeV)
		out = append(out,
			component{fmt.Sprintf("voltmeter %g V gain", rangeV), e.VoltmeterGain[i], a.ReadingPct / 100},
			component{fmt.Sprintf("voltmeter %g V offset", rangeV), e.VoltmeterOffsetV[i], a.RangePct / 100 * a.RangeV})
	}
	out = append(out, component{"generator amplitude", e.GeneratorAmplitude, s.Generator.AmplitudePct / 100})
	for k, f := range e.GeneratorFlatnessDB {
		out = append(out, component{fmt.Sprintf("generator band %d flatness dB", k), f, s.Generator.Flatness[k].FlatnessDB})
	}
	return out
}

func systematicConfig(seed uint64) Config {
	c := DemoConfig()
	c.Systematic = true
	c.Seed = seed
	return c
}

// TestSystematicOff: by default the bench is ideal, and says so.
func TestSystematicOff(t *testing.T) {
	cfg := DemoConfig()
	if cfg.Systematic || cfg.DriftPPMPerHour != 0 || cfg.DriftWalkPPM != 0 {
		t.Fatal("the demo configuration draws systematic errors or drifts by default")
	}
	b, err := New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	e := b.Systematic()
	if e.On {
		t.Error("Systematic().On with systematic off")
	}
	for _, c := range components(&cfg, &e) {
		if c.value != 0 {
			t.Errorf("%s = %g with systematic off", c.name, c.value)
		}
	}
	if g := e.ConverterGain(6, 1000); g != 1 {
		t.Errorf("ConverterGain = %g with systematic off", g)
	}
	if g := e.GeneratorGain(1e6); g != 1 {
		t.Errorf("GeneratorGain = %g with systematic off", g)
	}
	if f := b.ConverterDrift(3600); f != 1 {
		t.Errorf("ConverterDrift = %g without drift", f)
	}
}

// TestSystematicPerSeed: a seed gives the same unit every time (also
// through New and for a bench that only has them drawn), another seed
// another unit, every error within its specification's limit.
func TestSystematicPerSeed(t *testing.T) {
	cfg := systematicConfig(7)
	a := drawSystematic(&cfg)
	if b := drawSystematic(&cfg); !reflect.DeepEqual(a, b) {
		t.Fatal("two draws with one seed differ")
	}
	bench, err := New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer bench.Close()
	if got := bench.Systematic(); !reflect.DeepEqual(got, a) {
		t.Errorf("Bench.Systematic() = %+v, want the draw %+v", got, a)
	}
	// The accessor hands out a copy.
	got := bench.Systematic()
	got.ConverterRangeGain[0] = 1
	if bench.Systematic().ConverterRangeGain[0] == 1 {
		t.Error("Systematic() shares its slices with the bench")
	}

	cfg8 := systematicConfig(8)
	b8 := drawSystematic(&cfg8)
	ca, c8 := components(&cfg, &a), components(&cfg8, &b8)
	if len(ca) < 20 {
		t.Fatalf("only %d components drawn", len(ca))
	}
	for i := range ca {
		if ca[i].value == c8[i].value {
			t.Errorf("%s: seeds 7 and 8 drew the same %g", ca[i].name, ca[i].value)
		}
	}
	for seed := uint64(0); seed < 500; seed++ {
		c := systematicConfig(seed)
		e := drawSystematic(&c)
		for _, k := range components(&c, &e) {
			if k.limit <= 0 || math.Abs(k.value) > k.limit {
				t.Fatalf("seed %d: %s = %g outside ±%g", seed, k.name, k.value, k.limit)
			}
		}
	}
}

// ksStatistic returns the Kolmogorov–Smirnov statistic D_n of a sample
// against the uniform CDF on [0, 1]: the largest distance between the
// empirical and the uniform CDF, D = max_i max(i/n − u_(i), u_(i) −
// (i−1)/n) over the sorted sample (Kolmogorov 1933; handbook formula).
func ksStatistic(u []float64) float64 {
	s := append([]float64(nil), u...)
	sort.Float64s(s)
	n := float64(len(s))
	var d float64
	for i, v := range s {
		d = math.Max(d, math.Max(float64(i+1)/n-v, v-float64(i)/n))
	}
	return d
}

// kolmogorovQuantile returns x with P(√n·D_n ≤ x) = p in the large-n
// limit, from Kolmogorov's distribution 1 − 2·Σ_{k≥1} (−1)^(k−1)·
// e^(−2k²x²), by bisection.
func kolmogorovQuantile(p float64) float64 {
	cdf := func(x float64) float64 {
		var s float64
		for k := 1; k <= 100; k++ {
			s += math.Pow(-1, float64(k-1)) * math.Exp(-2*float64(k*k)*x*x)
		}
		return 1 - 2*s
	}
	lo, hi := 0.3, 3.0
	for range 60 {
		mid := (lo + hi) / 2
		if cdf(mid) < p {
			lo = mid
		} else {
			hi = mid
		}
	}
	return (lo + hi) / 2
}

// TestSystematicRectangular: over many seeds every component's errors are
// spread uniformly over [−a, a], the rectangular distribution JCGM
// 100:2008 §4.3.7 assigns to a ± limit: a Kolmogorov–Smirnov test against
// the uniform CDF at the 1 % level. The same test refuses a triangular
// sample (the sum of two uniforms) of the same size, so it has the power
// to tell. Distinct instruments' errors are uncorrelated across seeds
// (their streams are independent).
func TestSystematicRectangular(t *testing.T) {
	const n = 2000
	// 1.628 is the tabulated 1 % point of √n·D_n for large n (from
	// memory, Smirnov's table); the series gives 1.6276.
	k99 := kolmogorovQuantile(0.99)
	if math.Abs(k99-1.628) > 1e-3 {
		t.Fatalf("Kolmogorov 99 %% point = %.5f, want 1.628", k99)
	}
	crit := k99 / math.Sqrt(n)
	var samples [][]float64
	var names []string
	for seed := uint64(1000); seed < 1000+n; seed++ {
		c := systematicConfig(seed)
		e := drawSystematic(&c)
		cs := components(&c, &e)
		if samples == nil {
			samples = make([][]float64, len(cs))
			for _, k := range cs {
				names = append(names, k.name)
			}
		}
		for i, k := range cs {
			samples[i] = append(samples[i], (k.value/k.limit+1)/2)
		}
	}
	var worst float64
	for i, s := range samples {
		d := ksStatistic(s)
		worst = math.Max(worst, d)
		if d > crit {
			t.Errorf("%s: KS D = %.4f > %.4f (1 %% level, n = %d): not rectangular", names[i], d, crit, n)
		}
	}
	t.Logf("%d components × %d seeds: largest KS D = %.4f, critical %.4f (√n·D 1 %% point %.4f)", len(samples), n, worst, crit, k99)
	r := rand.New(rand.NewPCG(5, 5))
	tri := make([]float64, n)
	for i := range tri {
		tri[i] = (r.Float64() + r.Float64()) / 2
	}
	if d := ksStatistic(tri); d <= crit {
		t.Errorf("a triangular sample passed the KS test (D = %.4f <= %.4f)", d, crit)
	}
	// Converter range 6 gain against the generator amplitude and the
	// 1 V voltmeter range's offset: |r| < 4/√n.
	find := func(name string) []float64 {
		for i, nm := range names {
			if nm == name {
				return samples[i]
			}
		}
		t.Fatalf("no component %q", name)
		return nil
	}
	conv := find("converter range 6 gain")
	for _, other := range []string{"generator amplitude", "voltmeter 1 V offset", "converter range 7 gain"} {
		if rho := correlation(conv, find(other)); math.Abs(rho) > 4/math.Sqrt(n) {
			t.Errorf("correlation of converter range 6 gain with %s = %.3f", other, rho)
		}
	}
}

func correlation(x, y []float64) float64 {
	var mx, my float64
	for i := range x {
		mx += x[i]
		my += y[i]
	}
	mx /= float64(len(x))
	my /= float64(len(y))
	var sxy, sxx, syy float64
	for i := range x {
		sxy += (x[i] - mx) * (y[i] - my)
		sxx += (x[i] - mx) * (x[i] - mx)
		syy += (y[i] - my) * (y[i] - my)
	}
	return sxy / math.Sqrt(sxx*syy)
}

// point is one measured point of the physics test.
type point struct {
	freqHz float64
	rng    int // converter range
	// Indices of the bands the frequency lies in, written from the demo
	// specification (configs/converter-10db.toml, generator-scpi.toml),
	// not looked up by the code under test.
	convBand, genBand int
}

// measure sets each point, waits 25 time constants (e^-25: settled far
// below the errors checked) and returns the Vrms the controller would
// compute from one reading: dc / dc_full_scale_v × full_scale_vrms.
func measure(t *testing.T, b *Bench, pts []point, ampVrms float64) []float64 {
	t.Helper()
	g := dial(t, b.Addr(RoleGenerator))
	v := dial(t, b.Addr(RoleVoltmeter))
	g.do(fmt.Sprintf("FREQ 1000;VOLT %g;OUTP ON", ampVrms))
	v.do("CONF:VOLT:DC 1")
	cfg := b.Config()
	var out []float64
	for _, p := range pts {
		if err := b.SelectRange(p.rng); err != nil {
			t.Fatal(err)
		}
		g.do(fmt.Sprintf("FREQ %g", p.freqHz))
		waitModel(b, 25*cfg.Converter.Ranges[p.rng].TimeConstantS)
		dc := v.float("VOLT:APER 0.2;:READ?")
		out = append(out, dc/cfg.Converter.DCFullScaleV*cfg.Converter.Ranges[p.rng].FullScaleVrms)
	}
	return out
}

// predict returns what a bench with errors e reads at p, given the
// converter input an ideal bench sees there (idealVrms, its reading):
// the generator puts out (1 + amplitude)·10^(flatness/20) times its
// setting; the converter's range gain and band flatness scale its reading,
// its output is x + λ·4x(1−x) of full scale for a fraction x
// (model.LinearityShape); the DC voltmeter's 1 V range (index 1) reads
// v·(1 + gain) + offset; the controller divides by dc_full_scale_v and
// multiplies by the range's full scale. Nothing here calls the bench's
// own error helpers.
func predict(cfg *Config, e *SystematicErrors, p point, idealVrms float64, withGenAmplitude bool) float64 {
	gen := math.Pow(10, e.GeneratorFlatnessDB[p.genBand]/20)
	if withGenAmplitude {
		gen *= 1 + e.GeneratorAmplitude
	}
	conv := (1 + e.ConverterRangeGain[p.rng]) * (1 + e.ConverterFlatness[p.convBand])
	fs := cfg.Converter.Ranges[p.rng].FullScaleVrms
	x := idealVrms * gen * conv / fs
	dc := (x + e.ConverterLinearity*4*x*(1-x)) * cfg.Converter.DCFullScaleV
	read := dc*(1+e.VoltmeterGain[1]) + e.VoltmeterOffsetV[1]
	return read / cfg.Converter.DCFullScaleV * fs
}

// TestSystematicSweepPhysics: a sweep over three points on a bench with
// systematic errors reads what the drawn errors predict through the
// physics, against the same sweep on the ideal bench. Relative to the
// 1 kHz reference, the generator's amplitude error cancels (it is common
// to every frequency), and so do the converter's range gain and flatness
// at 50 kHz (same range, same band); at 500 kHz on another range and in
// other bands of both converter and generator they do not.
func TestSystematicSweepPhysics(t *testing.T) {
	pts := []point{
		{freqHz: 1000, rng: 6, convBand: 2, genBand: 0},  // 1 V range, 0.5 Vrms: x ≈ 0.5
		{freqHz: 50e3, rng: 6, convBand: 2, genBand: 0},  // same range and bands
		{freqHz: 500e3, rng: 3, convBand: 3, genBand: 1}, // 31.62 mV range, x ≈ 0.57
	}
	for _, tc := range []struct {
		name  string
		cfg   func() Config
		seed  uint64
		tolAb float64 // on each reading, relative
		tolRe float64 // on each gain relative to 1 kHz
	}{
		// Noise-free: the prediction holds to the residual of the
		// settle and of the ripple's passage through the linearity.
		{"quiet", quietConfig, 3, 3e-6, 3e-6},
		// The demo's noise: converter output noise 20 µV·√(1/(2·10 Hz
		// ·0.2 s)) = 10 µV on about 0.5 V, 2e-5 relative per reading;
		// 2e-4 is 5σ of a ratio of ratios of four readings.
		{"noisy", func() Config { c := DemoConfig(); c.TimeScale = 500; return c }, 11, 2e-4, 2e-4},
	} {
		t.Run(tc.name, func(t *testing.T) {
			ideal := tc.cfg()
			ideal.Seed = tc.seed
			sys := ideal
			sys.Systematic = true
			bi := startBench(t, ideal)
			bs := startBench(t, sys)
			e := bs.Systematic()
			// The errors this seed drew are large enough for the
			// checks to tell cancelling from not.
			if math.Abs(e.ConverterRangeGain[6]) < 1e-3 || math.Abs(e.GeneratorAmplitude) < 2e-3 ||
				math.Abs(e.ConverterRangeGain[3]-e.ConverterRangeGain[6]) < 1e-3 {
				t.Fatalf("seed %d drew small errors (%+v); choose another", tc.seed, e)
			}
			vi := measure(t, bi, pts, 0.05)
			vs := measure(t, bs, pts, 0.05)
			cfg := bs.Config()
			for i, p := range pts {
				want := predict(&cfg, &e, p, vi[i], true)
				if rel := vs[i]/want - 1; math.Abs(rel) > tc.tolAb {
					t.Errorf("%g Hz: read %.7g Vrms, predicted %.7g (ideal %.7g): off by %.2g", p.freqHz, vs[i], want, vi[i], rel)
				}
			}
			// The absolute reading carries the generator's amplitude
			// error; the response relative to 1 kHz does not.
			if abs := vs[0]/predict(&cfg, &e, pts[0], vi[0], false) - 1; math.Abs(abs-e.GeneratorAmplitude) > 2e-5+tc.tolAb {
				t.Errorf("1 kHz reading off by %.4g from the prediction without the generator's amplitude error %.4g", abs, e.GeneratorAmplitude)
			}
			for i := 1; i < len(pts); i++ {
				p := pts[i]
				measured := (vs[i] / vs[0]) / (vi[i] / vi[0])
				idealRatio := vi[i] / vi[0]
				full := predict(&cfg, &e, p, vi[i], true) / predict(&cfg, &e, pts[0], vi[0], true) / idealRatio
				noGen := predict(&cfg, &e, p, vi[i], false) / predict(&cfg, &e, pts[0], vi[0], false) / idealRatio
				t.Logf("%g Hz: gain error relative to 1 kHz %+.6f measured, %+.6f predicted", p.freqHz, measured-1, full-1)
				if math.Abs(measured/full-1) > tc.tolRe {
					t.Errorf("%g Hz: gain error %.6f relative to 1 kHz, predicted %.6f", p.freqHz, measured-1, full-1)
				}
				// Only the linearity sees the amplitude error
				// (4λx·a, below 2e-5 here): it cancels.
				if math.Abs(full/noGen-1) > 2e-5 {
					t.Errorf("%g Hz: the generator's amplitude error does not cancel (%.3g)", p.freqHz, full/noGen-1)
				}
				if i == 1 && math.Abs(measured-1) > 1e-4+tc.tolRe {
					t.Errorf("50 kHz on the reference's range and bands: gain error %.3g, want the range gain and flatness cancelled", measured-1)
				}
				if i == 2 {
					cross := (1 + e.ConverterRangeGain[3]) * (1 + e.ConverterFlatness[3]) / ((1 + e.ConverterRangeGain[6]) * (1 + e.ConverterFlatness[2])) *
						math.Pow(10, (e.GeneratorFlatnessDB[1]-e.GeneratorFlatnessDB[0])/20)
					if math.Abs(measured/cross-1) > 1e-3 {
						t.Errorf("500 kHz: gain error %.5f, want the ranges' and bands' %.5f", measured-1, cross-1)
					}
				}
			}
		})
	}
}

// TestSystematicHelpers: the error helpers look bands up as the
// specification says (first match wins, the 1 mV exception first).
func TestSystematicHelpers(t *testing.T) {
	cfg := systematicConfig(21)
	e := drawSystematic(&cfg)
	for _, tc := range []struct {
		rng    int
		freqHz float64
		band   int
	}{{6, 1000, 2}, {0, 500e3, 0}, {1, 500e3, 0}, {2, 500e3, 3}, {6, 15, 1}, {6, 5, -1}, {6, 3e6, -1}} {
		if got := e.ConverterBand(tc.rng, tc.freqHz); got != tc.band {
			t.Errorf("ConverterBand(%d, %g) = %d, want %d", tc.rng, tc.freqHz, got, tc.band)
		}
	}
	want := (1 + e.ConverterRangeGain[0]) * (1 + e.ConverterFlatness[0])
	if got := e.ConverterGain(0, 500e3); got != want {
		t.Errorf("ConverterGain(0, 500 kHz) = %g, want %g", got, want)
	}
	if got := e.ConverterGain(6, 5); got != 1+e.ConverterRangeGain[6] {
		t.Errorf("ConverterGain outside every band = %g, want the range gain alone", got)
	}
	for _, tc := range []struct {
		freqHz float64
		band   int
	}{{1000, 0}, {100e3, 0}, {1e6, 1}, {10e6, 2}, {30e6, -1}} {
		if got := e.GeneratorBand(tc.freqHz); got != tc.band {
			t.Errorf("GeneratorBand(%g) = %d, want %d", tc.freqHz, got, tc.band)
		}
	}
	if got, want := e.VoltmeterReading(2, 5), 5*(1+e.VoltmeterGain[2])+e.VoltmeterOffsetV[2]; got != want {
		t.Errorf("VoltmeterReading = %g, want %g", got, want)
	}
	// model.LinearityShape and profile.LinearityShape are one shape.
	for _, x := range []float64{0, 0.1, 0.5, 0.9, 1, 1.2} {
		if model.LinearityShape(x) != profile.LinearityShape(x) {
			t.Errorf("linearity shapes differ at %g", x)
		}
	}
}

// TestSystematicDrift: the drift is linear at the configured rate plus a
// random walk whose spread after one hour is the configured RMS; the
// path depends on the seed only, not on the order it is read in.
func TestSystematicDrift(t *testing.T) {
	cfg := DemoConfig()
	cfg.DriftPPMPerHour = 500
	d := newDrift(&cfg)
	if got := d.ppm(1800); math.Abs(got-250) > 1e-9 {
		t.Errorf("linear drift after 30 min = %g ppm, want 250", got)
	}
	if got := d.factor(3600); math.Abs(got-1.0005) > 1e-12 {
		t.Errorf("drift factor after 1 h = %.9f, want 1.0005", got)
	}

	cfg.DriftPPMPerHour = 0
	cfg.DriftWalkPPM = 100
	a, b := newDrift(&cfg), newDrift(&cfg)
	late := a.ppm(7200)
	early := a.ppm(60)
	if b.ppm(60) != early || b.ppm(7200) != late {
		t.Error("the walk depends on the order it is read in")
	}
	// Continuity: straight lines between knots.
	if step := math.Abs(a.ppm(1000.001) - a.ppm(1000)); step > 1 {
		t.Errorf("the walk jumps %g ppm in 1 ms", step)
	}
	// A random walk's variance grows linearly in time (handbook Wiener
	// process): over 400 seeds the RMS at 1 h is 100 ppm within the
	// sampling error of a variance, √(2/400) ≈ 7 % (3σ: 21 %), and at
	// 4 h twice that.
	var s1, s4 float64
	const n = 400
	for seed := uint64(0); seed < n; seed++ {
		cfg.Seed = seed
		w := newDrift(&cfg)
		v1, v4 := w.ppm(3600), w.ppm(4*3600)
		s1 += v1 * v1
		s4 += v4 * v4
	}
	rms1, rms4 := math.Sqrt(s1/n), math.Sqrt(s4/n)
	if math.Abs(rms1/100-1) > 0.11 || math.Abs(rms4/200-1) > 0.11 {
		t.Errorf("walk RMS %.1f ppm at 1 h (want 100), %.1f at 4 h (want 200)", rms1, rms4)
	}

	// On a bench the DC reading follows the drift.
	q := quietConfig()
	q.DriftPPMPerHour = 2e6 / 2 // 100 % per hour of model time, visible at once
	bench := startBench(t, q)
	if f := bench.ConverterDrift(36); math.Abs(f-1.01) > 1e-12 {
		t.Errorf("ConverterDrift(36 s) = %.6f, want 1.01", f)
	}
	g := dial(t, bench.Addr(RoleGenerator))
	v := dial(t, bench.Addr(RoleVoltmeter))
	g.do("FREQ 1000;VOLT 0.05;OUTP ON")
	v.do("CONF:VOLT:DC 1")
	waitModel(bench, 25*0.4)
	t0 := bench.ModelTime()
	dc := v.float("VOLT:APER 0.2;:READ?")
	t1 := bench.ModelTime()
	ideal := bench.DUTOutputVrms() / 1 // 1 V range, 1 V full-scale output
	lo, hi := ideal*(1+t0/3600), ideal*(1+t1/3600)
	if dc < lo*(1-1e-6) || dc > hi*(1+1e-6) {
		t.Errorf("drifting reading %.6f V, want between %.6f and %.6f", dc, lo, hi)
	}
}

// TestSystematicBenchFile: FromBenchFile takes the figures from the
// profiles, the shipped ones giving DemoConfig's, unless [sim.spec] lists
// them; a profile without a figure gives no error there; bad figures are
// refused naming the key.
func TestSystematicBenchFile(t *testing.T) {
	load := func(edits map[string][2]string) (*Config, error) {
		t.Helper()
		mfs := configstest.MapFS(t)
		for path, ed := range edits {
			configstest.Edit(t, mfs, path, ed[0], ed[1])
		}
		bf, err := profile.LoadBenchFS(mfs, configs.SimBench)
		if err != nil {
			return nil, err
		}
		return FromBenchFile(bf)
	}
	c, err := load(nil)
	if err != nil {
		t.Fatal(err)
	}
	if c.Systematic {
		t.Error("the shipped simulated bench draws systematic errors")
	}
	if want := demoSpec(); !reflect.DeepEqual(c.Spec, want) {
		t.Errorf("spec from the profiles %+v, want DemoConfig's %+v", c.Spec, want)
	}

	c, err = load(map[string][2]string{
		configs.SimBench: {"# systematic = false\n", "systematic = true\n"},
	})
	if err != nil || !c.Systematic {
		t.Fatalf("sim-bench.toml with systematic = true: %v, %+v", err, c)
	}
	c, err = load(map[string][2]string{
		configs.SimBench:            {"[sim.switch]\n", "[sim.spec.generator]\namplitude_pct = 2.5\n[sim.switch]\n"},
		"converter-10db-relay.toml": {"range_gain_pct = 0.5\n", "range_gain_pct = 0.25\n"},
	})
	if err != nil {
		t.Fatal(err)
	}
	if c.Spec.Generator.AmplitudePct != 2.5 || c.Spec.Converter.RangeGainPct != 0.25 || len(c.Spec.Generator.Flatness) != 3 {
		t.Errorf("[sim.spec] over the profiles: spec %+v", c.Spec)
	}
	c, err = load(map[string][2]string{"generator-scpi.toml": {"amplitude_pct = 1.0\n", ""}})
	if err != nil {
		t.Fatal(err)
	}
	if c.Spec.Generator.AmplitudePct != 0 {
		t.Errorf("a generator profile without amplitude_pct gave the simulator %g %%", c.Spec.Generator.AmplitudePct)
	}

	for _, tc := range []struct{ keys, tables, key string }{
		{"systematic = true\ndrift_walk_ppm = -1\n", "", "sim.drift_walk_ppm"},
		{"", "[sim.spec.converter]\nrange_gain_pct = 101\n", "sim.spec.converter.range_gain_pct"},
		{"systematic = true\n", "[[sim.spec.converter.flatness]]\nranges = [\"2 V\"]\nfrom_hz = 10\nto_hz = 100\nflatness_pct = 1\n", "sim.spec.converter.flatness[0].ranges[0]"},
		{"", "[[sim.spec.generator.flatness]]\nfrom_hz = 10\nto_hz = 5\nflatness_db = 0.1\n", "sim.spec.generator.flatness[0].to_hz"},
		{"", "[[sim.spec.voltmeter.accuracy]]\nrange_v = 1\nreading_pct = 0.01\nrange_pct = -0.01\n", "sim.spec.voltmeter.accuracy[0].range_pct"},
	} {
		doc := tc.keys + tc.tables
		_, err := load(map[string][2]string{configs.SimBench: {"seed = 1\n", "seed = 1\n" + tc.keys + tc.tables}})
		if err == nil {
			t.Errorf("%q accepted", doc)
			continue
		}
		found := false
		for _, fe := range allFieldErrors(err) {
			found = found || fe.Field == tc.key
		}
		if !found {
			t.Errorf("%q: %v; want a problem at %s", doc, err, tc.key)
		}
	}
}

// allFieldErrors flattens the field errors of a joined error.
func allFieldErrors(err error) []*ConfigError {
	var out []*ConfigError
	var walk func(error)
	walk = func(e error) {
		switch x := e.(type) {
		case *ConfigError:
			out = append(out, x)
		case interface{ Unwrap() []error }:
			for _, u := range x.Unwrap() {
				walk(u)
			}
		case interface{ Unwrap() error }:
			walk(x.Unwrap())
		}
	}
	walk(err)
	return out
}
