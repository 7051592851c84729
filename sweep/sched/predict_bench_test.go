package sched_test

import (
	"context"
	"math"
	"testing"

	"rolloff/configs"
	"rolloff/configs/configstest"
	"rolloff/driver/profile"
	"rolloff/sweep/analysis"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
)

// BenchmarkDemoSweepPredicted is BenchmarkDemoSweepHonest with the plan's
// settle.predict on, and with the accuracy figures the prediction owes:
//
//   - err-vs-settled: the largest |our gain − the reference's gain| over
//     all points, relative, in settle tolerances, where the reference is
//     a slow fixed-delay sweep on a fresh simulated bench of the same
//     seed over the same frequencies in the same order, waiting refTau
//     time constants of the range in use at every point (the converter's
//     approach is then e^−refTau ≈ 3·10⁻⁷ of the step away) and
//     averaging refReads readings;
//     err-ref-conv is that reference's own worst error from the settled
//     value of the simulator's model, in tolerances (its reading noise);
//   - corner-low-rel, corner-high-rel: |our corner − the reference's| /
//     the reference's, %, both analysed alike (the reference's points are
//     ours with the gain replaced, so the two analyses differ by the
//     gains alone);
//   - predicted: the share of points that ended on a predicted value.
//
// x-fixed-delay and x-bound are measured as in BenchmarkDemoSweepHonest.
// About two minutes with -benchtime 1x.
func BenchmarkDemoSweepPredicted(b *testing.B) {
	on := true
	demoPredicted(b, func(p *plan.Plan) { p.Settle.Predict = &on }, honestConfig)
}

// BenchmarkSecondPolePredicted is BenchmarkDemoSweepPredicted on the demo
// bench whose simulated converter has a second pole: a 0.15 s
// post-filter behind the averager (sim.converter.post_filter_s), its
// approach two exponentials. The profile still says one. The settled
// value is the one-pole converter's (the post-filter passes DC).
func BenchmarkSecondPolePredicted(b *testing.B) {
	on := true
	demoPredicted(b, func(p *plan.Plan) { p.Settle.Predict = &on }, func(tb testing.TB, scale float64) *profile.BenchFile {
		return secondPoleBench(tb, scale, "0.15")
	})
}

// secondPoleBench returns the demo simulated bench at a time scale with
// its converter's output behind a post-filter of postS seconds
// (sim.converter.post_filter_s; the profiles unchanged).
func secondPoleBench(tb testing.TB, scale float64, postS string) *profile.BenchFile {
	tb.Helper()
	m := configstest.MapFS(tb)
	configstest.Edit(tb, m, configs.SimBench, "[sim.converter]\n", "[sim.converter]\npost_filter_s = "+postS+"\n")
	cfg, err := profile.LoadBenchFS(m, configs.SimBench)
	if err != nil {
		tb.Fatal(err)
	}
	cfg.TimeScale = scale
	return cfg
}

// demoPredicted runs the predicted benchmark for the demo plan changed
// by edit on benches of mk (at a time scale).
func demoPredicted(b *testing.B, edit func(*plan.Plan), mk func(testing.TB, float64) *profile.BenchFile) {
	const (
		scale      = 5
		fastScale  = 50
		resolution = 0.1
		refTau     = 15.0
		refReads   = 8
	)
	p := honestPlan(b)
	edit(p)
	tol := p.Settle.Tolerance
	var xf, xb, ours, fixed, bound, vsRef, refConv, lowRel, highRel, share float64
	for i := 0; i < b.N; i++ {
		res := honestOurSweep(b, mk(b, scale), p)
		freqs := make([]float64, len(res.points))
		target := 0.0
		predicted := 0
		for j, pt := range res.points {
			freqs[j] = pt.FreqHz
			target = math.Max(target, math.Abs(pt.GainDB-res.settledDB(pt.FreqHz, pt.RangeIndex, p.Level.Vrms)))
			if pt.Settle == point.SettlePredicted {
				predicted++
			}
		}
		ref, err := fixedDelaySweep(context.Background(), mk(b, fastScale), freqs, p.Level.Vrms, func(tauS float64) float64 { return refTau * tauS }, refReads, &res)
		if err != nil {
			b.Fatal(err)
		}
		if len(ref.gainsDB) != len(res.points) {
			b.Fatalf("reference sweep: %d gains for %d points", len(ref.gainsDB), len(res.points))
		}
		worst, worstHz := 0.0, 0.0
		refPts := make([]point.Point, len(res.points))
		for j, pt := range res.points {
			e := math.Abs(math.Pow(10, (pt.GainDB-ref.gainsDB[j])/20)-1) / tol
			if e > worst {
				worst, worstHz = e, pt.FreqHz
			}
			rp := pt
			rp.GainDB = ref.gainsDB[j]
			rp.VoutVrms = pt.VinVrms * math.Pow(10, rp.GainDB/20)
			refPts[j] = rp
		}
		refErr := (math.Pow(10, ref.worstConvDB/20) - 1) / tol
		opts := analysis.Options{LevelDB: p.Refine.LevelDB, RefHz: p.ReferenceHz}
		ra, err := analysis.Analyze(res.points, opts)
		if err != nil {
			b.Fatal(err)
		}
		rr, err := analysis.Analyze(refPts, opts)
		if err != nil {
			b.Fatal(err)
		}
		lo, hi := cornerRel(b, "low", ra.LowHz, rr.LowHz), cornerRel(b, "high", ra.HighHz, rr.HighHz)
		fr, k := matchFixedDelay(b, &res, freqs, p.Level.Vrms, target, scale, fastScale, resolution, mk)
		bs := honestBoundS(res.sim, res.window, freqs, res.vinVrms, tol, res.minApertureS)
		b.Logf("ours %.2f model-s, %d of %d points predicted, worst %.3f tol from the reference at %g Hz (the reference %.3f tol from the model's settled value); corners %.4g Hz (ref %.4g, %.3f %%), %.5g Hz (ref %.5g, %.3f %%); fixed delay %.2f τ: %.2f model-s; bound %.2f model-s",
			res.durS, predicted, len(res.points), worst, worstHz, refErr, *ra.LowHz, *rr.LowHz, lo, *ra.HighHz, *rr.HighHz, hi, k, fr.durS, bs)
		xf += fr.durS / res.durS
		xb += res.durS / bs
		ours += res.durS
		fixed += fr.durS
		bound += bs
		vsRef += worst
		refConv += refErr
		lowRel += lo
		highRel += hi
		share += float64(predicted) / float64(len(res.points))
	}
	n := float64(b.N)
	b.ReportMetric(xf/n, "x-fixed-delay")
	b.ReportMetric(xb/n, "x-bound")
	b.ReportMetric(ours/n, "sweep-model-s")
	b.ReportMetric(fixed/n, "fixed-model-s")
	b.ReportMetric(bound/n, "bound-model-s")
	b.ReportMetric(vsRef/n, "err-vs-settled")
	b.ReportMetric(refConv/n, "err-ref-conv")
	b.ReportMetric(lowRel/n, "corner-low-rel-%")
	b.ReportMetric(highRel/n, "corner-high-rel-%")
	b.ReportMetric(share/n, "predicted")
}

// cornerRel is |ours − ref| / ref in per cent, failing b when either
// analysis has no such corner.
func cornerRel(b *testing.B, which string, ours, ref *float64) float64 {
	b.Helper()
	if ours == nil || ref == nil {
		b.Fatalf("%s corner: ours %v, the reference's %v", which, ours, ref)
	}
	return 100 * math.Abs(*ours-*ref) / *ref
}
