package sim

import (
	"fmt"
	"math"
	"math/rand/v2"

	"rolloff/driver/sim/model"
	"rolloff/internal/fielderr"
)

// Systematic errors.
//
// With [sim] systematic = true each simulated instrument draws its
// systematic errors once, at New, from its own specification ([sim.spec],
// filled from the instrument profiles by FromBenchFile) and keeps them
// for its life, so that the simulated bench behaves like one unit out of
// many rather than a perfect one:
//
//   - the converter: a gain error per range, a flatness error per band,
//     one end-point linearity error (model.LinearityShape);
//   - the DC voltmeter: a gain and an offset error per range;
//   - the generator: an amplitude error common to every frequency and a
//     flatness error per band.
//
// A specification's ± limit a carries no more information than the
// bounds, so each error is drawn from the rectangular distribution on
// [−a, a] (JCGM 100:2008 §4.3.7; standard uncertainty a/√3). Each
// instrument has its own PCG stream seeded by [sim] seed, separate from
// the noise streams: the same seed gives the same unit, and turning the
// errors on changes no noise draw. Bench.Systematic returns the drawn
// errors, the truth a test of a stated uncertainty compares against.

// SpecConfig holds the specifications the simulated instruments draw
// their systematic errors from ([sim.spec]); each figure is a ± limit.
type SpecConfig struct {
	Converter ConverterSpec `toml:"converter"`
	Voltmeter VoltmeterSpec `toml:"voltmeter"`
	Generator GeneratorSpec `toml:"generator"`
}

// ConverterSpec is the converter's specification by component (the
// converter profile's range_gain_pct, linearity_pct and
// accuracy[].flatness_pct).
type ConverterSpec struct {
	// RangeGainPct: ± % of reading, one error per range.
	RangeGainPct float64 `toml:"range_gain_pct"`
	// LinearityPct: ± % of full scale, the end-point linearity at half
	// scale (model.LinearityShape).
	LinearityPct float64 `toml:"linearity_pct"`
	// Flatness are the bands, first match wins; one error per band.
	Flatness []ConverterBand `toml:"flatness"`
}

// ConverterBand is one flatness band of the converter: ±FlatnessPct % of
// reading on the named ranges (every range when empty) from FromHz to ToHz
// inclusive.
type ConverterBand struct {
	Ranges      []string `toml:"ranges"`
	FromHz      float64  `toml:"from_hz"`
	ToHz        float64  `toml:"to_hz"`
	FlatnessPct float64  `toml:"flatness_pct"`
}

// VoltmeterSpec is the DC voltmeter's specification per range (the DMM
// profile's dc.accuracy): a range reads with the row of the smallest
// specified range at least its own.
type VoltmeterSpec struct {
	Accuracy []DCAccuracy `toml:"accuracy"`
}

// DCAccuracy is ±(ReadingPct % of reading + RangePct % of range) on the
// range RangeV: the reading part is drawn as a gain error, the range part
// as an offset.
type DCAccuracy struct {
	RangeV     float64 `toml:"range_v"`
	ReadingPct float64 `toml:"reading_pct"`
	RangePct   float64 `toml:"range_pct"`
}

// GeneratorSpec is the generator's amplitude specification (the generator
// profile's [accuracy]).
type GeneratorSpec struct {
	// AmplitudePct: ± % of the setting, common to every frequency.
	AmplitudePct float64 `toml:"amplitude_pct"`
	// Flatness are the bands, first match wins; one error per band.
	Flatness []GeneratorBand `toml:"flatness"`
}

// GeneratorBand is one flatness band of the generator: ±FlatnessDB dB from
// FromHz to ToHz inclusive.
type GeneratorBand struct {
	FromHz     float64 `toml:"from_hz"`
	ToHz       float64 `toml:"to_hz"`
	FlatnessDB float64 `toml:"flatness_db"`
}

// demoSpec returns the specifications of the shipped profiles
// (converter-10db.toml, dmm-scpi.toml, generator-scpi.toml), so that a
// bench built from DemoConfig alone draws from the same figures as one
// built from configs/sim-bench.toml.
func demoSpec() SpecConfig {
	return SpecConfig{
		Converter: ConverterSpec{
			RangeGainPct: 0.5,
			LinearityPct: 0.05,
			Flatness: []ConverterBand{
				{Ranges: []string{"1 mV", "3.162 mV"}, FromHz: 100e3, ToHz: 2e6, FlatnessPct: 4.3},
				{FromHz: 10, ToHz: 20, FlatnessPct: 1.3},
				{FromHz: 20, ToHz: 100e3, FlatnessPct: 0.3},
				{FromHz: 100e3, ToHz: 2e6, FlatnessPct: 2.3},
			},
		},
		Voltmeter: VoltmeterSpec{Accuracy: []DCAccuracy{
			{RangeV: 0.1, ReadingPct: 0.0050, RangePct: 0.0035},
			{RangeV: 1, ReadingPct: 0.0040, RangePct: 0.0007},
			{RangeV: 10, ReadingPct: 0.0035, RangePct: 0.0005},
			{RangeV: 100, ReadingPct: 0.0045, RangePct: 0.0006},
			{RangeV: 1000, ReadingPct: 0.0045, RangePct: 0.0010},
		}},
		Generator: GeneratorSpec{
			AmplitudePct: 1.0,
			Flatness: []GeneratorBand{
				{FromHz: 0.001, ToHz: 100e3, FlatnessDB: 0.1},
				{FromHz: 100e3, ToHz: 5e6, FlatnessDB: 0.15},
				{FromHz: 5e6, ToHz: 20e6, FlatnessDB: 0.3},
			},
		},
	}
}

func (s SpecConfig) clone() SpecConfig {
	c := s
	c.Converter.Flatness = make([]ConverterBand, len(s.Converter.Flatness))
	for i, b := range s.Converter.Flatness {
		b.Ranges = append([]string(nil), b.Ranges...)
		c.Converter.Flatness[i] = b
	}
	c.Voltmeter.Accuracy = append([]DCAccuracy(nil), s.Voltmeter.Accuracy...)
	c.Generator.Flatness = append([]GeneratorBand(nil), s.Generator.Flatness...)
	return c
}

// Limits of the specification and drift keys.
const (
	maxSpecPct     = 100
	maxSpecDB      = 6
	maxSpecBands   = 64
	maxDriftPPM    = 1e6
	driftKnotS     = 10.0    // random-walk knots, model seconds apart
	maxDriftKnots  = 1 << 20 // past ~121 model days the walk holds still
	secondsPerHour = 3600.0  // drift rates are per hour of model time
)

// validateSystematic checks the [sim] systematic, drift and spec keys.
func (c *Config) validateSystematic() []error {
	var errs []error
	bad := func(key string, v any, allowed string) {
		errs = append(errs, &ConfigError{Field: key, Value: fielderr.FormatValue(v), Msg: msgRefused, Allowed: allowed})
	}
	within := func(key string, v, lo, hi float64) {
		if math.IsNaN(v) || v < lo || v > hi {
			bad(key, v, fmt.Sprintf("%g..%g", lo, hi))
		}
	}
	band := func(key string, from, to float64) {
		if math.IsNaN(from) || math.IsInf(from, 0) || from < 0 {
			bad(key+".from_hz", from, "0 Hz or more")
		} else if math.IsNaN(to) || math.IsInf(to, 0) || to <= from {
			bad(key+".to_hz", to, fmt.Sprintf("above from_hz (%g)", from))
		}
	}
	within("drift_ppm_per_hour", c.DriftPPMPerHour, -maxDriftPPM, maxDriftPPM)
	within("drift_walk_ppm", c.DriftWalkPPM, 0, maxDriftPPM)

	cs := &c.Spec.Converter
	within("spec.converter.range_gain_pct", cs.RangeGainPct, 0, maxSpecPct)
	within("spec.converter.linearity_pct", cs.LinearityPct, 0, maxSpecPct)
	if len(cs.Flatness) > maxSpecBands {
		bad("spec.converter.flatness", len(cs.Flatness), fmt.Sprintf("at most %d bands", maxSpecBands))
	}
	names := map[string]bool{}
	for _, r := range c.Converter.Ranges {
		names[r.Name] = true
	}
	for i, b := range cs.Flatness {
		k := fmt.Sprintf("spec.converter.flatness[%d]", i)
		for j, n := range b.Ranges {
			// Only a bench that draws its errors needs the names to
			// match: a [sim] table giving other ranges need not
			// rewrite the demo's bands too.
			if c.Systematic && !names[n] {
				bad(fmt.Sprintf("%s.ranges[%d]", k, j), n, "a name from converter.ranges")
			}
		}
		band(k, b.FromHz, b.ToHz)
		within(k+".flatness_pct", b.FlatnessPct, 0, maxSpecPct)
	}
	if len(c.Spec.Voltmeter.Accuracy) > maxSpecBands {
		bad("spec.voltmeter.accuracy", len(c.Spec.Voltmeter.Accuracy), fmt.Sprintf("at most %d rows", maxSpecBands))
	}
	for i, a := range c.Spec.Voltmeter.Accuracy {
		k := fmt.Sprintf("spec.voltmeter.accuracy[%d]", i)
		if math.IsNaN(a.RangeV) || a.RangeV <= 0 || a.RangeV > 1e4 {
			bad(k+".range_v", a.RangeV, "> 0 and <= 10000 V")
		}
		within(k+".reading_pct", a.ReadingPct, 0, maxSpecPct)
		within(k+".range_pct", a.RangePct, 0, maxSpecPct)
	}
	gs := &c.Spec.Generator
	within("spec.generator.amplitude_pct", gs.AmplitudePct, 0, maxSpecPct)
	if len(gs.Flatness) > maxSpecBands {
		bad("spec.generator.flatness", len(gs.Flatness), fmt.Sprintf("at most %d bands", maxSpecBands))
	}
	for i, b := range gs.Flatness {
		k := fmt.Sprintf("spec.generator.flatness[%d]", i)
		band(k, b.FromHz, b.ToHz)
		within(k+".flatness_db", b.FlatnessDB, 0, maxSpecDB)
	}
	return errs
}

// SystematicErrors are the systematic errors a simulated bench drew at
// New: the truth behind its readings. Relative errors are fractions (a
// reading 1 + e times the true value). With Config.Systematic off every
// error is zero.
type SystematicErrors struct {
	// On reports whether the errors are applied (Config.Systematic).
	On bool
	// ConverterRangeGain[i] is the gain error of converter range i.
	ConverterRangeGain []float64
	// ConverterFlatness[k] is the error of band k of
	// Spec.Converter.Flatness, on every range the band names.
	ConverterFlatness []float64
	// ConverterLinearity is the end-point linearity error λ, a fraction
	// of full scale: the DC output is x + λ·model.LinearityShape(x) of
	// full scale for a true fraction x.
	ConverterLinearity float64
	// VoltmeterGain[i] and VoltmeterOffsetV[i] are the errors of DC
	// voltmeter range i (Config.Voltmeter.RangesV[i]): it reads
	// v·(1 + gain) + offset.
	VoltmeterGain    []float64
	VoltmeterOffsetV []float64
	// GeneratorAmplitude is the generator's amplitude error, common to
	// every frequency.
	GeneratorAmplitude float64
	// GeneratorFlatnessDB[k] is the error of band k of
	// Spec.Generator.Flatness, dB.
	GeneratorFlatnessDB []float64
	// Spec is the specification the errors were drawn from, with the
	// bands the indices above refer to.
	Spec SpecConfig

	convRanges []string // converter range names, for the bands
}

// Noise streams of the systematic draws: one per instrument, apart from
// the reading-noise streams.
const (
	streamConverterSpec = iota + 101
	streamVoltmeterSpec
	streamGeneratorSpec
	streamDrift
)

// rectangular draws from the rectangular distribution on [−a, a]
// (JCGM 100:2008 §4.3.7).
func rectangular(r *rand.Rand, a float64) float64 {
	return a * (2*r.Float64() - 1)
}

// drawSystematic draws every instrument's errors for cfg, each from its
// own stream in a fixed order; all zero when cfg.Systematic is off.
func drawSystematic(cfg *Config) SystematicErrors {
	e := SystematicErrors{On: cfg.Systematic, Spec: cfg.Spec.clone()}
	for _, r := range cfg.Converter.Ranges {
		e.convRanges = append(e.convRanges, r.Name)
	}
	n := len(cfg.Converter.Ranges)
	e.ConverterRangeGain = make([]float64, n)
	e.ConverterFlatness = make([]float64, len(cfg.Spec.Converter.Flatness))
	e.VoltmeterGain = make([]float64, len(cfg.Voltmeter.RangesV))
	e.VoltmeterOffsetV = make([]float64, len(cfg.Voltmeter.RangesV))
	e.GeneratorFlatnessDB = make([]float64, len(cfg.Spec.Generator.Flatness))
	if !cfg.Systematic {
		return e
	}
	cs := &cfg.Spec.Converter
	rc := rand.New(rand.NewPCG(cfg.Seed, streamConverterSpec))
	for i := range e.ConverterRangeGain {
		e.ConverterRangeGain[i] = rectangular(rc, cs.RangeGainPct/100)
	}
	for k, b := range cs.Flatness {
		e.ConverterFlatness[k] = rectangular(rc, b.FlatnessPct/100)
	}
	e.ConverterLinearity = rectangular(rc, cs.LinearityPct/100)

	rv := rand.New(rand.NewPCG(cfg.Seed, streamVoltmeterSpec))
	for i, rangeV := range cfg.Voltmeter.RangesV {
		a, ok := dcAccuracyFor(cfg.Spec.Voltmeter.Accuracy, rangeV)
		if !ok {
			continue
		}
		e.VoltmeterGain[i] = rectangular(rv, a.ReadingPct/100)
		e.VoltmeterOffsetV[i] = rectangular(rv, a.RangePct/100*a.RangeV)
	}

	rg := rand.New(rand.NewPCG(cfg.Seed, streamGeneratorSpec))
	e.GeneratorAmplitude = rectangular(rg, cfg.Spec.Generator.AmplitudePct/100)
	for k, b := range cfg.Spec.Generator.Flatness {
		e.GeneratorFlatnessDB[k] = rectangular(rg, b.FlatnessDB)
	}
	return e
}

// dcAccuracyFor returns the row of the smallest specified range at least
// rangeV (as profile.DMM.DCAccuracyV chooses it).
func dcAccuracyFor(rows []DCAccuracy, rangeV float64) (DCAccuracy, bool) {
	best := -1
	for i, a := range rows {
		if a.RangeV >= rangeV*(1-1e-9) && (best < 0 || a.RangeV < rows[best].RangeV) {
			best = i
		}
	}
	if best < 0 {
		return DCAccuracy{}, false
	}
	return rows[best], true
}

// ConverterBand returns the flatness band of a reading on converter range
// rng at freqHz: the first band of Spec.Converter.Flatness naming the
// range (or none) and holding the frequency; -1 where none does.
func (e *SystematicErrors) ConverterBand(rng int, freqHz float64) int {
	if rng < 0 || rng >= len(e.convRanges) {
		return -1
	}
	for k, b := range e.Spec.Converter.Flatness {
		if freqHz < b.FromHz || freqHz > b.ToHz {
			continue
		}
		match := len(b.Ranges) == 0
		for _, n := range b.Ranges {
			match = match || n == e.convRanges[rng]
		}
		if match {
			return k
		}
	}
	return -1
}

// ConverterGain returns the factor on the converter's reading on range rng
// for an input at freqHz: (1 + range gain)·(1 + band flatness); 1 with the errors off.
func (e *SystematicErrors) ConverterGain(rng int, freqHz float64) float64 {
	if !e.On || rng < 0 || rng >= len(e.ConverterRangeGain) {
		return 1
	}
	g := 1 + e.ConverterRangeGain[rng]
	if k := e.ConverterBand(rng, freqHz); k >= 0 {
		g *= 1 + e.ConverterFlatness[k]
	}
	return g
}

// GeneratorBand returns the generator flatness band holding freqHz, -1
// where none does.
func (e *SystematicErrors) GeneratorBand(freqHz float64) int {
	for k, b := range e.Spec.Generator.Flatness {
		if freqHz >= b.FromHz && freqHz <= b.ToHz {
			return k
		}
	}
	return -1
}

// GeneratorGain returns the factor on the generator's amplitude at
// freqHz: (1 + amplitude error)·10^(flatness dB/20); 1 with the errors
// off.
func (e *SystematicErrors) GeneratorGain(freqHz float64) float64 {
	if !e.On {
		return 1
	}
	g := 1 + e.GeneratorAmplitude
	if k := e.GeneratorBand(freqHz); k >= 0 {
		g *= math.Pow(10, e.GeneratorFlatnessDB[k]/20)
	}
	return g
}

// VoltmeterReading returns what DC voltmeter range rng reads for a true
// input v: v·(1 + gain) + offset; v with the errors off.
func (e *SystematicErrors) VoltmeterReading(rng int, v float64) float64 {
	if !e.On || rng < 0 || rng >= len(e.VoltmeterGain) {
		return v
	}
	return v*(1+e.VoltmeterGain[rng]) + e.VoltmeterOffsetV[rng]
}

// clone returns a deep copy.
func (e SystematicErrors) clone() SystematicErrors {
	c := e
	c.ConverterRangeGain = append([]float64(nil), e.ConverterRangeGain...)
	c.ConverterFlatness = append([]float64(nil), e.ConverterFlatness...)
	c.VoltmeterGain = append([]float64(nil), e.VoltmeterGain...)
	c.VoltmeterOffsetV = append([]float64(nil), e.VoltmeterOffsetV...)
	c.GeneratorFlatnessDB = append([]float64(nil), e.GeneratorFlatnessDB...)
	c.Spec = e.Spec.clone()
	c.convRanges = append([]string(nil), e.convRanges...)
	return c
}

// Systematic returns the systematic errors the bench drew at New (all zero
// when [sim] systematic is off).
func (b *Bench) Systematic() SystematicErrors { return b.sys.clone() }

// converterParams puts the drawn converter errors into the model's
// parameters.
func (e *SystematicErrors) converterParams(cp *model.ConverterParams) {
	if !e.On {
		return
	}
	cp.InputGain = e.ConverterGain
	cp.Linearity = e.ConverterLinearity
}

// drift is the converter's slow gain drift in model time: a linear drift
// plus a seeded random walk, its knots driftKnotS apart and drawn in
// order (so the path depends on the seed only, not on when it is read),
// joined by straight lines.
type drift struct {
	ratePPMPerS float64
	stepPPM     float64 // RMS step of the walk between knots
	rng         *rand.Rand
	knots       []float64 // walk at k·driftKnotS, ppm
}

func newDrift(cfg *Config) *drift {
	if cfg.DriftPPMPerHour == 0 && cfg.DriftWalkPPM == 0 {
		return nil
	}
	return &drift{
		ratePPMPerS: cfg.DriftPPMPerHour / secondsPerHour,
		// A random walk's variance grows linearly with time: σ(t) =
		// DriftWalkPPM·√(t / 1 h), so each knot step has σ·√(Δ / 1 h).
		stepPPM: cfg.DriftWalkPPM * math.Sqrt(driftKnotS/secondsPerHour),
		rng:     rand.New(rand.NewPCG(cfg.Seed, streamDrift)),
		knots:   []float64{0},
	}
}

// ppm returns the drift at model time t, ppm (0 for t <= 0).
func (d *drift) ppm(t float64) float64 {
	if d == nil || !(t > 0) {
		return 0
	}
	v := d.ratePPMPerS * t
	if d.stepPPM == 0 || math.IsInf(t, 1) {
		return v
	}
	if t > driftKnotS*(maxDriftKnots-1) {
		t = driftKnotS * (maxDriftKnots - 1)
	}
	k := int(t / driftKnotS)
	for len(d.knots) <= k+1 {
		d.knots = append(d.knots, d.knots[len(d.knots)-1]+d.stepPPM*d.rng.NormFloat64())
	}
	f := t/driftKnotS - float64(k)
	return v + d.knots[k] + f*(d.knots[k+1]-d.knots[k])
}

// factor returns the gain factor 1 + drift at model time t.
func (d *drift) factor(t float64) float64 {
	if d == nil {
		return 1
	}
	return 1 + 1e-6*d.ppm(t)
}

// ConverterDrift returns the converter's gain drift factor at model time
// tS (seconds since New): 1 + drift; 1 without drift.
func (b *Bench) ConverterDrift(tS float64) float64 {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.drift.factor(tS)
}
