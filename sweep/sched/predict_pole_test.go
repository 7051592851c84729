package sched_test

import (
	"io/fs"
	"math"
	"strings"
	"testing"
	"testing/fstest"

	"rolloff/configs"
	"rolloff/driver/profile"
	"rolloff/sweep/point"
)

// editedSimBench returns the demo simulated bench at a time scale with
// its sim-bench.toml changed by edit (the profiles it names unchanged).
func editedSimBench(tb testing.TB, scale float64, edit func(string) string) *profile.BenchFile {
	tb.Helper()
	m := fstest.MapFS{}
	err := fs.WalkDir(configs.FS(), ".", func(path string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		data, err := fs.ReadFile(configs.FS(), path)
		if err != nil {
			return err
		}
		if path == configs.SimBench {
			data = []byte(edit(string(data)))
		}
		m[path] = &fstest.MapFile{Data: data}
		return nil
	})
	if err != nil {
		tb.Fatal(err)
	}
	cfg, err := profile.LoadBenchFS(m, configs.SimBench)
	if err != nil {
		tb.Fatal(err)
	}
	cfg.TimeScale = scale
	return cfg
}

// withPostFilter gives the simulated converter a second pole of postS
// seconds (sim.converter.post_filter_s).
func withPostFilter(postS string) func(string) string {
	return func(s string) string {
		return strings.Replace(s, "[sim.converter]\n", "[sim.converter]\npost_filter_s = "+postS+"\n", 1)
	}
}

// TestPredictionRefusesSecondPole runs the demo plan's roll-off decade
// with settle.predict on a simulated converter whose output has a second
// pole (a 0.15 s post-filter behind the averager's 0.4 s; the profile
// says one pole): its approach is two exponentials, which the
// prediction must not take for one. Every point that ends on a
// prediction must be within the settle tolerance of the gain a fully
// settled reading shows (the post-filter passes DC, so that is the
// one-pole converter's, package model), and most must wait, saying why.
// Waiting's own error on this converter (its settle model has one pole)
// is not judged here.
func TestPredictionRefusesSecondPole(t *testing.T) {
	p := honestPlan(t)
	on := true
	p.Settle.Predict = &on
	p.Frequencies.StartHz, p.Frequencies.StopHz = 50e3, 500e3
	p.ReferenceHz = 50e3
	p.Refine.Enabled = false
	p.Drift.End = "off"
	res := honestOurSweep(t, editedSimBench(t, 5, withPostFilter("0.15")), p)
	if res.sim.Converter.PostFilterS != 0.15 {
		t.Fatalf("the simulator's post-filter is %g s, not 0.15 s", res.sim.Converter.PostFilterS)
	}
	tol := p.Settle.Tolerance
	waited := 0
	for _, pt := range res.points {
		e := math.Pow(10, (pt.GainDB-res.settledDB(pt.FreqHz, pt.RangeIndex, p.Level.Vrms))/20) - 1
		t.Logf("%8.4g Hz %-9s %5.3f s %2d readings error %+.3f tol %s", pt.FreqHz, pt.Settle, pt.SettleS, pt.Readings, e/tol, pt.SettleWhy)
		switch pt.Settle {
		case point.SettlePredicted:
			if math.Abs(e) > tol {
				t.Errorf("%g Hz: predicted gain %.3f tolerances from the settled one", pt.FreqHz, e/tol)
			}
		case point.SettleWaited:
			waited++
			if pt.SettleWhy == "" {
				t.Errorf("%g Hz waited without saying why", pt.FreqHz)
			}
		}
	}
	if waited < len(res.points)/2 {
		t.Errorf("%d of %d points waited: a second pole went unnoticed", waited, len(res.points))
	}
}
