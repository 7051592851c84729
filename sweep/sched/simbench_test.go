package sched_test

import (
	"context"
	"math"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"rolloff/configs"
	"rolloff/driver/bench"
	"rolloff/driver/profile"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/sched"
	"rolloff/sweep/sched/finish"
	"rolloff/sweep/sched/onbench"
	"rolloff/sweep/settle"
	"rolloff/sweep/store"
)

// simConfig returns the demo simulated bench's configuration with the
// given time scale (model seconds per wall second).
func simConfig(t testing.TB, scale float64) *profile.BenchFile {
	t.Helper()
	cfg, err := configs.LoadBench(configs.SimBench)
	if err != nil {
		t.Fatal(err)
	}
	if scale > 0 {
		cfg.TimeScale = scale
	}
	return cfg
}

// demoPlan is the demo's plan, the shipped demo-plan.toml (2 Hz to
// 2 MHz, 12 points per decade, 50 mVrms, remote ranging, refinement).
func demoPlan(t testing.TB) *plan.Plan {
	t.Helper()
	data, err := configs.ReadFile("demo-plan.toml")
	if err != nil {
		t.Fatal(err)
	}
	p, err := plan.DecodeTOML("demo-plan.toml", data)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

type simRun struct {
	b      *bench.Bench
	run    *store.Run
	r      *sched.Run
	err    error
	wallS  float64
	points []point.Point
}

// newRun opens a bench and a run in a fresh store.
func newRun(t testing.TB, cfg *profile.BenchFile, p *plan.Plan, dir string) (*bench.Bench, *store.Run) {
	t.Helper()
	b, err := bench.Open(context.Background(), cfg, zerolog.Nop())
	if err != nil {
		t.Fatal(err)
	}
	st, err := store.Open(dir)
	if err != nil {
		b.Close()
		t.Fatal(err)
	}
	data := []byte("name = \"test\"\n")
	run, err := st.Create(store.CreateOpts{PlanFile: "plan.toml", PlanData: data, Plan: p, BenchFile: cfg.Raw})
	if err != nil {
		b.Close()
		t.Fatal(err)
	}
	return b, run
}

// sweepOn runs p on a fresh simulated bench of cfg and waits for it.
func sweepOn(t testing.TB, ctx context.Context, cfg *profile.BenchFile, p *plan.Plan, opts sched.Opts, hook func(*sched.Run, *bench.Bench)) simRun {
	t.Helper()
	b, run := newRun(t, cfg, p, t.TempDir())
	defer b.Close()
	defer run.Close()
	return sweepRun(t, ctx, b, run, p, opts, hook)
}

func sweepRun(t testing.TB, ctx context.Context, b *bench.Bench, run *store.Run, p *plan.Plan, opts sched.Opts, hook func(*sched.Run, *bench.Bench)) simRun {
	t.Helper()
	inst := onbench.Instruments(b, zerolog.Nop())
	if i := b.Sim.ConverterRange(); i >= 0 && !opts.RangeKnown {
		opts.RangeKnown, opts.CurrentRange = true, i
	}
	if opts.Operator == nil {
		opts.Operator = func(ctx context.Context, pr event.Prompt) (int, error) {
			return pr.RangeIndex, b.Sim.SelectRange(pr.RangeIndex)
		}
	}
	if opts.Finish == nil && !opts.NoAnalysis {
		opts.Finish = finish.Analyze(p, run.Dir(), nil, nil)
	}
	t0 := time.Now()
	r := sched.Start(ctx, inst, p, run, opts)
	if hook != nil {
		hook(r, b)
	}
	err := r.Wait()
	wall := time.Since(t0).Seconds()
	pts, perr := run.Points()
	if perr != nil {
		t.Fatal(perr)
	}
	return simRun{b: b, run: run, r: r, err: err, wallS: wall, points: pts}
}

// figures computes, for a run's points in measurement order, the
// physical lower bound (the first-order settle from the previous point's
// value to the tolerance, plus the readings at the apertures the settle
// model picks) and the fixed worst-case delay sweep (the dwell of the
// worst step of the sweep on the slowest range at every point, plus the
// same readings).
func figures(pts []point.Point, p *plan.Plan, cfg *profile.BenchFile) (boundS, fixedS float64) {
	ranges := cfg.Converter.Spec.DriverRanges()
	m := onbench.Meter(cfg)
	tol := p.Settle.Tolerance
	n := max(2, p.Settle.Readings)
	tauMax := 0.0
	for _, rg := range ranges {
		tauMax = math.Max(tauMax, rg.TimeConstantS)
	}
	prev := 0.0
	worst := 0.0
	var reads float64
	for _, pt := range pts {
		tau := ranges[pt.RangeIndex].TimeConstantS
		boundS += settle.DwellS(tau, prev, pt.VoutVrms, tol)
		worst = math.Max(worst, settle.DwellS(tauMax, prev, pt.VoutVrms, tol))
		rd, _ := settle.ChooseAperture(pt.FreqHz, tau, 0.25*tol, m)
		reads += float64(n) * rd.TimeS(m)
		prev = pt.VoutVrms
	}
	boundS += reads
	fixedS = float64(len(pts))*worst + reads
	return boundS, fixedS
}

// BenchmarkDemoSweep measures the demo sweep (the demo DUT and plan) on
// the simulated bench at a time scale of 5 and reports, in physical
// (model) time, x-bound = sweep time / physical lower bound (target
// ≤ 1.25) and x-fixed-delay = fixed worst-case delay sweep / sweep time
// (target ≥ 3). The sweep time is the wall time from Start to the end of
// the run times the time scale; it includes every SCPI exchange, so a
// lower time scale measures the settle strategy rather than the loopback
// latency.
func BenchmarkDemoSweep(b *testing.B) {
	const scale = 5
	cfg := simConfig(b, scale)
	p := demoPlan(b)
	var xb, xf, sweepS, boundSum float64
	for i := 0; i < b.N; i++ {
		res := sweepOn(b, context.Background(), cfg, p, sched.Opts{NoAnalysis: true}, nil)
		if res.err != nil {
			b.Fatal(res.err)
		}
		ours := res.wallS * scale
		bound, fixed := figures(res.points, p, cfg)
		xb += ours / bound
		xf += fixed / ours
		sweepS += ours
		boundSum += bound
	}
	n := float64(b.N)
	b.ReportMetric(xb/n, "x-bound")
	b.ReportMetric(xf/n, "x-fixed-delay")
	b.ReportMetric(sweepS/n, "sweep-model-s")
	b.ReportMetric(boundSum/n, "bound-model-s")
}
