package sched_test

import (
	"context"
	"fmt"
	"math"
	"os"
	"path"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"rolloff/configs"
	"rolloff/driver/profile"
	"rolloff/sweep/plan"
	"rolloff/sweep/sched"
	"rolloff/sweep/sched/onbench"
	"rolloff/sweep/settle"
)

// acdmmConfig loads testdata/acdmm/acdmm-bench.toml (profiles there or
// in the shipped configs).
func acdmmConfig(t testing.TB, scale float64) *profile.BenchFile {
	t.Helper()
	dir := filepath.Join("testdata", "acdmm")
	data, err := os.ReadFile(filepath.Join(dir, "acdmm-bench.toml"))
	if err != nil {
		t.Fatal(err)
	}
	read := func(n string) ([]byte, error) {
		if d, err := os.ReadFile(filepath.Join(dir, n)); err == nil {
			return d, nil
		}
		return configs.ReadFile(path.Base(n))
	}
	cfg, err := profile.DecodeBench("acdmm-bench.toml", data, read, func(rel string) string { return rel })
	if err != nil {
		t.Fatal(err)
	}
	cfg.TimeScale = scale
	return cfg
}

// TestACDMMPacedByItsFilter: an AC-reading DMM with no autorange and no
// integration-time command, whose RMS filter is slow below 20 Hz and
// settles in about 55 ms above 200 Hz (ac.filters, per band), on the demo
// DUT (a first-order high-pass at 8 Hz): the run asks for neither
// autorange nor an integration time, every point agrees with the DUT's
// analytic response, and the plan estimate (sweep/plan Estimate with the
// bench's timing, as `rolloff plan` prints it) is within 25 % of the
// run's model time where its assumption about the DUT holds: the
// 20 dB/decade estimate on the high-pass's slope (5 to 20 Hz), the flat
// one on the pass band (200 Hz to 2 kHz); across both (5 Hz to 2 kHz) the
// run lies between the two estimates.
func TestACDMMPacedByItsFilter(t *testing.T) {
	for _, c := range []struct {
		startHz, stopHz float64
		flat, steep     bool    // the estimate that must be within 25 %
		scale           float64 // 1 where the points are short: loopback latency counts less
	}{
		{5, 20, false, true, 2},
		{200, 2000, true, false, 2},
		{5, 2000, false, false, 2},
	} {
		t.Run(fmt.Sprintf("%g-%gHz", c.startHz, c.stopHz), func(t *testing.T) {
			p := &plan.Plan{
				Name:        "ac-dmm",
				Frequencies: plan.Frequencies{Spacing: plan.SpacingLog, StartHz: c.startHz, StopHz: c.stopHz, PointsPerDecade: 12},
				Level:       plan.Level{Vrms: 0.05},
				Settle:      plan.Settle{Tolerance: 0.002, Readings: 2},
				Ranging:     plan.Ranging{Strategy: plan.RangeFixed},
				ReferenceHz: c.stopHz,
			}
			p.Defaults()
			flat, steep, run := acdmmRun(t, p, c.scale)
			t.Logf("%g to %g Hz: run %.2f model-s; estimate flat %.2f s (%+.0f %%), 20 dB/decade %.2f s (%+.0f %%)",
				c.startHz, c.stopHz, run, flat, 100*(flat/run-1), steep, 100*(steep/run-1))
			within := func(est float64) bool { return est >= 0.75*run && est <= 1.25*run }
			switch {
			case c.flat && !within(flat):
				t.Errorf("flat estimate %.2f s, run %.2f s", flat, run)
			case c.steep && !within(steep):
				t.Errorf("20 dB/decade estimate %.2f s, run %.2f s", steep, run)
			case !c.flat && !c.steep && (run < flat || run > steep):
				t.Errorf("run %.2f s outside the estimates %.2f to %.2f s", run, flat, steep)
			}
		})
	}
}

// acdmmRun runs p on the AC-DMM bench and returns the flat and the
// 20 dB/decade estimates and the run's model time, checking the commands
// sent and the points.
func acdmmRun(t *testing.T, p *plan.Plan, scale float64) (flatS, steepS, runS float64) {
	cfg := acdmmConfig(t, scale)
	bn, run := newRun(t, cfg, p, t.TempDir())
	defer bn.Close()
	defer run.Close()
	t0 := bn.Sim.ModelTime()
	res := sweepRun(t, context.Background(), bn, run, p, sched.Opts{NoAnalysis: true}, nil)
	runS = bn.Sim.ModelTime() - t0
	if res.err != nil {
		t.Fatal(res.err)
	}
	// The range follows the expected level (at most 0.55 Vrms here: the
	// 1 V range) after the first point, on the bench's range_vrms (10 V).
	ranges := map[float64]bool{}
	for _, cmd := range bn.Sim.Received("dmm") {
		if contains(cmd, "AUTO") || contains(cmd, "NPLC") || contains(cmd, "APER") {
			t.Errorf("sent %q to a DMM whose profile has no such command", cmd)
		}
		if f := strings.Fields(cmd); len(f) == 2 && strings.HasSuffix(f[0], ":RANGe") {
			v, err := strconv.ParseFloat(f[1], 64)
			if err != nil {
				t.Fatalf("%q: %v", cmd, err)
			}
			ranges[v] = true
		}
	}
	if !ranges[1] || len(ranges) > 2 || (len(ranges) == 2 && !ranges[10]) {
		t.Errorf("AC ranges sent %v, want 1 V (and 10 V for the first point)", ranges)
	}
	for _, pt := range res.points {
		// The DMM reads the mean of the square root of its averaged mean
		// square, as the converter does: the same bias (settle.MeanFactor).
		want := dutGain(bn, pt.FreqHz) * settle.MeanFactor(pt.FreqHz, cfg.DMM.DMM.AC.SettleTauS(pt.FreqHz))
		if e := pt.VoutVrms/pt.VinVrms/want - 1; math.Abs(e) > 2*p.Settle.Tolerance || flaggedOtherThanDrift(pt) {
			t.Errorf("%s Hz: gain %.6f, DUT %.6f (%+.2g), flags %v", plan.FormatHz(pt.FreqHz, 4), pt.VoutVrms/pt.VinVrms, want, e, pt.Flags)
		}
	}
	flat, err := plan.Estimate(p, onbench.Timing(cfg, p, 0))
	if err != nil {
		t.Fatal(err)
	}
	steep, err := plan.Estimate(p, onbench.Timing(cfg, p, 20))
	if err != nil {
		t.Fatal(err)
	}
	return flat.TotalS, steep.TotalS, runS
}
