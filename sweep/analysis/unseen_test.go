package analysis

import (
	"math"
	"sort"
	"testing"

	"rolloff/sweep/point"
)

// TestUnseenNotch: a band-pass response with a narrow notch (Q 9) at
// 13.3 Hz, swept at two points per decade with the low corner refined:
// no sample falls in the notch, whose −3 dB edges lie between the samples
// at 10 and 31.6 Hz. Nothing measured shows it, so the low corner is the
// crossing the samples bracket near 8 Hz, and the flatness between the
// corners is the half-power step, not the notch's depth. The response is
// a product of standard first- and second-order sections (filter handbook
// formulas, as Model.At computes them); the expected corner is found on
// it by bisection between the bracketing samples.
func TestUnseenNotch(t *testing.T) {
	truth := Model{Sections: []Section{
		{Kind: HighPass1, FHz: 8},
		{Kind: LowPass2, FHz: 13.3, Q: 9},
		{Kind: ZeroPairJ, FHz: 13.3},
		{Kind: LowPass2, FHz: 95e3, Q: math.Sqrt(0.5)},
	}}
	pts := synth(truth.At, 2, 2e6, 2)
	for f := 6.5; f < 9.5; f *= 1.02 { // the refinement around the low corner
		g := truth.At(f)
		pts = append(pts, point.Point{FreqHz: f, VinVrms: 1, VoutVrms: math.Pow(10, g/20), GainDB: g})
	}
	sort.Slice(pts, func(i, j int) bool { return pts[i].FreqHz < pts[j].FreqHz })
	for i := range pts {
		pts[i].Seq = i
	}
	r, err := Analyze(pts, Options{RefHz: 1000})
	if err != nil {
		t.Fatal(err)
	}
	level := truth.At(1000) + HalfPowerDB
	lo, hi := 6.5, 9.5
	for k := 0; k < 100; k++ {
		m := math.Sqrt(lo * hi)
		if truth.At(m) < level {
			lo = m
		} else {
			hi = m
		}
	}
	want := math.Sqrt(lo * hi)
	if r.LowHz == nil || math.Abs(*r.LowHz/want-1) > 0.005 {
		t.Errorf("low corner %v Hz (%s; %s), want %.5g Hz: the notch no sample saw made a corner", deref(r.LowHz), r.CornerSource, r.Model.Reason, want)
	}
	if r.FlatnessDB == nil || *r.FlatnessDB > 3.5 {
		t.Errorf("flatness %v dB between the corners: the unseen notch counted", deref(r.FlatnessDB))
	}
	t.Logf("low %v Hz (want %.5g), source %s, model: %s (%s)", deref(r.LowHz), want, r.CornerSource, r.Model.Description, r.Model.Reason)
}
