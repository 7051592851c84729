package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"os"

	"rolloff/configs"
	"rolloff/driver/profile"
	"rolloff/driver/sim"
)

func init() {
	register(&command{
		name:    "sim",
		summary: "serve the simulated bench's instruments on loopback TCP",
		run:     runSim,
	})
}

// runSim starts the simulated bench of a bench file as SCPI servers on
// 127.0.0.1 and serves until interrupted.
func runSim(ctx context.Context, env *cmdEnv, args []string) error {
	fs := flag.NewFlagSet("sim", flag.ContinueOnError)
	fs.SetOutput(env.stderr)
	benchPath := fs.String("bench", "configs/"+configs.SimBench, "bench file with a [sim] table (the embedded file of that name when it is not on disk)")
	serial := fs.Bool("serial", false, "also serve the generator on a pseudo-terminal")
	fs.Usage = func() {
		fmt.Fprintf(env.stderr, "usage: rolloff sim [--bench FILE] [--serial]\n\n"+
			"Serves the simulated bench's instruments as SCPI servers on 127.0.0.1 and\n"+
			"prints one line per instrument (role and address), then serves until\n"+
			"interrupted.\n\n")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		fs.Usage()
		return &exitError{code: 2, err: fmt.Errorf("unexpected argument %q", fs.Arg(0))}
	}
	cfg, err := loadSimBench(*benchPath)
	if err != nil {
		return err
	}
	if cfg.Sim == nil {
		return fmt.Errorf("%s has no [sim] table: nothing to simulate", cfg.File)
	}
	sc, err := sim.FromBenchFile(cfg)
	if err != nil {
		return err
	}
	b, err := sim.New(*sc)
	if err != nil {
		return fmt.Errorf("%s: %w", cfg.File, err)
	}
	defer b.Close()
	if err := b.Start(ctx); err != nil {
		return err
	}
	for _, role := range sim.Roles {
		fmt.Fprintf(env.stdout, "%s %s\n", role, b.Addr(role))
	}
	if *serial {
		path, err := b.ServeSerial(sim.RoleGenerator)
		if err != nil {
			return fmt.Errorf("serving the generator on a pseudo-terminal: %w", err)
		}
		fmt.Fprintf(env.stdout, "%s-serial serial://%s\n", sim.RoleGenerator, path)
	}
	env.log.Info().Str("bench", cfg.File).Float64("time_scale", b.TimeScale()).Msg("simulated bench serving; interrupt to stop")
	<-ctx.Done()
	return b.Close()
}

// loadSimBench loads a bench file from disk, or the embedded file of the
// same base name under configs/ when the path does not exist on disk.
func loadSimBench(path string) (*profile.BenchFile, error) {
	if _, err := os.Stat(path); err == nil {
		return profile.LoadBench(path)
	} else if !errors.Is(err, os.ErrNotExist) {
		return nil, err
	}
	if name, ok := embeddedName(path); ok {
		return configs.LoadBench(name)
	}
	return nil, fmt.Errorf("bench file %s: not found (embedded bench files: configs/%s)", path, configs.SimBench)
}

// embeddedName maps "configs/NAME" or "NAME" to an embedded file name.
func embeddedName(path string) (string, bool) {
	for _, n := range configs.Names() {
		if path == n || path == "configs/"+n {
			return n, true
		}
	}
	return "", false
}
