package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"math"
	"time"

	"rolloff/configs"
	"rolloff/driver/bench"
	"rolloff/sweep/analysis"
	"rolloff/sweep/plan"
	"rolloff/sweep/sched"
	"rolloff/sweep/sched/finish"
	"rolloff/sweep/store"
)

func init() {
	register(&command{
		name:    "demo",
		summary: "measure the built-in simulated line-driver bench end to end",
		run:     runDemoCmd,
	})
}

// demoServe serves the live page of the demo's store and bench, submits
// the demo plan to the daemon's queue, reports the run as sweepAndReport
// does (compare prints the corner comparison) and serves until ctx is
// cancelled. It is set by serve.go.
var demoServe func(ctx context.Context, env *cmdEnv, b *bench.Bench, st *store.Store, addr string, p *plan.Plan, planData []byte, compare func(map[string]any) error) error

// demoPlanFile is the embedded demo plan.
const demoPlanFile = "demo-plan.toml"

// demoMaxCornerErr is the largest relative corner error the demo accepts
// against the simulated DUT's analytic corners.
const demoMaxCornerErr = 0.005

// demoServeTimeScale is the simulated bench's time scale when the demo
// serves the live page: the sweep then takes some twenty seconds, long
// enough to watch the points arrive.
const demoServeTimeScale = 5

func runDemoCmd(ctx context.Context, env *cmdEnv, args []string) error {
	fs := flag.NewFlagSet("rolloff demo", flag.ContinueOnError)
	fs.SetOutput(env.stderr)
	noServe := fs.Bool("no-serve", false, "do not serve the live page; exit when the sweep is done")
	out := fs.String("out", "runs", "run store directory")
	addr := fs.String("addr", "127.0.0.1:8750", "live page listen address host:port")
	bf := addBrokerFlags(fs, true)
	scale := fs.Float64("time-scale", 0, "simulated seconds per wall second, 1 to 1e6 (default: the bench file's 50 with --no-serve, 5 when serving so that points can be watched arriving)")
	fs.Usage = func() {
		fmt.Fprintf(env.stderr, "usage: rolloff demo [--no-serve] [--out DIR] [--addr HOST:PORT]\n\n"+
			"Starts the simulated bench in-process (the line-driver prototype, time-scaled),\n"+
			"measures the demo plan and compares the corners with the DUT's analytic ones.\n\n")
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		fs.Usage()
		return &exitError{code: 2, err: fmt.Errorf("unexpected argument %q", pos[0])}
	}
	if !*noServe && demoServe == nil {
		return &exitError{code: 2, err: errors.New("the live page is not available in this build; use --no-serve")}
	}
	planData, p, err := demoPlan()
	if err != nil {
		return err
	}
	st, err := store.Open(*out)
	if err != nil {
		return fmt.Errorf("--out %s: %w", *out, err)
	}
	st.SetLogger(env.log)
	stopPub, err := bf.startPublisher(env, st.Dir(), "demo", -1)
	if err != nil {
		return err
	}
	defer stopPub(5 * time.Second)
	cfg, err := configs.LoadBench(configs.SimBench)
	if err != nil {
		return err
	}
	switch {
	case *scale != 0:
		if !(*scale >= 1 && *scale <= 1e6) {
			return &exitError{code: 2, err: fmt.Errorf("--time-scale %g: want 1 to 1e6", *scale)}
		}
		cfg.TimeScale = *scale
	case !*noServe:
		cfg.TimeScale = demoServeTimeScale
	}
	b, err := bench.Open(ctx, cfg, env.log)
	if err != nil {
		return err
	}
	defer b.Close()
	if err := p.Validate(b.Limits); err != nil {
		return err
	}
	compare := func(res map[string]any) error {
		return compareCorners(env, b, p, res)
	}
	if !*noServe {
		// The daemon owns the demo's run, so that the page can pause,
		// resume and abort it, and goes on serving until interrupted.
		return demoServe(ctx, env, b, st, *addr, p, planData, compare)
	}
	run, err := st.Create(store.CreateOpts{PlanFile: demoPlanFile, PlanData: planData, Plan: p, BenchFile: b.Raw, Identities: b.Identities})
	if err != nil {
		return err
	}
	defer run.Close()
	opts := sched.Opts{Operator: simOperator(env, b, nil), Finish: finish.Analyze(p, run.Dir(), nil, finish.SpecOf(cfg, p))}
	return sweepAndReport(ctx, env, b, p, run, opts, compare)
}

// demoPlan returns the demo plan, the embedded demo-plan.toml: the line
// driver from 2 Hz to 2 MHz, 12 points per decade, 50 mVrms, ranges
// switched by the relay, corners refined.
func demoPlan() ([]byte, *plan.Plan, error) {
	data, err := configs.ReadFile(demoPlanFile)
	if err != nil {
		return nil, nil, err
	}
	p, err := plan.DecodeTOML(demoPlanFile, data)
	if err != nil {
		return nil, nil, err
	}
	return data, p, nil
}

// compareCorners prints the measured corners against the simulated DUT's
// analytic ones and fails when one is off by more than 0.5 %.
func compareCorners(env *cmdEnv, b *bench.Bench, p *plan.Plan, res map[string]any) error {
	if res == nil {
		return errors.New("demo: no analysis result")
	}
	lowA, highA := b.Sim.DUTCorners(p.Refine.LevelDB)
	var errs []error
	for _, c := range []struct {
		name, key string
		want      float64
	}{{"low", "low_hz", lowA}, {"high", "high_hz", highA}} {
		got, ok := res[c.key].(float64)
		if !ok {
			errs = append(errs, fmt.Errorf("demo: no %s corner measured (analytic %s)", c.name, analysis.FormatHz(c.want, 6)))
			continue
		}
		e := got/c.want - 1
		fmt.Fprintf(env.stdout, "%s corner: measured %s, analytic %s, error %+.3f %%\n",
			c.name, analysis.FormatHz(got, 6), analysis.FormatHz(c.want, 6), 100*e)
		if math.Abs(e) > demoMaxCornerErr {
			errs = append(errs, fmt.Errorf("demo: %s corner off by %.3f %% (limit %.1f %%)", c.name, 100*e, 100*demoMaxCornerErr))
		}
	}
	return errors.Join(errs...)
}
