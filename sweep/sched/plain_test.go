package sched_test

import (
	"context"
	"errors"
	"math"
	"os"
	"path"
	"path/filepath"
	"testing"

	"rolloff/configs"
	"rolloff/driver/profile"
	"rolloff/sweep/plan"
	"rolloff/sweep/sched"
)

// plainConfig loads a bench file of testdata/plain, its profiles from
// there or, failing that, from the shipped configs.
func plainConfig(t testing.TB, name string, scale float64) *profile.BenchFile {
	t.Helper()
	dir := filepath.Join("testdata", "plain")
	data, err := os.ReadFile(filepath.Join(dir, name))
	if err != nil {
		t.Fatal(err)
	}
	read := func(n string) ([]byte, error) {
		if d, err := os.ReadFile(filepath.Join(dir, n)); err == nil {
			return d, nil
		}
		return configs.ReadFile(path.Base(n))
	}
	cfg, err := profile.DecodeBench(name, data, read, func(rel string) string { return rel })
	if err != nil {
		t.Fatal(err)
	}
	if scale > 0 {
		cfg.TimeScale = scale
	}
	return cfg
}

// TestPlainMeterSweep runs the demo plan on a meter that takes single
// readings (no bursts) with no integration-time command, 25 ms per
// query, on a converter of 0.15 s: the run must neither ask for a burst
// nor for an NPLC, and every point must agree with the simulated DUT's
// analytic response.
func TestPlainMeterSweep(t *testing.T) {
	cfg := plainConfig(t, "plain-bench.toml", 4)
	p := shortPlan(plan.RangeRemote)
	res := sweepOn(t, context.Background(), cfg, p, sched.Opts{NoAnalysis: true}, nil)
	if res.err != nil {
		t.Fatal(res.err)
	}
	for _, cmd := range res.b.Sim.Received("voltmeter") {
		if contains(cmd, "SAMP") || contains(cmd, "NPLC") || contains(cmd, "APER") {
			t.Errorf("sent %q to a meter whose profile has no such command", cmd)
		}
	}
	checkGains(t, res.b, res.points, p.Settle.Tolerance, rangeTaus(res.b))
	if len(res.points) < 10 {
		t.Fatalf("%d points", len(res.points))
	}
}

// TestPlainMeterProfileNeedsFixedAperture: a profile that can set no
// integration time must state its own.
func TestPlainMeterProfileNeedsFixedAperture(t *testing.T) {
	data, err := os.ReadFile(filepath.Join("testdata", "plain", "dmm-plain.toml"))
	if err != nil {
		t.Fatal(err)
	}
	bad := []byte{}
	for _, line := range splitLines(data) {
		if !contains(string(line), "fixed_aperture_s") {
			bad = append(bad, line...)
		}
	}
	_, err = profile.DecodeDMM("dmm-plain.toml", bad)
	var fe *profile.FieldError
	if !errors.As(err, &fe) || fe.Field != "dc.fixed_aperture_s" {
		t.Fatalf("profile without fixed_aperture_s: %v, want an error on dc.fixed_aperture_s", err)
	}
	_ = math.Pi
}

func splitLines(b []byte) [][]byte {
	var out [][]byte
	for len(b) > 0 {
		i := 0
		for i < len(b) && b[i] != '\n' {
			i++
		}
		if i < len(b) {
			i++
		}
		out = append(out, b[:i])
		b = b[i:]
	}
	return out
}
