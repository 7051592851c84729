package instr

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"

	"rolloff/driver"
	"rolloff/driver/profile"
)

func convProfile(t *testing.T, edits ...string) *profile.Converter {
	t.Helper()
	c, err := profile.DecodeConverter("converter-10db.toml", embedded(t, "converter-10db.toml", edits...))
	if err != nil {
		t.Fatal(err)
	}
	return c
}

func rangeIndex(t *testing.T, c driver.Converter, name string) int {
	t.Helper()
	for i, r := range c.Ranges() {
		if r.Name == name {
			return i
		}
	}
	t.Fatalf("no range %q", name)
	return -1
}

func TestConverterScale(t *testing.T) {
	c, err := NewConverter(convProfile(t), nil)
	if err != nil {
		t.Fatal(err)
	}
	// 10 dB steps: each full scale is √10 times the one below (a 10 dB
	// step is a voltage ratio of 10^(10/20), definition of the decibel);
	// the names are the four-figure labels of the range switch.
	rs := c.Ranges()
	if len(rs) != 12 || rs[0].FullScaleVrms != 0.001 || rs[11].Name != "316.2 V" {
		t.Fatalf("ranges = %+v", rs)
	}
	for i := 1; i < len(rs); i++ {
		if r := rs[i].FullScaleVrms / rs[i-1].FullScaleVrms; math.Abs(r-math.Sqrt(10))/math.Sqrt(10) > 1e-12 {
			t.Errorf("%s/%s = %g, want √10", rs[i].Name, rs[i-1].Name, r)
		}
	}
	// 30 mV on the 31.62 mV range: the 1 V full-scale output reads
	// 30/31.623 = 0.9487 V (the trade quotes 0.948 V, common practice);
	// scaling that four-digit reading back gives 30 mV to within half a
	// digit (0.00005 of full scale).
	i := rangeIndex(t, c, "31.62 mV")
	r, err := c.Scale(i, 0.9487)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(r.Vrms-0.030) > 0.00005*0.031623 || r.Status != driver.InSpec || math.Abs(r.FractionFS-0.9487) > 1e-12 {
		t.Errorf("Scale(31.62 mV, 0.9487 V) = %+v, want ≈30 mV in spec", r)
	}
	if out := 0.030 / rs[i].FullScaleVrms * c.Window().DCFullScaleV; math.Abs(out-0.9487) > 5e-5 {
		t.Errorf("30 mV on 31.62 mV gives %g V out, want 0.9487", out)
	}
	// On the 100 mV range 0.8 V means 80 mV (common practice).
	if r, err := c.Scale(rangeIndex(t, c, "100 mV"), 0.8); err != nil || math.Abs(r.Vrms-0.080) > 1e-15 || r.Status != driver.InSpec {
		t.Errorf("Scale(100 mV, 0.8 V) = %+v, %v; want 80 mV in spec", r, err)
	}
	// The window: under 0.1 of full scale is under-range, above 1.05 is
	// over-range, the edges themselves are in spec.
	for _, c2 := range []struct {
		dc   float64
		want driver.Status
	}{{0.0999, driver.UnderRange}, {0.1, driver.InSpec}, {1.0, driver.InSpec}, {1.05, driver.InSpec}, {1.0501, driver.OverRange}, {-0.001, driver.UnderRange}} {
		r, err := c.Scale(0, c2.dc)
		if err != nil || r.Status != c2.want {
			t.Errorf("Scale(0, %g) = %+v, %v; want %v", c2.dc, r, err, c2.want)
		}
	}
	if _, err := c.Scale(12, 0.5); !errors.Is(err, driver.ErrOutOfRange) {
		t.Errorf("Scale on range 12 of 12 = %v, want ErrOutOfRange", err)
	}
	if _, err := c.Scale(0, math.NaN()); !errors.Is(err, driver.ErrNotANumber) {
		t.Errorf("Scale(NaN) = %v, want ErrNotANumber", err)
	}
	w := c.Window()
	if w.DCFullScaleV != 1 || w.UnderFraction != 0.1 || w.OverFraction != 1.05 || w.MaxFreqHz != 2e6 {
		t.Errorf("Window = %+v", w)
	}
	h, ok := c.(interface {
		HoldIntervalS() float64
		HoldS() float64
	})
	if !ok || h.HoldIntervalS() != 60 || h.HoldS() != 0.5 {
		t.Errorf("hold interval not exposed: %v", ok)
	}
}

// TestConverterDCOutput2V: a converter with a 2 V full-scale output scales
// by the output full scale, not by 1 V.
func TestConverterDCOutput2V(t *testing.T) {
	c, err := NewConverter(convProfile(t, `dc_full_scale_v = 1.0`, `dc_full_scale_v = 2.0`), nil)
	if err != nil {
		t.Fatal(err)
	}
	r, err := c.Scale(rangeIndex(t, c, "1 V"), 1.0)
	if err != nil || math.Abs(r.Vrms-0.5) > 1e-15 || r.FractionFS != 0.5 {
		t.Errorf("Scale(1 V range, 1 V of 2 V) = %+v, %v; want 0.5 Vrms", r, err)
	}
}

func TestConverterAccuracy(t *testing.T) {
	c, err := NewConverter(convProfile(t), nil)
	if err != nil {
		t.Fatal(err)
	}
	a := c.(driver.AccuracySpec)
	for _, k := range []struct {
		rng    string
		freqHz float64
		rel    float64
		ok     bool
	}{
		{"1 V", 1000, 0.01, true},
		{"1 V", 15, 0.02, true},
		{"1 V", 20, 0.02, true}, // first row wins at a shared edge
		{"1 V", 300e3, 0.03, true},
		{"1 mV", 300e3, 0.05, true}, // the exception row comes first
		{"1 mV", 1000, 0.01, true},
		{"1 V", 5, 0, false}, // the table says nothing below 10 Hz
		{"1 V", 3e6, 0, false},
	} {
		rel, ok := a.AccuracyRel(rangeIndex(t, c, k.rng), k.freqHz)
		if ok != k.ok || math.Abs(rel-k.rel) > 1e-15 {
			t.Errorf("AccuracyRel(%s, %g Hz) = %g, %v; want %g, %v", k.rng, k.freqHz, rel, ok, k.rel, k.ok)
		}
	}
}

// remoteProfile turns the generic converter into a remote-selected one
// with range i on channel i+1.
func remoteProfile(t *testing.T) *profile.Converter {
	edits := []string{`selection = "operator"`, `selection = "remote"`}
	data := string(embedded(t, "converter-10db.toml"))
	n := strings.Count(data, "[[ranges]]\n")
	for i := 0; i < n; i++ {
		edits = append(edits, "[[ranges]]\nname", fmt.Sprintf("[[ranges]]\nchannel = %d\nname", i+1))
	}
	return convProfile(t, edits...)
}

func TestConverterRangeSwitcher(t *testing.T) {
	op, err := NewConverter(convProfile(t), nil)
	if err != nil {
		t.Fatal(err)
	}
	if _, ok := op.(driver.RangeSwitcher); ok {
		t.Error("an operator-selected converter satisfies driver.RangeSwitcher")
	}
	rp := remoteProfile(t)
	if _, err := NewConverter(rp, nil); err == nil {
		t.Error("a remote converter without a switch was accepted")
	}
	sp, err := profile.DecodeSwitch("switch-scpi.toml", embedded(t, "switch-scpi.toml", `settle_s = 0.02`, `settle_s = 0.0`))
	if err != nil {
		t.Fatal(err)
	}
	sw, err := NewSwitch(playback(t, "converter_remote.txt"), sp)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := NewConverter(convProfile(t), sw); err == nil {
		t.Error("an operator converter with a switch was accepted")
	}
	rc, err := NewConverter(rp, sw)
	if err != nil {
		t.Fatal(err)
	}
	rs, ok := rc.(driver.RangeSwitcher)
	if !ok {
		t.Fatal("a remote converter does not satisfy driver.RangeSwitcher")
	}
	if err := rs.SwitchRange(context.Background(), rangeIndex(t, rc, "100 mV")); err != nil {
		t.Fatal(err)
	}
	if err := rs.SwitchRange(context.Background(), 12); !errors.Is(err, driver.ErrOutOfRange) {
		t.Errorf("SwitchRange(12) = %v, want ErrOutOfRange", err)
	}
	// Scaling is the same whichever way the range is selected.
	if r, err := rc.Scale(rangeIndex(t, rc, "100 mV"), 0.8); err != nil || math.Abs(r.Vrms-0.08) > 1e-15 {
		t.Errorf("Scale = %+v, %v", r, err)
	}
}
