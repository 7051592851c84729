package main

import (
	"bytes"
	"context"
	"flag"
	"fmt"
	"io"
	"path/filepath"

	"rolloff/sweep/analysis"
	"rolloff/sweep/report"
	"rolloff/sweep/store"
)

func init() {
	register(&command{
		name:    "report",
		summary: "write a run's one-page PDF report again (report.pdf)",
		run: func(ctx context.Context, env *cmdEnv, args []string) error {
			return reportMain(env.stdout, env.stderr, args)
		},
	})
}

// reportMain is the report command on explicit writers.
func reportMain(stdout, stderr io.Writer, args []string) error {
	fs := flag.NewFlagSet("report", flag.ContinueOnError)
	fs.SetOutput(stderr)
	out := fs.String("o", "", "output file (default RUNDIR/report.pdf)")
	paper := fs.String("paper", "a4", "paper size: a4 or letter")
	mask := fs.String("mask", "", "limit mask file (TOML or .json) to check the response against")
	fs.Usage = func() {
		fmt.Fprintf(stderr, "usage: rolloff report RUNDIR [-o FILE] [--paper a4|letter] [--mask FILE]\n\n"+
			"Writes the run's report: the unit, the bench, the plan, the Bode plot, the figures with their\n"+
			"uncertainties, the model, the mask verdict and the safety statement, on one page where it fits.\n"+
			"The figures are those the run recorded (result.json); the mask is --mask, else the plan's.\n\n")
		fs.PrintDefaults()
	}
	pos, err := parseInterleaved(fs, args)
	if err != nil {
		return err
	}
	usage := func(e error) error { fs.Usage(); return &exitError{code: 2, err: e} }
	if len(pos) != 1 {
		return usage(fmt.Errorf("want one run directory, got %d arguments", len(pos)))
	}
	pp, err := report.ParsePaper(*paper)
	if err != nil {
		return usage(fmt.Errorf("--paper %q: want a4 or letter", *paper))
	}
	var opts report.Options
	if *mask != "" {
		m, err := analysis.LoadMask(*mask)
		if err != nil {
			return err
		}
		opts.Mask = m
	}
	in, err := report.LoadRecorded(pos[0], opts)
	if err != nil {
		return err
	}
	var buf bytes.Buffer
	if err := report.Write(&buf, in, pp); err != nil {
		return err
	}
	dst := *out
	if dst == "" {
		dst = filepath.Join(pos[0], report.FileReport)
	}
	if err := store.WriteFileAtomic(dst, buf.Bytes()); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "wrote %s\n", dst)
	return nil
}
