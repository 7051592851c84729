package analysis

import (
	"strings"
	"testing"

	"rolloff/sweep/point"
)

// TestHighCornerUnderRange: a first-order low-pass at 2 kHz (|H| =
// 1/√(1 + (f/fc)²), the textbook response) swept from 10 Hz to 1 MHz on
// a fixed range that reads under range from 1 kHz on: the corner is not
// found, and the report says it was not measurable on this range
// (under range from the first point left out), not that it lies above
// the sweep; with the under-range points removed from the sweep instead,
// it lies above the sweep.
func TestHighCornerUnderRange(t *testing.T) {
	m := Model{Sections: []Section{{Kind: LowPass1, FHz: 2000}}}
	pts := synth(m.At, 10, 1e6, 10)
	var firstUnder float64
	var kept []point.Point
	for i := range pts {
		if pts[i].FreqHz >= 1000 {
			if firstUnder == 0 {
				firstUnder = pts[i].FreqHz
			}
			pts[i].Flags = append(pts[i].Flags, point.FlagUnderRange)
			continue
		}
		kept = append(kept, pts[i])
	}
	r, err := Analyze(pts, Options{RefHz: 10})
	if err != nil {
		t.Fatal(err)
	}
	if r.HighHz != nil {
		t.Fatalf("high corner %g Hz from under-range points", *r.HighHz)
	}
	if r.HighUnderRangeFromHz == nil || *r.HighUnderRangeFromHz != firstUnder {
		t.Fatalf("under range from %v, want %g Hz", r.HighUnderRangeFromHz, firstUnder)
	}
	txt := r.Text()
	if !strings.Contains(txt, "not measurable on this range (under-range from "+FormatHz(firstUnder, 4)) || strings.Contains(txt, "above the sweep") {
		t.Errorf("report:\n%s", txt)
	}
	r2, err := Analyze(kept, Options{RefHz: 10})
	if err != nil {
		t.Fatal(err)
	}
	if r2.HighUnderRangeFromHz != nil || !strings.Contains(r2.Text(), "above the sweep") {
		t.Errorf("sweep ending before the corner:\n%s", r2.Text())
	}
}
