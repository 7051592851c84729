package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"math"
	"text/tabwriter"
	"time"

	"rolloff/driver/profile"
	"rolloff/driver/sim"
	"rolloff/sweep/analysis"
	"rolloff/sweep/plan"
	"rolloff/sweep/sched/onbench"
)

func init() {
	register(&command{
		name:    "plan",
		summary: "list a plan's points and estimate its duration (switches nothing on)",
		run:     runPlanCmd,
	})
}

func runPlanCmd(ctx context.Context, env *cmdEnv, args []string) error {
	fs := flag.NewFlagSet("rolloff plan", flag.ContinueOnError)
	fs.SetOutput(env.stderr)
	benchPath := fs.String("bench", "", "bench file (required): its profiles give the converter and voltmeter timing")
	fs.Usage = func() {
		fmt.Fprintf(env.stderr, "usage: rolloff plan PLAN --bench BENCH\n\n"+
			"Prints the plan's frequencies and an estimate of the sweep's duration from\n"+
			"the converter's settle model. Only files are read: no instrument is opened.\n\n")
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 1 || *benchPath == "" {
		fs.Usage()
		return &exitError{code: 2, err: errors.New("want one PLAN and --bench BENCH")}
	}
	cfg, err := profile.LoadBench(*benchPath)
	if err != nil {
		return err
	}
	var simCfg *sim.Config
	if cfg.Sim != nil {
		if simCfg, err = sim.FromBenchFile(cfg); err != nil {
			return err
		}
	}
	p, err := plan.Load(pos[0])
	if err != nil {
		return err
	}
	if err := onbench.CheckPlan(cfg, p); err != nil {
		return &exitError{code: 2, err: err} // refused before any instrument is opened
	}
	freqs, err := p.Freqs()
	if err != nil {
		return err
	}
	flat, steep := onbench.Timing(cfg, p, 0), onbench.Timing(cfg, p, 20)
	estFlat, err := plan.Estimate(p, flat)
	if err != nil {
		return err
	}
	estSteep, err := plan.Estimate(p, steep)
	if err != nil {
		return err
	}
	w := tabwriter.NewWriter(env.stdout, 2, 8, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(w, "#\tfrequency (Hz)\tlabel\t\n")
	for i, f := range freqs {
		fmt.Fprintf(w, "%d\t%s\t%s\t\n", i, plan.FormatHz(f.Hz, 6), f.Label)
	}
	w.Flush()
	scale := timeScale(cfg, simCfg)
	fmt.Fprintf(env.stdout, "\n%d points at %g Vrms, strategy %s, tolerance %g, %d readings per point\n",
		len(freqs), p.Level.Vrms, p.Ranging.Strategy, p.Settle.Tolerance, p.Settle.Readings)
	fmt.Fprintf(env.stdout, "estimated duration (settle model, physical time):\n")
	fmt.Fprintf(env.stdout, "  flat response:                %s\n", fmtDur(estFlat.PhysicalS))
	fmt.Fprintf(env.stdout, "  20 dB/decade at every point:  %s (slowest point %s Hz, %s)\n",
		fmtDur(estSteep.PhysicalS), plan.FormatHz(estSteep.SlowestHz, 4), fmtDur(estSteep.SlowestS))
	if estFlat.RefinePoints > 0 {
		fmt.Fprintf(env.stdout, "  corner refinement:            up to %d points, about %s\n",
			estFlat.RefinePoints, fmtDur(float64(estFlat.RefinePoints)*estSteep.PhysicalS/math.Max(1, float64(estSteep.Points))))
	}
	if estFlat.DriftPoints > 0 {
		fmt.Fprintf(env.stdout, "  drift checks:                 %d at %s, about %s to %s\n",
			estFlat.DriftPoints, analysis.FormatHz(p.ReferenceHz, 4), fmtDur(estFlat.DriftS), fmtDur(estSteep.DriftS))
	}
	if scale != 1 {
		fmt.Fprintf(env.stdout, "simulated bench time scale %g: wall time %s to %s\n", scale,
			fmtDur(estFlat.TotalS/scale), fmtDur(estSteep.TotalS/scale))
	}
	return nil
}

// timeScale returns the simulated bench's time scale (1 on real benches).
func timeScale(cfg *profile.BenchFile, simCfg *sim.Config) float64 {
	if simCfg != nil && simCfg.TimeScale > 0 {
		return simCfg.TimeScale
	}
	if cfg.TimeScale > 0 {
		return cfg.TimeScale
	}
	return 1
}

func fmtDur(s float64) string {
	return time.Duration(s * float64(time.Second)).Round(10 * time.Millisecond).String()
}

// parseArgs parses flags placed before, between or after the positional
// arguments, and returns the positional ones.
func parseArgs(fs *flag.FlagSet, args []string) ([]string, error) {
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			return nil, err
		}
		if fs.NArg() == 0 {
			return pos, nil
		}
		rest := fs.Args()
		if rest[0] == "--" {
			return append(pos, rest[1:]...), nil
		}
		pos = append(pos, rest[0])
		args = rest[1:]
	}
}
