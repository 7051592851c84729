package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"path/filepath"

	"rolloff/sweep/analysis"
	"rolloff/sweep/batch"
	"rolloff/sweep/report"
)

func init() {
	register(&command{
		name:    "batch",
		summary: "compare the runs of several units: batch.csv and a summary PDF with yield and Cpk",
		run: func(ctx context.Context, env *cmdEnv, args []string) error {
			return batchMain(env.stdout, env.stderr, args)
		},
	})
}

// batchMain is the batch command on explicit writers.
func batchMain(stdout, stderr io.Writer, args []string) error {
	fs := flag.NewFlagSet("batch", flag.ContinueOnError)
	fs.SetOutput(stderr)
	out := fs.String("o", "", "output directory for batch.csv and batch-summary.pdf (required)")
	mask := fs.String("mask", "", "limit mask file (TOML or .json) every unit is checked against")
	ref := fs.String("reference", "", "run directory of the reference unit")
	paper := fs.String("paper", "a4", "paper size of the summary: a4 or letter")
	fs.Usage = func() {
		fmt.Fprintf(stderr, "usage: rolloff batch RUNDIR... [--mask FILE] [--reference RUNDIR] [--paper a4|letter] -o DIR\n\n"+
			"Analyses each run, checks it against the mask and writes DIR/batch.csv (one row per unit)\n"+
			"and DIR/batch-summary.pdf (yield, strip plots, overlay, statistics with Cpk).\n"+
			"Exit status %d when a unit fails the mask or cannot be analysed.\n\n", exitMaskFailed)
		fs.PrintDefaults()
	}
	runs, err := parseInterleaved(fs, args)
	if err != nil {
		return err
	}
	usage := func(e error) error { fs.Usage(); return &exitError{code: 2, err: e} }
	if len(runs) == 0 {
		return usage(fmt.Errorf("no runs: give run directories"))
	}
	if *out == "" {
		return usage(fmt.Errorf("-o DIR is required"))
	}
	pp, err := report.ParsePaper(*paper)
	if err != nil {
		return usage(fmt.Errorf("--paper %q: want a4 or letter", *paper))
	}
	opts := batch.Options{Reference: *ref}
	if *mask != "" {
		m, err := analysis.LoadMask(*mask)
		if err != nil {
			return err
		}
		opts.Mask = m
	}
	b, err := batch.Load(runs, opts)
	if err != nil {
		return err
	}
	if err := batch.Write(*out, b, pp, report.Version()); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "%d units, %d pass, yield %.1f %%\nwrote %s and %s\n", len(b.Units), b.Passed, 100*b.Yield,
		filepath.Join(*out, batch.FileCSV), filepath.Join(*out, batch.FileSummary))
	if b.Passed < len(b.Units) {
		return &exitError{code: exitMaskFailed, err: fmt.Errorf("%d of %d units failed", len(b.Units)-b.Passed, len(b.Units))}
	}
	return nil
}
