package profile_test

import (
	"math"
	"strings"
	"testing"

	"rolloff/configs"
	"rolloff/driver/profile"
)

// TestSpecComponents: the shipped converter and generator profiles split
// their specification into the components the budget and the simulated
// bench use, and the accessors return them by range, band and frequency.
func TestSpecComponents(t *testing.T) {
	data, err := configs.ReadFile("converter-10db.toml")
	if err != nil {
		t.Fatal(err)
	}
	c, err := profile.DecodeConverter("converter-10db.toml", data)
	if err != nil {
		t.Fatal(err)
	}
	if got := c.RangeGainRel(); math.Abs(got-0.005) > 1e-15 {
		t.Errorf("RangeGainRel = %g, want 0.005", got)
	}
	if got := c.LinearityFS(); math.Abs(got-0.0005) > 1e-15 {
		t.Errorf("LinearityFS = %g, want 0.0005", got)
	}
	// 4·(1−x)·λ at x = 0.25: 3·0.0005.
	if got := c.LinearityRel(0.25); math.Abs(got-0.0015) > 1e-15 {
		t.Errorf("LinearityRel(0.25) = %g, want 0.0015", got)
	}
	for _, tc := range []struct {
		rng    int
		freqHz float64
		rel    float64
		band   int
	}{
		{6, 1000, 0.003, 2},  // 20 Hz..100 kHz, every range
		{0, 500e3, 0.043, 0}, // the 1 mV exception comes first
		{6, 500e3, 0.023, 3}, // 100 kHz..2 MHz on the other ranges
		{6, 15, 0.013, 1},    // 10..20 Hz
	} {
		rel, band, ok := c.FlatnessRel(tc.rng, tc.freqHz)
		if !ok || band != tc.band || math.Abs(rel-tc.rel) > 1e-12 {
			t.Errorf("FlatnessRel(%d, %g) = %g, %d, %v; want %g, %d", tc.rng, tc.freqHz, rel, band, ok, tc.rel, tc.band)
		}
		// The components fit inside the row's total, as the loader
		// demands.
		total, _ := c.AccuracyRel(tc.rng, tc.freqHz)
		if worst := c.RangeGainRel() + rel + c.LinearityRel(c.UnderFraction); worst > total*(1+1e-9) {
			t.Errorf("range %d, %g Hz: components %g > total %g", tc.rng, tc.freqHz, worst, total)
		}
	}
	if _, _, ok := c.FlatnessRel(6, 5); ok {
		t.Error("FlatnessRel at 5 Hz, outside every band, reported a band")
	}

	data, err = configs.ReadFile("generator-scpi.toml")
	if err != nil {
		t.Fatal(err)
	}
	g, err := profile.DecodeGenerator("generator-scpi.toml", data)
	if err != nil {
		t.Fatal(err)
	}
	if got := g.AmplitudeRel(); math.Abs(got-0.01) > 1e-15 {
		t.Errorf("AmplitudeRel = %g, want 0.01", got)
	}
	// Definition of the decibel: 0.15 dB is a voltage ratio 10^(0.15/20).
	rel, band, ok := g.FlatnessRel(1e6)
	if want := math.Pow(10, 0.15/20) - 1; !ok || band != 1 || math.Abs(rel-want) > 1e-15 {
		t.Errorf("FlatnessRel(1 MHz) = %g, %d, %v; want %g, 1", rel, band, ok, want)
	}
	if rel, band, _ := g.FlatnessRel(100e3); band != 0 || rel > 0.0116 {
		t.Errorf("FlatnessRel(100 kHz) = %g in band %d, want the first band (0.1 dB)", rel, band)
	}
}

// TestSpecRefused: components larger than the total they split, or out of
// bounds, are refused naming the key.
func TestSpecRefused(t *testing.T) {
	for _, tc := range []struct {
		file, old, new, key string
	}{
		{"converter-10db.toml", "flatness_pct = 0.3\n", "flatness_pct = 0.6\n", "accuracy[2].flatness_pct"},
		{"converter-10db.toml", "range_gain_pct = 0.5\n", "range_gain_pct = -1\n", "range_gain_pct"},
		{"converter-10db.toml", "linearity_pct = 0.05\n", "linearity_pct = 0.1\n", "accuracy[2].flatness_pct"},
		{"generator-scpi.toml", "amplitude_pct = 1.0\n", "amplitude_pct = 200.0\n", "accuracy.amplitude_pct"},
		{"generator-scpi.toml", "flatness_db = 0.15\n", "flatness_db = -0.15\n", "accuracy.flatness[1].flatness_db"},
		{"generator-scpi.toml", "to_hz = 5e6\n", "to_hz = 50e3\n", "accuracy.flatness[1].to_hz"},
	} {
		_, err := profile.Decode(tc.file, []byte(edit(t, tc.file, tc.old, tc.new)))
		if err == nil {
			t.Errorf("%s with %q loaded", tc.file, strings.TrimSpace(tc.new))
			continue
		}
		found := false
		for _, fe := range fieldErrors(err) {
			found = found || fe.Field == tc.key
		}
		if !found {
			t.Errorf("%s with %q: %v; want a problem at %s", tc.file, strings.TrimSpace(tc.new), err, tc.key)
		}
	}
}
