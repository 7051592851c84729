package sched_test

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"rolloff/driver"
	"rolloff/driver/bench"
	"rolloff/driver/sim"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/sched"
	"rolloff/sweep/settle"
)

// shortPlan is a quick plan across both of the demo DUT's corners.
func shortPlan(strategy string) *plan.Plan {
	p := &plan.Plan{
		Name:        "short",
		Frequencies: plan.Frequencies{Spacing: plan.SpacingLog, StartHz: 2, StopHz: 1e6, PointsPerDecade: 3},
		Level:       plan.Level{Vrms: 0.05},
		Settle:      plan.Settle{Tolerance: 0.002, Readings: 2},
		Ranging:     plan.Ranging{Strategy: strategy},
		ReferenceHz: 1000,
	}
	p.Defaults()
	return p
}

// dutGain returns the simulated DUT's gain (a voltage ratio).
func dutGain(b *bench.Bench, f float64) float64 { return math.Pow(10, b.Sim.DUTGainDB(f)/20) }

// checkGains compares every unflagged point with the simulated DUT's
// analytic response (corrected by the converter's low-frequency mean
// bias, settle.MeanFactor): the settle model and the converge test leave
// at most the tolerance, plus noise, or 1.5·tolerance where a converter
// hold froze a reading (see the package documentation); 2·tolerance is
// allowed.
func checkGains(t *testing.T, b *bench.Bench, pts []point.Point, tol float64, taus []float64) {
	t.Helper()
	if len(pts) == 0 {
		t.Fatal("no points")
	}
	for _, pt := range pts {
		if pt.Excluded() {
			continue
		}
		want := dutGain(b, pt.FreqHz) * settle.MeanFactor(pt.FreqHz, taus[pt.RangeIndex])
		got := pt.VoutVrms / pt.VinVrms
		if e := got/want - 1; math.Abs(e) > 2*tol {
			t.Errorf("%s Hz on %s: gain %.6f, DUT %.6f (%+.2g, tolerance %g)", plan.FormatHz(pt.FreqHz, 4), pt.Range, got, want, e, tol)
		}
	}
}

func TestSimSettleSeveralTimeConstants(t *testing.T) {
	// The converter's time constant on every range set to τ, in the
	// driver's profile and in the simulator alike.
	for _, tau := range []float64{0.1, 0.5, 1.5} {
		t.Run(fmt.Sprintf("tau=%g", tau), func(t *testing.T) {
			cfg := simConfig(t, 100)
			taus := make([]float64, len(cfg.Converter.Spec.Ranges))
			for i := range cfg.Converter.Spec.Ranges {
				cfg.Converter.Spec.Ranges[i].TimeConstantS = tau
				taus[i] = tau
			}
			p := shortPlan(plan.RangeRemote)
			res := sweepOn(t, context.Background(), cfg, p, sched.Opts{NoAnalysis: true}, nil)
			if res.err != nil {
				t.Fatal(res.err)
			}
			freqs, _ := p.Freqs()
			if want := len(freqs) + p.Drift.DriftChecks(len(freqs)); len(res.points) != want {
				t.Fatalf("%d points, plan %d and its drift checks %d", len(res.points), len(freqs), want)
			}
			checkGains(t, res.b, res.points, p.Settle.Tolerance, taus)
			// The first point settles from zero: at least the model's
			// dwell τ·ln(1/(2ε − ε²)) (first-order step response).
			eps := p.Settle.Tolerance
			if d := tau * math.Log(1/(2*eps-eps*eps)); res.points[0].SettleS < d {
				t.Errorf("first point settled in %g s, model dwell %g s", res.points[0].SettleS, d)
			}
		})
	}
}

func TestSimRippleAperture(t *testing.T) {
	// Readings of the converter's DC output at 2 Hz on a τ = 0.4 s range
	// scatter by the 2f ripple: standard deviation
	// RippleRel·|sinc(2fT)|/√2 for an aperture T (the first-order filter's
	// gain at 2f and the boxcar's transfer function), nulled at T = 1/(2f).
	cfg := simConfig(t, 50)
	b, err := bench.Open(context.Background(), cfg, zerolog.Nop())
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	ctx := context.Background()
	const f, vin = 2.0, 0.05
	rng := 6 // 1 V: the DUT's 0.5 V output at 2 Hz (about 0.12 V) is in the window
	if err := b.Sim.SelectRange(rng); err != nil {
		t.Fatal(err)
	}
	tau := cfg.Converter.Spec.Ranges[rng].TimeConstantS
	g := b.Generator
	for _, step := range []error{g.SetAmplitude(ctx, vin), g.SetFrequency(ctx, f), g.SetOutput(ctx, true)} {
		if step != nil {
			t.Fatal(step)
		}
	}
	time.Sleep(time.Duration(12 * tau / b.TimeScale * float64(time.Second)))
	for _, ap := range []float64{0.02, 0.1, 0.25} {
		if err := b.DCVoltmeter.ConfigureDC(ctx, driver.DCConfig{RangeV: b.DCConfig.RangeV, Aperture: driver.Aperture{Seconds: ap}}); err != nil {
			t.Fatal(err)
		}
		// Few enough readings to stay clear of the converter's hold
		// (every 60 s of model time).
		n := 60
		if ap > 0.2 {
			n = 40
		}
		var vs []float64
		for i := 0; i < n; i++ {
			v, err := b.DCVoltmeter.ReadDC(ctx)
			if err != nil {
				t.Fatal(err)
			}
			vs = append(vs, v)
			// Spread the reading phases over the ripple period.
			time.Sleep(time.Duration((0.0173 * float64(i%7)) / b.TimeScale * float64(time.Second)))
		}
		mean, sd := meanSD(vs)
		got := sd / mean
		want := settle.ReadingScatterRel(f, tau, ap)
		noise := 1e-4 // the converter's and voltmeter's own noise, relative
		switch {
		case want > 10*noise:
			if math.Abs(got/want-1) > 0.25 {
				t.Errorf("aperture %g s: scatter %.4g, ripple model %.4g", ap, got, want)
			}
		default:
			if got > 10*noise {
				t.Errorf("aperture %g s = 1/(2f): scatter %.4g, want the noise only (< %g)", ap, got, 10*noise)
			}
		}
		t.Logf("aperture %g s: scatter %.4g, model %.4g", ap, got, want)
	}
}

func meanSD(v []float64) (mean, sd float64) {
	for _, x := range v {
		mean += x
	}
	mean /= float64(len(v))
	for _, x := range v {
		sd += (x - mean) * (x - mean)
	}
	return mean, math.Sqrt(sd / float64(len(v)-1))
}

func TestSimStrategies(t *testing.T) {
	taus := func(b *bench.Bench) []float64 {
		var v []float64
		for _, r := range b.Converter.Ranges() {
			v = append(v, r.TimeConstantS)
		}
		return v
	}
	t.Run("operator", func(t *testing.T) {
		cfg := simConfig(t, 100)
		p := shortPlan(plan.RangeOperator)
		var prompts []event.Prompt
		bb, run := newRun(t, cfg, p, t.TempDir())
		defer bb.Close()
		defer run.Close()
		op := func(ctx context.Context, pr event.Prompt) (int, error) {
			prompts = append(prompts, pr)
			if bb.Sim.OutputOn() {
				return 0, errors.New("generator output on during a range prompt")
			}
			return pr.RangeIndex, bb.Sim.SelectRange(pr.RangeIndex)
		}
		res := sweepRun(t, context.Background(), bb, run, p, sched.Opts{NoAnalysis: true, Operator: op}, nil)
		if res.err != nil {
			t.Fatal(res.err)
		}
		if len(prompts) < 2 {
			t.Errorf("%d prompts", len(prompts))
		}
		for _, pt := range res.points {
			if flaggedOtherThanDrift(pt) {
				t.Errorf("%g Hz flagged %v", pt.FreqHz, pt.Flags)
			}
		}
		checkGains(t, res.b, res.points, p.Settle.Tolerance, taus(res.b))
	})
	t.Run("slow-operator", func(t *testing.T) {
		// A human takes seconds to turn the switch: the converter's
		// average decays with the output off meanwhile, and the dwell
		// after the output comes back on must start from then.
		cfg := simConfig(t, 100)
		p := shortPlan(plan.RangeOperator)
		// 4 points per decade up to 1 MHz, past the 95 kHz corner,
		// where a prediction from the last points overshoots the roll-off.
		p.Frequencies.StartHz, p.Frequencies.StopHz, p.Frequencies.PointsPerDecade = 5, 1e6, 4
		bb, run := newRun(t, cfg, p, t.TempDir())
		defer bb.Close()
		defer run.Close()
		prompts := 0
		op := func(ctx context.Context, pr event.Prompt) (int, error) {
			prompts++
			select {
			case <-time.After(300 * time.Millisecond):
			case <-ctx.Done():
				return 0, ctx.Err()
			}
			return pr.RangeIndex, bb.Sim.SelectRange(pr.RangeIndex)
		}
		res := sweepRun(t, context.Background(), bb, run, p, sched.Opts{NoAnalysis: true, Operator: op}, nil)
		if res.err != nil {
			t.Fatal(res.err)
		}
		if prompts < 2 {
			t.Errorf("%d prompts", prompts)
		}
		for _, pt := range res.points {
			if flaggedOtherThanDrift(pt) {
				t.Errorf("%g Hz flagged %v", pt.FreqHz, pt.Flags)
			}
		}
		// An operator is never asked twice at one frequency.
		seen := map[float64]int{}
		evs, err := run.Events()
		if err != nil {
			t.Fatal(err)
		}
		for _, e := range evs {
			if e.Type == event.TypePrompt {
				seen[e.Prompt.FreqHz]++
				if seen[e.Prompt.FreqHz] > 1 {
					t.Errorf("asked again at %g Hz: %s", e.Prompt.FreqHz, e.Prompt.Reason)
				}
			}
		}
		checkGains(t, res.b, res.points, p.Settle.Tolerance, taus(res.b))
	})
	t.Run("fixed", func(t *testing.T) {
		cfg := simConfig(t, 100)
		p := shortPlan(plan.RangeFixed)
		p.Ranging.Start = "1 V"
		res := sweepOn(t, context.Background(), cfg, p, sched.Opts{NoAnalysis: true}, nil)
		if res.err != nil {
			t.Fatal(res.err)
		}
		under := 0
		for _, pt := range res.points {
			fr := 0.05 * dutGain(res.b, pt.FreqHz) / 1.0
			if fr < 0.1*0.98 && !pt.Has(point.FlagUnderRange) {
				t.Errorf("%g Hz at %.3f of full scale not flagged under-range", pt.FreqHz, fr)
			}
			if pt.Has(point.FlagUnderRange) {
				under++
			}
			if pt.Range != "1 V" {
				t.Errorf("fixed strategy read on %s", pt.Range)
			}
		}
		if under == 0 {
			t.Error("no under-range point above 300 kHz")
		}
	})
	t.Run("level", func(t *testing.T) {
		cfg := simConfig(t, 100)
		p := shortPlan(plan.RangeLevel)
		p.Ranging.Start = "316.2 mV"
		p.Level = plan.Level{Vrms: 0.02, MinVrms: 0.002, MaxVrms: 0.5}
		// The bench has a remote switch: the named start range is
		// selected even though the strategy never changes it.
		bb, run := newRun(t, cfg, p, t.TempDir())
		defer bb.Close()
		defer run.Close()
		res := sweepRun(t, context.Background(), bb, run, p, sched.Opts{NoAnalysis: true}, nil)
		if got := bb.Sim.ConverterRange(); got != 5 {
			t.Errorf("converter on range %d, want 5 (316.2 mV)", got)
		}
		if res.err != nil {
			t.Fatal(res.err)
		}
		levels := map[float64]bool{}
		for _, pt := range res.points {
			levels[pt.VinVrms] = true
			if pt.VinVrms > 0.5+1e-12 || pt.VinVrms < 0.002-1e-12 {
				t.Errorf("%g Hz at %g Vrms: outside the plan's level bounds", pt.FreqHz, pt.VinVrms)
			}
		}
		if len(levels) < 2 {
			t.Errorf("levels used: %v", levels)
		}
		// The converter was on 316.2 mV throughout.
		tv := taus(res.b)
		checkGains(t, res.b, res.points, p.Settle.Tolerance, tv)
	})
}

func TestSimConnectionDrop(t *testing.T) {
	// Drops of the voltmeter's and generator's connections mid-run: every
	// point recorded exactly once, none missing, the retries logged.
	cfg := simConfig(t, 100)
	p := shortPlan(plan.RangeRemote)
	hook := func(r *sched.Run, b *bench.Bench) {
		ch, cancel := r.Subscribe()
		go func() {
			defer cancel()
			n := 0
			for ev := range ch {
				if ev.Type != event.TypePoint {
					continue
				}
				n++
				switch n {
				case 3:
					b.Sim.Faults(bench.RoleVoltmeter).DropNow()
				case 6:
					b.Sim.Faults(bench.RoleVoltmeter).DropMidQuery()
				case 9:
					b.Sim.Faults(bench.RoleGenerator).DropMidQuery()
				case 11:
					b.Sim.Faults(bench.RoleVoltmeter).CorruptNext()
				}
			}
		}()
	}
	res := sweepOn(t, context.Background(), cfg, p, sched.Opts{NoAnalysis: true, RetryBackoff: time.Millisecond}, hook)
	if res.err != nil {
		t.Fatal(res.err)
	}
	freqs, _ := p.Freqs()
	seen := map[int]int{}
	for i, pt := range res.points {
		seen[pt.Index]++
		if pt.Seq != i {
			t.Errorf("point %d has seq %d", i, pt.Seq)
		}
	}
	for i := range freqs {
		if seen[i] != 1 {
			t.Errorf("plan index %d recorded %d times", i, seen[i])
		}
	}
	evs, err := res.run.Events()
	if err != nil {
		t.Fatal(err)
	}
	retries := 0
	for _, e := range evs {
		if e.Type == event.TypeLog && contains(e.Message, "retry") {
			retries++
		}
	}
	if retries == 0 {
		t.Error("no retry logged")
	}
	injected := res.b.Sim.Faults(bench.RoleVoltmeter).Injected() + res.b.Sim.Faults(bench.RoleGenerator).Injected()
	if injected < 3 {
		t.Errorf("only %d faults took effect", injected)
	}
	checkGains(t, res.b, res.points, p.Settle.Tolerance, rangeTaus(res.b))
}

func rangeTaus(b *bench.Bench) []float64 {
	var v []float64
	for _, r := range b.Converter.Ranges() {
		v = append(v, r.TimeConstantS)
	}
	return v
}

func contains(s, sub string) bool {
	for i := 0; i+len(sub) <= len(s); i++ {
		if s[i:i+len(sub)] == sub {
			return true
		}
	}
	return false
}

func TestSimRetryBudgetFails(t *testing.T) {
	// The voltmeter gone for longer than the retry budget: the run fails
	// with the cause in its events and the generator output off.
	cfg := simConfig(t, 100)
	p := shortPlan(plan.RangeRemote)
	hook := func(r *sched.Run, b *bench.Bench) {
		ch, cancel := r.Subscribe()
		go func() {
			defer cancel()
			for ev := range ch {
				if ev.Type == event.TypePoint && ev.Point.Seq == 2 {
					b.Sim.Faults(bench.RoleVoltmeter).Gone(20 * time.Second)
				}
			}
		}()
	}
	res := sweepOn(t, context.Background(), cfg, p, sched.Opts{NoAnalysis: true, RetryBackoff: 5 * time.Millisecond}, hook)
	if res.err == nil || !driver.Transient(res.err) {
		t.Fatalf("Wait = %v, want a transient cause", res.err)
	}
	if res.b.Sim.OutputOn() {
		t.Error("generator output on after the failure")
	}
	if st := res.r.Status(); st.State != event.Failed {
		t.Errorf("state %q", st.State)
	}
	evs, _ := res.run.Events()
	last := evs[len(evs)-1]
	if last.State != event.Failed || last.Message == "" {
		t.Errorf("last event %+v", last)
	}
}

func TestSimAbortAndCancel(t *testing.T) {
	for _, how := range []string{"abort", "cancel"} {
		t.Run(how, func(t *testing.T) {
			cfg := simConfig(t, 100)
			p := shortPlan(plan.RangeRemote)
			ctx, cancel := context.WithCancel(context.Background())
			defer cancel()
			var onAtStop bool
			hook := func(r *sched.Run, b *bench.Bench) {
				ch, unsub := r.Subscribe()
				go func() {
					defer unsub()
					for ev := range ch {
						if ev.Type == event.TypePoint && ev.Point.Seq == 3 {
							onAtStop = b.Sim.OutputOn()
							if how == "abort" {
								r.Abort()
							} else {
								cancel()
							}
						}
					}
				}()
			}
			res := sweepOn(t, ctx, cfg, p, sched.Opts{NoAnalysis: true}, hook)
			want := event.Aborted
			if how == "cancel" {
				want = event.Interrupted
			}
			if st := res.r.Status(); st.State != want {
				t.Errorf("state %q, want %q (%v)", st.State, want, res.err)
			}
			if !onAtStop {
				t.Log("output was already off when stopping")
			}
			if res.b.Sim.OutputOn() {
				t.Error("generator output on after the run stopped")
			}
		})
	}
}

func TestSimResumeSamePoints(t *testing.T) {
	// An interrupted run resumed on a fresh simulated bench (same seed)
	// gives the points of an uninterrupted run, within the tolerance.
	cfg := simConfig(t, 100)
	p := shortPlan(plan.RangeRemote)
	full := sweepOn(t, context.Background(), cfg, p, sched.Opts{NoAnalysis: true}, nil)
	if full.err != nil {
		t.Fatal(full.err)
	}
	dir := t.TempDir()
	b1, run := newRun(t, cfg, p, dir)
	ctx, cancel := context.WithCancel(context.Background())
	part := sweepRun(t, ctx, b1, run, p, sched.Opts{NoAnalysis: true}, func(r *sched.Run, b *bench.Bench) {
		ch, unsub := r.Subscribe()
		go func() {
			defer unsub()
			for ev := range ch {
				if ev.Type == event.TypePoint && ev.Point.Seq == 5 {
					cancel()
				}
			}
		}()
	})
	b1.Close()
	if part.err == nil || part.r.Status().State != event.Interrupted {
		t.Fatalf("interrupted run: %v, state %q", part.err, part.r.Status().State)
	}
	n0 := len(part.points)
	b2, err := bench.Open(context.Background(), cfg, zerolog.Nop())
	if err != nil {
		t.Fatal(err)
	}
	defer b2.Close()
	last := part.points[n0-1]
	res := sweepRun(t, context.Background(), b2, run, p, sched.Opts{NoAnalysis: true, Resume: true, RangeKnown: true, CurrentRange: b2.Sim.ConverterRange()}, nil)
	_ = last
	run.Close()
	if res.err != nil {
		t.Fatal(res.err)
	}
	if len(res.points) != len(full.points) {
		t.Fatalf("%d points after resume (%d before), %d uninterrupted", len(res.points), n0, len(full.points))
	}
	for i, pt := range res.points {
		f := full.points[i]
		if pt.Seq != i || pt.Index != f.Index || pt.FreqHz != f.FreqHz {
			t.Errorf("point %d: seq %d index %d %g Hz; uninterrupted index %d %g Hz", i, pt.Seq, pt.Index, pt.FreqHz, f.Index, f.FreqHz)
		}
		if e := (pt.VoutVrms / pt.VinVrms) / (f.VoutVrms / f.VinVrms); math.Abs(e-1) > 2*p.Settle.Tolerance {
			t.Errorf("point %d at %g Hz: gain differs by %.2g", i, pt.FreqHz, e-1)
		}
	}
}

func TestSimDemoCorners(t *testing.T) {
	// The demo plan on the demo bench: the corners from the analysis
	// within 0.5 % of the simulated DUT's analytic corners (the crossing
	// of its 1 kHz gain − 3.0103 dB, solved by the simulator's model).
	cfg := simConfig(t, 0)
	p := demoPlan(t)
	res := sweepOn(t, context.Background(), cfg, p, sched.Opts{}, nil)
	if res.err != nil {
		t.Fatal(res.err)
	}
	evs, err := res.run.Events()
	if err != nil {
		t.Fatal(err)
	}
	var result struct {
		LowHz  *float64 `json:"low_hz"`
		HighHz *float64 `json:"high_hz"`
	}
	found := false
	for _, e := range evs {
		if e.Type == event.TypeResult {
			if err := json.Unmarshal(e.Result, &result); err != nil {
				t.Fatal(err)
			}
			found = true
		}
	}
	if !found || result.LowHz == nil || result.HighHz == nil {
		t.Fatalf("no corners in the result (found %v)", found)
	}
	lo, hi := res.b.Sim.DUTCorners(p.Refine.LevelDB)
	for _, c := range []struct{ got, want float64 }{{*result.LowHz, lo}, {*result.HighHz, hi}} {
		if math.Abs(c.got/c.want-1) > 0.005 {
			t.Errorf("corner %g Hz, analytic %g Hz (%+.3f %%)", c.got, c.want, 100*(c.got/c.want-1))
		}
		t.Logf("corner %g Hz, analytic %g Hz (%+.3f %%)", c.got, c.want, 100*(c.got/c.want-1))
	}
	for _, name := range []string{"response.csv", "result.json"} {
		f, err := res.run.OpenFile(name)
		if err != nil {
			t.Errorf("export %s: %v", name, err)
			continue
		}
		f.Close()
	}
}

var _ = sim.RoleGenerator

// flaggedOtherThanDrift reports whether pt carries a flag but the drift
// check's.
func flaggedOtherThanDrift(pt point.Point) bool {
	for _, f := range pt.Flags {
		if f != point.FlagDriftCheck {
			return true
		}
	}
	return false
}
