package sched_test

import (
	"context"
	"errors"
	"fmt"
	"math"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"rolloff/driver"
	"rolloff/driver/bench"
	"rolloff/driver/profile"
	"rolloff/driver/sim"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/sched"
	"rolloff/sweep/sched/onbench"
	"rolloff/sweep/settle"
)

// BenchmarkPlainMeterSweep measures the demo plan on the plain-meter
// bench (testdata/plain: single readings, no bursts, no integration-time
// command, 25 ms per query; a converter of 0.15 s on every range) and
// compares it, in model time on the simulator's clock, with a real
// fixed-delay sweep run on a fresh bench of the same seed:
//
//   - x-fixed-delay-plain: the fixed-delay sweep's duration over ours.
//     The rival waits ln(1/ε)·τ after every frequency step (ε the plan's
//     tolerance: a first-order step of any size from zero comes within
//     ε of its end, the textbook exponential settle), over the same
//     frequencies in the same order, on the range our sweep used at each
//     (granted without hunting), and then takes one value with the same
//     reading plan as ours (settle.ChooseAperture on the same meter and
//     latency: the same ripple rejection), where ours takes at least two
//     for its convergence test. Both are at the plan's accuracy;
//     err-ours and err-fixed are the worst relative gain errors against
//     the simulated DUT's analytic response (corrected by the converter's
//     mean bias, settle.MeanFactor), for the reader to check.
//   - x-bound-plain: our sweep's duration over the least time for its
//     points in its order: the first-order settle from each point's value
//     to the next's within the tolerance (settle.DwellS), plus the plan's
//     readings (at least two) with the reading plan above: how near the
//     waiting is to the physics. Where the response falls by a step
//     larger than the tolerance at every point (a roll-off at 12 points
//     per decade), that settle alone is several τ, and ln(1/ε)·τ is
//     only 6.2 τ: no waiting strategy is three times quicker there.
//   - points-per-s: our sweep's points per model second.
func BenchmarkPlainMeterSweep(b *testing.B) { plainMeterSweep(b, func(*plan.Plan) {}) }

// BenchmarkPlainMeterSweepPredicted is BenchmarkPlainMeterSweep with the
// plan's settle.predict on.
func BenchmarkPlainMeterSweepPredicted(b *testing.B) {
	on := true
	plainMeterSweep(b, func(p *plan.Plan) { p.Settle.Predict = &on })
}

// plainMeterSweep runs the plain-meter benchmark for the demo plan
// changed by edit.
func plainMeterSweep(b *testing.B, edit func(*plan.Plan)) {
	const scale = 4
	p := demoPlan(b)
	edit(p)
	var xf, xb, ours, fixed, pps, errOurs, errFixed float64
	for i := 0; i < b.N; i++ {
		cfg := plainConfig(b, "plain-bench.toml", scale)
		bn, run := newRun(b, cfg, p, b.TempDir())
		t0 := bn.Sim.ModelTime()
		res := sweepRun(b, context.Background(), bn, run, p, sched.Opts{NoAnalysis: true}, nil)
		durS := bn.Sim.ModelTime() - t0
		taus := rangeTaus(bn)
		e := plainWorstErr(bn, res.points, taus)
		bound := plainBoundS(cfg, res.points, taus, p.Settle.Tolerance, max(2, p.Settle.Readings), bn.Sim.Config().Voltmeter.QueryLatencyS)
		run.Close()
		bn.Close()
		if res.err != nil {
			b.Fatal(res.err)
		}
		fr, err := plainFixedDelaySweep(context.Background(), plainConfig(b, "plain-bench.toml", scale), res.points, p.Level.Vrms, p.Settle.Tolerance)
		if err != nil {
			b.Fatal(err)
		}
		b.Logf("ours %d points in %.2f model-s (worst %.3g), fixed delay %.2f model-s (worst %.3g)", len(res.points), durS, e, fr.durS, fr.worstRel)
		xf += fr.durS / durS
		xb += durS / bound
		ours += durS
		fixed += fr.durS
		pps += float64(len(res.points)) / durS
		errOurs += e
		errFixed += fr.worstRel
	}
	n := float64(b.N)
	b.ReportMetric(xf/n, "x-fixed-delay-plain")
	b.ReportMetric(xb/n, "x-bound-plain")
	b.ReportMetric(ours/n, "sweep-model-s")
	b.ReportMetric(fixed/n, "fixed-model-s")
	b.ReportMetric(pps/n, "points-per-s")
	b.ReportMetric(errOurs/n, "err-ours")
	b.ReportMetric(errFixed/n, "err-fixed")
}

// plainBoundS is the least time for the points pts in their order (see
// BenchmarkPlainMeterSweep): the exact first-order settle between
// consecutive values plus n readings each.
func plainBoundS(cfg *profile.BenchFile, pts []point.Point, taus []float64, tol float64, n int, latencyS float64) float64 {
	m := onbench.Meter(cfg)
	m.OverheadS = latencyS
	prev, sum := 0.0, 0.0
	for _, pt := range pts {
		tau := taus[pt.RangeIndex]
		rd, _ := settle.ChooseAperture(pt.FreqHz, tau, 0.25*tol, m)
		sum += settle.DwellS(tau, prev, pt.VoutVrms, tol) + float64(n)*rd.TimeS(m)
		prev = pt.VoutVrms
	}
	return sum
}

// plainWorstErr is the worst relative error of the unflagged points
// against the simulated DUT (as checkGains).
func plainWorstErr(bn *bench.Bench, pts []point.Point, taus []float64) float64 {
	var worst float64
	for _, pt := range pts {
		if pt.Excluded() {
			continue
		}
		want := dutGain(bn, pt.FreqHz) * settle.MeanFactor(pt.FreqHz, taus[pt.RangeIndex])
		worst = math.Max(worst, math.Abs(pt.VoutVrms/pt.VinVrms/want-1))
	}
	return worst
}

type plainFixed struct {
	durS     float64
	worstRel float64
}

// plainFixedDelaySweep is the fixed-delay sweep of BenchmarkPlainMeterSweep
// on a fresh simulated bench of cfg, through the bench's driver roles,
// timed on the simulator's clock from the amplitude setting to the
// output off.
func plainFixedDelaySweep(ctx context.Context, cfg *profile.BenchFile, pts []point.Point, vrms, tol float64) (plainFixed, error) {
	var res plainFixed
	bn, err := bench.Open(ctx, cfg, zerolog.Nop())
	if err != nil {
		return res, err
	}
	defer bn.Close()
	sm, gen, dvm, conv := bn.Sim, bn.Generator, bn.DCVoltmeter, bn.Converter
	sw, ok := conv.(driver.RangeSwitcher)
	if !ok {
		return res, errors.New("the converter is not remotely ranged")
	}
	ranges := conv.Ranges()
	fail := func(what string, err error) (plainFixed, error) {
		_ = gen.SetOutput(ctx, false)
		return res, fmt.Errorf("fixed-delay sweep: %s: %w", what, err)
	}
	m := onbench.Meter(cfg)
	m.OverheadS = sm.Config().Voltmeter.QueryLatencyS
	if err := dvm.ConfigureDC(ctx, bn.DCConfig); err != nil {
		return fail("voltmeter", err)
	}
	t0 := sm.ModelTime()
	if err := gen.SetAmplitude(ctx, vrms); err != nil {
		return fail("amplitude", err)
	}
	rng := sm.ConverterRange()
	for i, pt := range pts {
		if pt.RangeIndex != rng {
			if err := sw.SwitchRange(ctx, pt.RangeIndex); err != nil {
				return fail("range", err)
			}
			rng = pt.RangeIndex
		}
		tStep := sm.ModelTime()
		if err := gen.SetFrequency(ctx, pt.FreqHz); err != nil {
			return fail("frequency", err)
		}
		if i == 0 {
			if err := gen.SetOutput(ctx, true); err != nil {
				return fail("output", err)
			}
		}
		tau := ranges[rng].TimeConstantS
		rd, _ := settle.ChooseAperture(pt.FreqHz, tau, 0.25*tol, m)
		plainWaitModel(ctx, sm, tStep+tau*math.Log(1/tol))
		var sum float64
		n := max(1, rd.Average)
		tr := sm.ModelTime()
		for k := 0; k < n; k++ {
			if rd.SpacingS > 0 {
				plainWaitModel(ctx, sm, tr+float64(k)*rd.SpacingS)
			}
			v, err := dvm.ReadDC(ctx)
			if err != nil {
				return fail(fmt.Sprintf("reading at %g Hz", pt.FreqHz), err)
			}
			sum += v
		}
		cr, err := conv.Scale(rng, sum/float64(n))
		if err != nil {
			return fail("scale", err)
		}
		want := dutGain(bn, pt.FreqHz) * settle.MeanFactor(pt.FreqHz, tau)
		if !pt.Excluded() {
			res.worstRel = math.Max(res.worstRel, math.Abs(cr.Vrms/vrms/want-1))
		}
	}
	if err := gen.SetOutput(ctx, false); err != nil {
		return fail("output off", err)
	}
	res.durS = sm.ModelTime() - t0
	return res, nil
}

// plainWaitModel sleeps until the simulator's clock reaches tS.
func plainWaitModel(ctx context.Context, sm *sim.Bench, tS float64) {
	for {
		now := sm.ModelTime()
		if now >= tS || ctx.Err() != nil {
			return
		}
		time.Sleep(time.Duration((tS - now) / sm.TimeScale() * float64(time.Second)))
	}
}
