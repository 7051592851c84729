package main

import (
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"rolloff/sweep/analysis"
	"rolloff/sweep/export"
)

func init() {
	register(&command{
		name:    "analyze",
		summary: "figures of measured responses: corners, bandwidth, roll-off, limit mask",
		run:     runAnalyze,
	})
}

// exitMaskFailed is the exit status of analyze when a response fails its
// mask (1 is any other error, 2 a usage error).
const exitMaskFailed = 3

// analysisFlags are the options analyze and plot share.
type analysisFlags struct {
	level   float64
	refHz   float64
	ref     string
	band    string
	vin     float64
	mask    string
	through string
}

func (af *analysisFlags) register(fs *flag.FlagSet, withMask bool) {
	fs.Float64Var(&af.level, "level", analysis.HalfPowerDB, "corner level relative to the reference, dB (negative)")
	fs.Float64Var(&af.refHz, "ref-hz", 0, "reference frequency, Hz (default 1000)")
	fs.StringVar(&af.ref, "ref", "", `reference mode: "max" for the passband maximum (or "frequency", "band")`)
	fs.StringVar(&af.band, "band", "", "reference = mean gain over the band LO:HI, Hz")
	fs.Float64Var(&af.vin, "vin", 0, "input level for CSV files with vout_vrms but no vin_vrms, Vrms")
	fs.StringVar(&af.through, "through", "", "through run (DUT bypassed) to normalise by: CSV file or run directory")
	if withMask {
		fs.StringVar(&af.mask, "mask", "", "limit mask file (TOML or .json)")
	}
}

// options turns the flags into analysis options.
func (af *analysisFlags) options() (analysis.Options, error) {
	o := analysis.Options{LevelDB: af.level}
	if !(af.level < 0) || math.IsInf(af.level, 0) {
		return o, fmt.Errorf("--level %v: want a negative number of dB", af.level)
	}
	set := 0
	if af.refHz != 0 {
		set++
		o.RefMode, o.RefHz = analysis.RefFrequency, af.refHz
	}
	if af.band != "" {
		set++
		lo, hi, ok := strings.Cut(af.band, ":")
		l, err1 := strconv.ParseFloat(strings.TrimSpace(lo), 64)
		h, err2 := strconv.ParseFloat(strings.TrimSpace(hi), 64)
		if !ok || err1 != nil || err2 != nil || !(l > 0) || !(h > l) || math.IsInf(h, 0) {
			return o, fmt.Errorf("--band %q: want LO:HI in Hz with 0 < LO < HI, e.g. 100:10000", af.band)
		}
		o.RefMode, o.BandLoHz, o.BandHiHz = analysis.RefBand, l, h
	}
	switch af.ref {
	case "":
	case "max":
		set++
		o.RefMode = analysis.RefMax
	case "frequency", "band":
		if (af.ref == "frequency") != (af.refHz != 0 || af.band == "") || (af.ref == "band" && af.band == "") {
			return o, fmt.Errorf("--ref %s: give --ref-hz HZ for frequency or --band LO:HI for band", af.ref)
		}
	default:
		return o, fmt.Errorf("--ref %q: want max (or use --ref-hz HZ / --band LO:HI)", af.ref)
	}
	if set > 1 {
		return o, fmt.Errorf("--ref-hz, --ref max and --band exclude each other: give one")
	}
	if af.vin != 0 && !(af.vin > 0 && !math.IsInf(af.vin, 0)) {
		return o, fmt.Errorf("--vin %v: want a positive input level in Vrms", af.vin)
	}
	if af.mask != "" {
		m, err := analysis.LoadMask(af.mask)
		if err != nil {
			return o, err
		}
		o.Mask = m
	}
	if af.through != "" {
		pts, err := export.LoadRun(af.through, export.ReadOptions{VinVrms: af.vin})
		if err != nil {
			return o, fmt.Errorf("--through: %w", err)
		}
		o.Through = pts
	}
	return o, nil
}

// parseInterleaved parses flags that may come before, between or after the
// positional arguments, and returns the positional ones.
func parseInterleaved(fs *flag.FlagSet, args []string) ([]string, error) {
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			return nil, err
		}
		args = fs.Args()
		if len(args) == 0 {
			return pos, nil
		}
		if args[0] == "--" {
			return append(pos, args[1:]...), nil
		}
		pos = append(pos, args[0])
		args = args[1:]
	}
}

func runAnalyze(ctx context.Context, env *cmdEnv, args []string) error {
	return analyzeMain(env.stdout, env.stderr, args)
}

// analyzeMain is the analyze command on explicit writers.
func analyzeMain(stdout, stderr io.Writer, args []string) error {
	fs := flag.NewFlagSet("analyze", flag.ContinueOnError)
	fs.SetOutput(stderr)
	var af analysisFlags
	af.register(fs, true)
	jsonOut := fs.Bool("json", false, "print result.json instead of the text report (an array for several inputs)")
	mcTrials := fs.Int("monte-carlo", 0, "validate each corner's interval with N Monte Carlo trials of its budget inputs (JCGM 101:2008 §8; 0: the finished run's default, 20000)")
	fs.Usage = func() {
		fmt.Fprintf(stderr, "usage: rolloff analyze FILE.csv|RUNDIR... [--json] [--level DB] [--ref-hz HZ | --ref max | --band LO:HI] [--vin VRMS] [--mask FILE] [--through RUN] [--monte-carlo N]\n\n"+
			"Prints the figures of each response. Exit status %d when a response fails the mask.\n\n", exitMaskFailed)
		fs.PrintDefaults()
	}
	inputs, err := parseInterleaved(fs, args)
	if err != nil {
		return err
	}
	if len(inputs) == 0 {
		fs.Usage()
		return &exitError{code: 2, err: fmt.Errorf("no input: give CSV files or run directories")}
	}
	opts, err := af.options()
	if err != nil {
		return &exitError{code: 2, err: err}
	}
	if *mcTrials < 0 || *mcTrials > analysis.MaxMonteCarloTrials {
		return &exitError{code: 2, err: fmt.Errorf("--monte-carlo %d: want 1 to %d trials", *mcTrials, analysis.MaxMonteCarloTrials)}
	}
	if len(inputs) == 1 {
		opts.Spec = export.RecordedSpec(inputs[0])
	}
	opts.MonteCarloCheck = analysis.DefaultMonteCarloCheck
	if *mcTrials > 0 {
		opts.MonteCarloCheck = *mcTrials
	}
	runs := make([]analysis.Run, 0, len(inputs))
	for _, in := range inputs {
		pts, err := export.LoadRun(in, export.ReadOptions{VinVrms: af.vin})
		if err != nil {
			return err
		}
		runs = append(runs, analysis.Run{Name: in, Points: pts})
	}
	batch := analysis.AnalyzeBatch(runs, opts)
	if len(runs) == 1 && batch.Entries[0].Result == nil {
		return fmt.Errorf("%s: %s", inputs[0], batch.Entries[0].Err)
	}
	if *jsonOut {
		var v any = batch.Entries[0].Result
		if len(runs) > 1 {
			v = batch
		}
		b, err := json.MarshalIndent(v, "", "  ")
		if err != nil {
			return err
		}
		fmt.Fprintf(stdout, "%s\n", b)
	} else {
		for i, e := range batch.Entries {
			if len(runs) > 1 {
				if i > 0 {
					fmt.Fprintln(stdout)
				}
				fmt.Fprintf(stdout, "== %s\n", e.Name)
			}
			if e.Result == nil {
				fmt.Fprintf(stdout, "error: %s\n", e.Err)
				continue
			}
			if err := e.Result.Report(stdout); err != nil {
				return err
			}
		}
		if len(runs) > 1 {
			fmt.Fprintf(stdout, "\n%d runs, %d failed\n", len(runs), batch.Failed)
		}
	}
	if !batch.Pass {
		if opts.Mask != nil {
			return &exitError{code: exitMaskFailed, err: fmt.Errorf("%d of %d responses failed (mask %s)", batch.Failed, len(runs), af.mask)}
		}
		return fmt.Errorf("%d of %d responses could not be analysed", batch.Failed, len(runs))
	}
	return nil
}
