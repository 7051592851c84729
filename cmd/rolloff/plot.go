package main

import (
	"bytes"
	"context"
	"flag"
	"fmt"
	"io"
	"path/filepath"
	"strings"

	"rolloff/sweep/analysis"
	"rolloff/sweep/export"
	"rolloff/sweep/store"
)

func init() {
	register(&command{
		name:    "plot",
		summary: "plot responses: one, an overlay of several, or the difference of two",
		run:     runPlot,
	})
}

func runPlot(ctx context.Context, env *cmdEnv, args []string) error {
	return plotMain(env.stderr, args)
}

// plotMain is the plot command on an explicit error writer.
func plotMain(stderr io.Writer, args []string) error {
	fs := flag.NewFlagSet("plot", flag.ContinueOnError)
	fs.SetOutput(stderr)
	var af analysisFlags
	af.register(fs, true)
	out := fs.String("o", "", "output file: .png, .svg or .pdf")
	diff := fs.Bool("diff", false, "plot the difference of two runs (second − first)")
	title := fs.String("title", "", "plot title")
	fs.Usage = func() {
		fmt.Fprintf(stderr, "usage: rolloff plot INPUT... -o OUT.(png|svg|pdf) [--diff] [--title TEXT] [analysis options]\n\n"+
			"INPUT is a CSV file or a run directory. One input gives the response plot, several an overlay,\n"+
			"--diff with two inputs the difference second − first.\n\n")
		fs.PrintDefaults()
	}
	inputs, err := parseInterleaved(fs, args)
	if err != nil {
		return err
	}
	usage := func(e error) error { fs.Usage(); return &exitError{code: 2, err: e} }
	if len(inputs) == 0 {
		return usage(fmt.Errorf("no input: give CSV files or run directories"))
	}
	if *out == "" {
		return usage(fmt.Errorf("-o OUT.png|svg|pdf is required"))
	}
	format := strings.ToLower(strings.TrimPrefix(filepath.Ext(*out), "."))
	if format != "png" && format != "svg" && format != "pdf" {
		return usage(fmt.Errorf("-o %q: want a .png, .svg or .pdf file", *out))
	}
	if *diff && len(inputs) != 2 {
		return usage(fmt.Errorf("--diff needs exactly two inputs, got %d", len(inputs)))
	}
	opts, err := af.options()
	if err != nil {
		return &exitError{code: 2, err: err}
	}
	var series []export.Series
	for _, in := range inputs {
		pts, err := export.LoadRun(in, export.ReadOptions{VinVrms: af.vin})
		if err != nil {
			return err
		}
		res, err := analysis.Analyze(pts, opts)
		if err != nil {
			return fmt.Errorf("%s: %w", in, err)
		}
		name := strings.TrimSuffix(filepath.Base(in), filepath.Ext(in))
		series = append(series, export.Series{Name: name, Points: pts, Result: res})
	}
	po := export.PlotOptions{Title: *title}
	var buf bytes.Buffer
	switch {
	case *diff:
		err = export.DiffPlot(&buf, format, po, series[0], series[1])
	case len(series) > 1:
		err = export.Overlay(&buf, format, po, series...)
	default:
		err = export.WritePlot(&buf, format, series[0].Points, series[0].Result, po)
	}
	if err != nil {
		return err
	}
	return store.WriteFileAtomic(*out, buf.Bytes())
}
