package main

import (
	"bytes"
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// The inputs are the SciPy reference tables (testdata/scipy, made by
// make_tables.py with scipy.signal.freqs and scipy.optimize.brentq).
func scipyCSV(name string) string { return filepath.Join("..", "..", "testdata", "scipy", name+".csv") }

func TestAnalyzeCommand(t *testing.T) {
	var out, errb bytes.Buffer
	if err := analyzeMain(&out, &errb, []string{scipyCSV("bessel_lp4"), "--json", "--ref-hz", "10"}); err != nil {
		t.Fatal(err, errb.String())
	}
	var res map[string]any
	if err := json.Unmarshal(out.Bytes(), &res); err != nil {
		t.Fatal(err)
	}
	// SciPy: bessel(4, norm='mag') is −3.0103 dB at 2870.0147 Hz.
	if h, ok := res["high_hz"].(float64); !ok || h < 2869 || h > 2871 || res["low_hz"] != nil {
		t.Errorf("high_hz %v low_hz %v", res["high_hz"], res["low_hz"])
	}

	dir := t.TempDir()
	mask := filepath.Join(dir, "m.toml")
	os.WriteFile(mask, []byte("relative = true\nupper = [[20, 0.5], [1000, 0.5]]\nlower = [[20, -1], [1000, -1]]\n"), 0o644)
	out.Reset()
	err := analyzeMain(&out, &errb, []string{"--mask", mask, scipyCSV("butter_lp3"), scipyCSV("cheby1_lp4"), "--ref-hz", "10"})
	var ee *exitError
	if !errors.As(err, &ee) || ee.code != exitMaskFailed {
		t.Fatalf("mask failure: %v", err)
	}
	if !strings.Contains(out.String(), "mask:         PASS") || !strings.Contains(out.String(), "mask:         FAIL") || !strings.Contains(out.String(), "2 runs, 1 failed") {
		t.Errorf("report:\n%s", out.String())
	}
	for _, bad := range [][]string{{}, {scipyCSV("bessel_lp4"), "--level", "2"}, {scipyCSV("bessel_lp4"), "--ref", "max", "--ref-hz", "10"}, {scipyCSV("bessel_lp4"), "--band", "3"}} {
		if err := analyzeMain(&out, &errb, bad); err == nil {
			t.Errorf("%v: no error", bad)
		}
	}
}

func TestPlotCommand(t *testing.T) {
	dir := t.TempDir()
	var errb bytes.Buffer
	for _, args := range [][]string{
		{scipyCSV("butter_bp2"), "-o", filepath.Join(dir, "a.png")},
		{scipyCSV("butter_lp3"), scipyCSV("bessel_lp4"), "-o", filepath.Join(dir, "b.svg"), "--ref", "max"},
		{"--diff", scipyCSV("butter_lp3"), scipyCSV("bessel_lp4"), "-o", filepath.Join(dir, "c.pdf"), "--ref-hz", "100"},
	} {
		if err := plotMain(&errb, args); err != nil {
			t.Fatalf("%v: %v", args, err)
		}
	}
	for name, magic := range map[string]string{"a.png": "\x89PNG", "b.svg": "<?xml", "c.pdf": "%PDF"} {
		b, err := os.ReadFile(filepath.Join(dir, name))
		if err != nil || !bytes.HasPrefix(b, []byte(magic)) {
			t.Errorf("%s: %v", name, err)
		}
	}
	if err := plotMain(&errb, []string{scipyCSV("butter_bp2"), "-o", filepath.Join(dir, "x.gif")}); err == nil {
		t.Errorf("gif accepted")
	}
	if err := plotMain(&errb, []string{"--diff", scipyCSV("butter_bp2"), "-o", filepath.Join(dir, "x.png")}); err == nil {
		t.Errorf("--diff with one input accepted")
	}
}
