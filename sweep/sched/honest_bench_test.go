package sched_test

import (
	"context"
	"errors"
	"fmt"
	"math"
	"sync"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"rolloff/configs"
	"rolloff/driver"
	"rolloff/driver/bench"
	"rolloff/driver/profile"
	"rolloff/driver/sim"
	"rolloff/driver/sim/model"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/sched"
	"rolloff/sweep/sched/onbench"
	"rolloff/sweep/store"
)

// BenchmarkDemoSweepHonest measures the demo sweep (demo plan, demo
// bench, seed 1) on the simulated bench and compares it, in model time,
// with two references that do not come from the scheduler's own models:
//
//   - x-fixed-delay: a real fixed-delay sweep, run on a fresh simulated
//     bench of the same seed over the same frequencies in the same order
//     (see fixedDelaySweep), with the shortest delay (found by bisection,
//     every candidate a real run) whose worst error is no larger than our
//     sweep's. The figure is the ratio of the two measured durations.
//     The errors compared are against the gain a fully settled reading
//     would show: the DUT's true output (package model) through the
//     converter's input droop and noise floor (err-ours-conv-db,
//     err-fixed-conv-db). Against the DUT's true gain itself
//     (err-ours-db, err-fixed-db) no waiting strategy can beat the
//     settled reading's own error, err-floor-db (0.042 dB at 2 MHz from
//     the droop), while our sweep can land below it by chance, its
//     readings there stopping short on a falling approach and so
//     offsetting the droop: matching on it would ask the rival for the
//     impossible. delay-tau is the delay found, in time constants of the
//     range in use.
//   - x-bound: our sweep time over the least time in which any strategy
//     reading the converter could know each point's value to the plan's
//     tolerance (see honestBoundS).
//
// Our sweep runs at the same time scale as BenchmarkDemoSweep (5); the
// bisection runs at a higher scale to stay quick, and the delay found is
// then run again at the benchmark's scale (with 0.1 τ more side by side,
// taken when the first misses there), where its time and error are the
// ones reported. The benchmark
// takes about 90 s with -benchtime 1x.
func BenchmarkDemoSweepHonest(b *testing.B) {
	const (
		scale      = 5
		fastScale  = 50
		resolution = 0.1 // delay resolution of the bisection, time constants
	)
	p := honestPlan(b)
	var xf, xb, ours, fixed, bound, errOurs, errFixed, convOurs, convFixed, errFloor, kSum float64
	for i := 0; i < b.N; i++ {
		res := honestOurSweep(b, honestConfig(b, scale), p)
		target, trueErr := 0.0, 0.0
		freqs := make([]float64, len(res.points))
		for j, pt := range res.points {
			freqs[j] = pt.FreqHz
			trueErr = math.Max(trueErr, math.Abs(pt.GainDB-res.dut.GainDBAt(pt.FreqHz)))
			target = math.Max(target, math.Abs(pt.GainDB-res.settledDB(pt.FreqHz, pt.RangeIndex, p.Level.Vrms)))
		}
		fr, kHi := matchFixedDelay(b, &res, freqs, p.Level.Vrms, target, scale, fastScale, resolution, honestConfig)
		bs := honestBoundS(res.sim, res.window, freqs, res.vinVrms, p.Settle.Tolerance, res.minApertureS)
		b.Logf("ours %.2f s (worst %.4f dB from the settled value, %.4f dB from the true gain), fixed delay %.2f τ: %.2f s (worst %.4f dB at %g Hz, %.4f dB; %d range changes), bound %.2f s",
			res.durS, target, trueErr, kHi, fr.durS, fr.worstConvDB, fr.worstHz, fr.worstDB, fr.rangeChanges, bs)
		xf += fr.durS / res.durS
		xb += res.durS / bs
		ours += res.durS
		fixed += fr.durS
		bound += bs
		errOurs += trueErr
		errFixed += fr.worstDB
		convOurs += target
		convFixed += fr.worstConvDB
		errFloor += res.floorDB
		kSum += kHi
	}
	n := float64(b.N)
	b.ReportMetric(xf/n, "x-fixed-delay")
	b.ReportMetric(xb/n, "x-bound")
	b.ReportMetric(ours/n, "sweep-model-s")
	b.ReportMetric(fixed/n, "fixed-model-s")
	b.ReportMetric(bound/n, "bound-model-s")
	b.ReportMetric(errOurs/n, "err-ours-db")
	b.ReportMetric(errFixed/n, "err-fixed-db")
	b.ReportMetric(convOurs/n, "err-ours-conv-db")
	b.ReportMetric(convFixed/n, "err-fixed-conv-db")
	b.ReportMetric(errFloor/n, "err-floor-db")
	b.ReportMetric(kSum/n, "delay-tau")
}

// matchFixedDelay finds the shortest fixed delay, in time constants of
// the range in use, whose fixed-delay sweep (fixedDelaySweep) over freqs
// on fresh benches of mk is no worse than target dB from the settled
// value: a bisection at
// fastScale, every candidate a real sweep, then the delay found run again
// at scale, where its time and error are the ones returned.
func matchFixedDelay(b *testing.B, res *ourSweep, freqs []float64, vrms, target, scale, fastScale, resolution float64, mk func(testing.TB, float64) *profile.BenchFile) (fixedResult, float64) {
	b.Helper()
	sweep := func(cfg *profile.BenchFile, k float64) (fixedResult, error) {
		return fixedDelaySweep(context.Background(), cfg, freqs, vrms, func(tauS float64) float64 { return k * tauS }, 1, res)
	}
	logRun := func(scale, k float64, fr fixedResult) {
		b.Logf("fixed delay %.4g τ at time scale %g: %.1f model-s, worst %.4f dB", k, scale, fr.durS, fr.worstConvDB)
	}
	run := func(scale, k float64) fixedResult {
		fr, err := sweep(mk(b, scale), k)
		if err != nil {
			b.Fatal(err)
		}
		logRun(scale, k, fr)
		return fr
	}
	pass := func(k float64) bool { return run(fastScale, k).worstConvDB <= target }
	// Bisection on the delay, every candidate a real sweep; the
	// bracket widens (up, then down) until its ends fail and pass.
	kLo, kHi := 4.0, 7.0
	loFailed := false
	for !pass(kHi) {
		kLo, kHi, loFailed = kHi, 2*kHi, true
		if kHi > 64 {
			b.Fatalf("no fixed delay up to %g τ reaches our worst error %.4f dB", kLo, target)
		}
	}
	for {
		for kHi-kLo > resolution {
			mid := (kLo + kHi) / 2
			if pass(mid) {
				kHi = mid
			} else {
				kLo, loFailed = mid, true
			}
		}
		if loFailed || kLo < resolution || !pass(kLo) {
			break
		}
		kLo, kHi = kLo/2, kLo
	}
	// The delay found, at the benchmark's scale (less loopback latency
	// in model time, so slightly less settling than during the
	// search): it and the next step up run side by side on two
	// benches, to save a run when the first misses.
	var pair [2]fixedResult
	var pairErr [2]error
	var wg sync.WaitGroup
	for j := range pair {
		cfg := mk(b, scale)
		wg.Add(1)
		go func() {
			defer wg.Done()
			pair[j], pairErr[j] = sweep(cfg, kHi+float64(j)*resolution)
		}()
	}
	wg.Wait()
	for j := range pair {
		if pairErr[j] != nil {
			b.Fatal(pairErr[j])
		}
		logRun(scale, kHi+float64(j)*resolution, pair[j])
	}
	fr := pair[0]
	if fr.worstConvDB > target {
		kHi, fr = kHi+resolution, pair[1]
	}
	for tries := 0; fr.worstConvDB > target && tries < 2; tries++ {
		kHi += resolution
		fr = run(scale, kHi)
	}
	if fr.worstConvDB > target {
		b.Fatalf("fixed delay %g τ: worst error %.4f dB above ours %.4f dB", kHi, fr.worstConvDB, target)
	}
	return fr, kHi
}

// honestPlan is the shipped demo-plan.toml.
func honestPlan(tb testing.TB) *plan.Plan {
	tb.Helper()
	data, err := configs.ReadFile("demo-plan.toml")
	if err != nil {
		tb.Fatal(err)
	}
	p, err := plan.DecodeTOML("demo-plan.toml", data)
	if err != nil {
		tb.Fatal(err)
	}
	return p
}

// honestConfig returns the demo simulated bench at a time scale.
func honestConfig(tb testing.TB, scale float64) *profile.BenchFile {
	tb.Helper()
	cfg, err := configs.LoadBench(configs.SimBench)
	if err != nil {
		tb.Fatal(err)
	}
	cfg.TimeScale = scale
	return cfg
}

// ourSweep is the scheduler's sweep with what the references need from
// its bench.
type ourSweep struct {
	durS         float64 // model seconds from Start to the end of Wait
	points       []point.Point
	sim          sim.Config
	dut          model.DUT
	window       driver.Window
	vinVrms      float64 // at the DUT input, from the simulator
	minApertureS float64 // the voltmeter's shortest aperture
	floorDB      float64 // worst |error| of fully settled readings, dB
}

// honestOurSweep runs plan p with the scheduler on a fresh simulated
// bench of cfg and times it on the simulator's clock.
func honestOurSweep(tb testing.TB, cfg *profile.BenchFile, p *plan.Plan) ourSweep {
	tb.Helper()
	ctx := context.Background()
	bn, err := bench.Open(ctx, cfg, zerolog.Nop())
	if err != nil {
		tb.Fatal(err)
	}
	defer bn.Close()
	st, err := store.Open(tb.TempDir())
	if err != nil {
		tb.Fatal(err)
	}
	run, err := st.Create(store.CreateOpts{PlanFile: "plan.toml", PlanData: []byte("name = \"test\"\n"), Plan: p, BenchFile: cfg.Raw})
	if err != nil {
		tb.Fatal(err)
	}
	defer run.Close()
	opts := sched.Opts{NoAnalysis: true}
	if i := bn.Sim.ConverterRange(); i >= 0 {
		opts.RangeKnown, opts.CurrentRange = true, i
	}
	opts.Operator = func(ctx context.Context, pr event.Prompt) (int, error) {
		return pr.RangeIndex, bn.Sim.SelectRange(pr.RangeIndex)
	}
	t0 := bn.Sim.ModelTime()
	r := sched.Start(ctx, onbench.Instruments(bn, zerolog.Nop()), p, run, opts)
	if err := r.Wait(); err != nil {
		tb.Fatal(err)
	}
	out := ourSweep{durS: bn.Sim.ModelTime() - t0, sim: bn.Sim.Config(), window: bn.Converter.Window()}
	if out.points, err = run.Points(); err != nil {
		tb.Fatal(err)
	}
	out.dut = simDUT(out.sim)
	out.minApertureS = minApertureS(cfg)
	// The DUT input for the plan's level, read back from the simulator.
	if err := bn.Generator.SetAmplitude(ctx, p.Level.Vrms); err != nil {
		tb.Fatal(err)
	}
	if err := bn.Generator.SetOutput(ctx, true); err != nil {
		tb.Fatal(err)
	}
	out.vinVrms = bn.Sim.DUTInputVrms()
	if err := bn.Generator.SetOutput(ctx, false); err != nil {
		tb.Fatal(err)
	}
	for _, pt := range out.points {
		out.floorDB = math.Max(out.floorDB, math.Abs(out.settledDB(pt.FreqHz, pt.RangeIndex, p.Level.Vrms)-out.dut.GainDBAt(pt.FreqHz)))
	}
	return out
}

// settledDB is the gain a fully settled reading on range rng would show
// at freqHz with the generator set to setVrms: the DUT's true output
// through the converter's input droop and noise floor (package model).
func (o *ourSweep) settledDB(freqHz float64, rng int, setVrms float64) float64 {
	ms := converterInput(o.sim, &o.dut, freqHz, o.vinVrms, rng)
	return 20 * math.Log10(math.Sqrt(ms.C0)/setVrms)
}

// simDUT is the simulated DUT of a simulator configuration.
func simDUT(sc sim.Config) model.DUT {
	d := model.DUT{GainDB: sc.DUT.GainDB, ClipV: sc.DUT.ClipV, NoiseVrms: sc.DUT.NoiseVrms}
	for _, s := range sc.DUT.Sections {
		d.Sections = append(d.Sections, model.Section{Kind: s.Kind, FreqHz: s.FreqHz, Q: s.Q, Order: s.Order})
	}
	return d
}

// converterInput is what the simulated converter averages on range rng
// with a sine of vinVrms at freqHz on the DUT input (vinVrms 0: output
// off): the DUT output through the converter's input droop, with the
// range's noise floor added in power.
func converterInput(sc sim.Config, dut *model.DUT, freqHz, vinVrms float64, rng int) model.MeanSquare {
	ms := model.Analyze(model.Signal{Shape: model.Sine, FreqHz: freqHz, Vrms: vinVrms}, dut, sc.Converter.DroopHz, sc.Generator.Harmonics)
	floor := sc.Converter.FloorFraction * sc.Converter.Ranges[rng].FullScaleVrms
	ms.C0 += floor * floor
	return ms
}

// minApertureS is the shortest aperture the bench's DC voltmeter
// accepts, seconds.
func minApertureS(cfg *profile.BenchFile) float64 {
	d := cfg.Voltmeter.DMM
	best := math.Inf(1)
	if d.DC.MaxApertureS > 0 {
		best = d.DC.MinApertureS
	}
	for _, n := range d.DC.NPLC {
		best = math.Min(best, n/d.LineHz)
	}
	return best
}

// honestBoundS is the least time in which any strategy that reads the
// converter's output (rather than predicting its future) could know the
// value of every point to the tolerance tol, from the simulator's
// physics alone (package model; nothing of the scheduler's settle model
// or range choices):
//
//   - the converter is a first-order mean-square averager; when the
//     frequency changes, its ripple-averaged state approaches the new
//     mean square exponentially, m(t) = m∞ + (m0 − m∞)·e^{−t/τ}, from the
//     exact state the previous point left (a model.Averager carries it
//     from point to point, ripple and the unfinished transient included);
//     no reading of the output is within tol of the settled value before
//     √(m/m∞) is within 1 ± tol, which takes τ·ln(|m0 − m∞|/(m∞·ε)),
//     ε = (1 ± tol)² − 1 (model.ApproachS);
//   - one reading then needs an aperture that averages the converter's
//     2f ripple to within tol at any phase, and at least the voltmeter's
//     shortest aperture (model.ApertureS);
//   - the range may be any range on which the settled value is in the
//     converter's window (under to over fraction of full scale), switched
//     in no time at the frequency change; the fastest is taken at every
//     point (the time constant belongs to the range);
//   - noise, the converter's hold, relay settling and every SCPI exchange
//     are left out (each could only lengthen the time), so this is a lower
//     bound for a waiting strategy.
//
// The points are those of our sweep, in its order; the first starts from
// the bench at rest (output off, its noise settled on the first range).
func honestBoundS(sc sim.Config, win driver.Window, freqs []float64, vinVrms, tol, minApS float64) float64 {
	if len(freqs) == 0 {
		return 0
	}
	dut := simDUT(sc)
	r0 := max(sc.Converter.InitialRange, 0)
	rest := converterInput(sc, &dut, freqs[0], 0, r0)
	a := model.NewAverager(0, sc.Converter.Ranges[r0].TimeConstantS, r0)
	a.Set(0, rest, 0, sc.Converter.Ranges[r0].TimeConstantS, r0)
	t := 1000 * sc.Converter.Ranges[r0].TimeConstantS // long at rest
	total := 0.0
	for _, f := range freqs {
		y0 := a.Value(t)
		best, bestRng := math.Inf(1), -1
		var bestMS model.MeanSquare
		for rng, r := range sc.Converter.Ranges {
			ms := converterInput(sc, &dut, f, vinVrms, rng)
			frac := math.Sqrt(ms.C0) / r.FullScaleVrms
			if frac < win.UnderFraction || frac > win.OverFraction {
				continue
			}
			d := model.ApproachS(y0, ms, r.TimeConstantS, tol) + model.ApertureS(ms, r.TimeConstantS, tol, minApS)
			if d < best {
				best, bestRng, bestMS = d, rng, ms
			}
		}
		if bestRng < 0 {
			// Nowhere in the window: the bound is the slowest range's
			// wait to the value (every range is out of spec anyway).
			bestRng = 0
			bestMS = converterInput(sc, &dut, f, vinVrms, 0)
			tau := sc.Converter.Ranges[0].TimeConstantS
			best = model.ApproachS(y0, bestMS, tau, tol) + model.ApertureS(bestMS, tau, tol, minApS)
		}
		a.Set(t, bestMS, t, sc.Converter.Ranges[bestRng].TimeConstantS, bestRng)
		t += best
		total += best
	}
	return total
}

// fixedResult is one fixed-delay sweep.
type fixedResult struct {
	durS         float64   // model seconds from the first command to output off
	gainsDB      []float64 // the gain read at each frequency, in order
	worstDB      float64   // worst |gain − the DUT's true gain|, dB
	worstConvDB  float64   // worst |gain − a fully settled reading's gain|, dB
	worstHz      float64   // where
	rangeChanges int
}

// fixedDelaySweep is the sweep a careful user without a settle model
// would run: at every frequency set the generator, wait delayS(τ) for
// the time constant τ of the selected converter range, read once.
// Everything goes through the bench's driver roles, on a fresh simulated
// bench of cfg; times are on the simulator's clock.
//
//   - Delay: the benchmark uses k·τ of the range in use (a per-range
//     delay is the stronger rival: one delay for every range would wait
//     for the slowest one everywhere).
//   - Reading: one reading over the shortest whole number of ripple
//     periods 1/(2f) not under one power-line cycle (whole periods null
//     the converter's 2f ripple and line hum; common practice).
//   - Ranges: the sweep starts on the bench's range and keeps it while
//     the reading is in the converter's window; a reading outside it
//     moves to the most sensitive range holding the reading at or below
//     full scale (one range up when the output is saturated) and reads
//     again at once: the simulated converter's mean-square state carries
//     over a range change, which this sweep is granted without paying a
//     second delay.
//   - Holds: readings are kept clear of the converter's output holds
//     with the simulator's schedule, which a real user could only guess.
//
// reads readings are averaged in mean square at each point (1 for the
// rival; more for a reference sweep).
//
// These choices favour the fixed-delay sweep, so that the ratio to it is
// not flattered.
func fixedDelaySweep(ctx context.Context, cfg *profile.BenchFile, freqs []float64, vrms float64, delayS func(tauS float64) float64, reads int, ref *ourSweep) (fixedResult, error) {
	var res fixedResult
	bn, err := bench.Open(ctx, cfg, zerolog.Nop())
	if err != nil {
		return res, err
	}
	defer bn.Close()
	sm, gen, dvm, conv := bn.Sim, bn.Generator, bn.DCVoltmeter, bn.Converter
	sw, ok := conv.(driver.RangeSwitcher)
	if !ok {
		return res, errors.New("the demo converter is not remotely ranged")
	}
	ranges := conv.Ranges()
	sc := sm.Config()
	hold := model.Hold{IntervalS: sc.Converter.HoldIntervalS, DurationS: sc.Converter.HoldS}
	line := bn.LineHz
	maxAp := cfg.Voltmeter.DMM.DC.MaxApertureS
	fail := func(what string, err error) error {
		_ = gen.SetOutput(ctx, false)
		return fmt.Errorf("fixed-delay sweep: %s: %w", what, err)
	}
	rng := sm.ConverterRange()
	if rng < 0 {
		rng = len(ranges) - 1
		if err := sw.SwitchRange(ctx, rng); err != nil {
			return res, fail("range", err)
		}
	}
	// holding returns the most sensitive range holding vrms at or below
	// full scale.
	holding := func(v float64) int {
		for i, r := range ranges {
			if v <= r.FullScaleVrms {
				return i
			}
		}
		return len(ranges) - 1
	}
	t0 := sm.ModelTime()
	if err := gen.SetAmplitude(ctx, vrms); err != nil {
		return res, fail("amplitude", err)
	}
	for i, f := range freqs {
		tStep := sm.ModelTime()
		if err := gen.SetFrequency(ctx, f); err != nil {
			return res, fail("frequency", err)
		}
		if i == 0 {
			if err := gen.SetOutput(ctx, true); err != nil {
				return res, fail("output", err)
			}
		}
		n := math.Max(1, math.Ceil(2*f/line-1e-9))
		ap := math.Min(n/(2*f), maxAp)
		if err := dvm.ConfigureDC(ctx, driver.DCConfig{RangeV: bn.DCConfig.RangeV, Aperture: driver.Aperture{Seconds: ap}}); err != nil {
			return res, fail("voltmeter", err)
		}
		waitModel(ctx, sm, clearOfHolds(tStep+delayS(ranges[rng].TimeConstantS), ap, hold))
		for tries := 0; ; tries++ {
			v, err := dvm.ReadDC(ctx)
			over := errors.Is(err, driver.ErrOverload)
			if err != nil && !over {
				return res, fail("reading", err)
			}
			var rd driver.ConverterReading
			if !over {
				if rd, err = conv.Scale(rng, v); err != nil {
					return res, fail("scale", err)
				}
			}
			next := rng
			switch {
			case over:
				next = min(rng+1, len(ranges)-1)
			case rd.Status == driver.OverRange:
				next = min(max(rng+1, holding(rd.Vrms)), len(ranges)-1)
			case rd.Status == driver.UnderRange:
				next = holding(rd.Vrms)
			}
			if next == rng || tries > len(ranges) {
				if over || !(rd.Vrms > 0) {
					return res, fail(fmt.Sprintf("%g Hz", f), fmt.Errorf("no reading in the window (status %v)", rd.Status))
				}
				// More readings of the settled value, averaged in
				// mean square (a reference sweep's; the rival reads once).
				ms := rd.Vrms * rd.Vrms
				for k := 1; k < reads; k++ {
					waitModel(ctx, sm, clearOfHolds(sm.ModelTime(), ap, hold))
					v, err := dvm.ReadDC(ctx)
					if err != nil {
						return res, fail("reading", err)
					}
					r2, err := conv.Scale(rng, v)
					if err != nil {
						return res, fail("scale", err)
					}
					ms += r2.Vrms * r2.Vrms
				}
				g := 10 * math.Log10(ms/float64(max(reads, 1))/(vrms*vrms))
				res.gainsDB = append(res.gainsDB, g)
				res.worstDB = math.Max(res.worstDB, math.Abs(g-ref.dut.GainDBAt(f)))
				if e := math.Abs(g - ref.settledDB(f, rng, vrms)); e > res.worstConvDB {
					res.worstConvDB, res.worstHz = e, f
				}
				break
			}
			if err := sw.SwitchRange(ctx, next); err != nil {
				return res, fail("range", err)
			}
			rng = next
			res.rangeChanges++
			waitModel(ctx, sm, clearOfHolds(sm.ModelTime(), ap, hold))
		}
	}
	if err := gen.SetOutput(ctx, false); err != nil {
		return res, fail("output off", err)
	}
	res.durS = sm.ModelTime() - t0
	return res, nil
}

// holdMarginS keeps a reading this far from a hold, for the SCPI
// exchange between deciding to read and the reading starting.
const holdMarginS = 0.1

// clearOfHolds returns the earliest time not before t at which a reading
// of apertureS seconds stays clear of the hold schedule h.
func clearOfHolds(t, apertureS float64, h model.Hold) float64 {
	if h.IntervalS <= 0 || h.DurationS <= 0 {
		return t
	}
	for {
		k := math.Floor((t + apertureS + holdMarginS) / h.IntervalS)
		start := k * h.IntervalS
		end := start + h.DurationS
		// The hold starting at or before the reading's end.
		if t < end+holdMarginS && t+apertureS+holdMarginS > start {
			t = end + holdMarginS
			continue
		}
		return t
	}
}

// waitModel sleeps until the simulator's clock reaches tS.
func waitModel(ctx context.Context, sm *sim.Bench, tS float64) {
	for {
		now := sm.ModelTime()
		if now >= tS || ctx.Err() != nil {
			return
		}
		time.Sleep(time.Duration((tS - now) / sm.TimeScale() * float64(time.Second)))
	}
}
