package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"os"
	"path"
	"path/filepath"

	"rolloff/configs"
	"rolloff/driver/bench"
	"rolloff/driver/profile"
	"rolloff/sweep/event"
	"rolloff/sweep/sched"
	"rolloff/sweep/sched/finish"
	"rolloff/sweep/sched/onbench"
	"rolloff/sweep/store"
)

func init() {
	register(&command{
		name:    "resume",
		summary: "continue an interrupted run from its next unmeasured point",
		run:     runResumeCmd,
	})
}

func runResumeCmd(ctx context.Context, env *cmdEnv, args []string) error {
	fs := flag.NewFlagSet("rolloff resume", flag.ContinueOnError)
	fs.SetOutput(env.stderr)
	benchPath := fs.String("bench", "", "bench file (default: the run directory's bench.toml)")
	fs.Usage = func() {
		fmt.Fprintf(env.stderr, "usage: rolloff resume RUNDIR [--bench BENCH]\n\n"+
			"Continues the run in RUNDIR with the same plan: the frequencies already\n"+
			"measured are skipped and the point numbering continues.\n\n")
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 1 {
		fs.Usage()
		return &exitError{code: 2, err: errors.New("want one RUNDIR")}
	}
	dir := filepath.Clean(pos[0])
	st, err := store.Open(filepath.Dir(dir))
	if err != nil {
		return fmt.Errorf("%s: %w", dir, err)
	}
	st.SetLogger(env.log)
	run, err := st.OpenRun(filepath.Base(dir))
	if err != nil {
		return err
	}
	defer run.Close()
	if s := run.Meta().State; s == event.Done {
		return fmt.Errorf("run %s is already done", run.ID())
	}
	if err := run.Lock(); err != nil {
		return err
	}
	p, err := run.Plan()
	if err != nil {
		return err
	}
	var cfg *profile.BenchFile
	if *benchPath != "" {
		cfg, err = bench.Load(*benchPath)
	} else {
		cfg, err = storedBench(dir)
	}
	if err != nil {
		return err
	}
	if err := p.Validate(cfg.Limits.Driver()); err != nil {
		return err
	}
	b, err := onbench.Open(ctx, cfg, env.log)
	if err != nil {
		return err
	}
	defer b.Close()
	opts := sched.Opts{Resume: true, Operator: terminalOperator(env), Finish: finish.Analyze(p, run.Dir(), nil, finish.SpecOf(cfg, p))}
	if b.Sim != nil {
		opts.Operator = simOperator(env, b, opts.Operator)
	}
	return sweepAndReport(ctx, env, b, p, run, opts, nil)
}

// storedBench loads the run directory's bench.toml. Its profiles are
// looked for beside it, then among the shipped profiles (the demo
// bench's are embedded).
func storedBench(dir string) (*profile.BenchFile, error) {
	name := filepath.Join(dir, store.FileBench)
	data, err := os.ReadFile(name)
	if err != nil {
		return nil, fmt.Errorf("run %s has no %s: give --bench: %w", dir, store.FileBench, err)
	}
	read := func(n string) ([]byte, error) {
		if d, err := os.ReadFile(n); err == nil {
			return d, nil
		}
		return configs.ReadFile(path.Base(filepath.ToSlash(n)))
	}
	resolve := func(rel string) string {
		if filepath.IsAbs(rel) {
			return rel
		}
		return filepath.Join(dir, filepath.FromSlash(rel))
	}
	return profile.DecodeBench(name, data, read, resolve)
}
