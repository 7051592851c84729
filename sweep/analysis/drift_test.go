package analysis

import (
	"math"
	"testing"

	"rolloff/sweep/point"
)

// TestDrift: re-measurements of the reference (flagged drift-check) stand
// apart from the response and are compared with the sweep's gain there.
// The expanded uncertainty of a change is k·√(Σ u²) over independent
// inputs (JCGM 100:2008 §5.1.2), a rectangular ± a counting a/√3 (§4.3.7):
// the Type A of the check and of the sweep's neighbours, each reading's
// settle residual, and both ranges' gain errors when the check was read
// on another range. 20/ln 10 dB per relative change is d(20·log10 x)
// (calculus).
func TestDrift(t *testing.T) {
	const fc, tol, stdRel, rangeGain = 5000.0, 0.002, 2e-4, 0.005
	spec := &Spec{SettleTolRel: tol, ConverterRangeGainRel: rangeGain}
	pts := specPoints(synth(func(f float64) float64 { return butterworthDB(f, fc, 1) }, 10, 1e6, 20), func(float64) int { return 0 })
	ref := 100.0
	g0 := butterworthDB(ref, fc, 1)
	check := func(seq int, changeDB float64, rangeIndex int) point.Point {
		g := g0 + changeDB
		return point.Point{Seq: seq, Index: 1000 + seq, FreqHz: ref, VinVrms: 1, VoutVrms: math.Pow(10, g/20), GainDB: g,
			RangeIndex: rangeIndex, StdRel: stdRel, FractionFS: 0.8, DCVolts: 0.8, DCAccV: 1e-5, ConvAccRel: 0.01,
			Flags: []string{point.FlagDriftCheck}}
	}
	n := len(pts)
	small, big := 0.005, 0.08
	all := append(append([]point.Point(nil), pts...), check(n, small, 0), check(n+1, -big, 0), check(n+2, small, 1))
	r, err := Analyze(all, Options{Spec: spec, RefHz: ref})
	if err != nil {
		t.Fatal(err)
	}
	if r.Points != n || r.Included != n || len(r.Excluded) != 0 {
		t.Errorf("points %d, included %d, excluded %d: want the %d response points alone", r.Points, r.Included, len(r.Excluded), n)
	}
	d := r.Drift
	if d == nil || len(d.Checks) != 3 {
		t.Fatalf("drift %+v, want 3 checks", d)
	}
	dbPer := 20 / math.Ln10
	uA := dbPer * stdRel
	uSettle := dbPer * tol / math.Sqrt(3)
	sameRange := 2 * math.Sqrt(2*uA*uA+2*uSettle*uSettle)
	uRange := dbPer * rangeGain / math.Sqrt(3)
	otherRange := 2 * math.Sqrt(2*uA*uA+2*uSettle*uSettle+2*uRange*uRange)
	for i, want := range []struct{ change, U float64 }{{small, sameRange}, {-big, sameRange}, {small, otherRange}} {
		c := d.Checks[i]
		// The sweep's gain at 100 Hz is an interpolation between points
		// 1/20 decade apart on a smooth response: within 1e-4 dB.
		if math.Abs(c.ChangeDB-want.change) > 1e-4 {
			t.Errorf("check %d: change %+.5f dB, want %+.5f", i, c.ChangeDB, want.change)
		}
		if math.Abs(c.UDB-want.U) > 1e-9 {
			t.Errorf("check %d: U %.6f dB, want %.6f", i, c.UDB, want.U)
		}
	}
	if !d.Flagged || math.Abs(d.ChangeDB+big) > 1e-4 || d.Seq != n+1 {
		t.Errorf("flagged %v, largest change %+.4f dB at seq %d: want flagged, %+.4f at seq %d", d.Flagged, d.ChangeDB, d.Seq, -big, n+1)
	}
	// Without the large change the run is not flagged.
	r, err = Analyze(append(append([]point.Point(nil), pts...), check(n, small, 0)), Options{Spec: spec, RefHz: ref})
	if err != nil {
		t.Fatal(err)
	}
	if r.Drift == nil || r.Drift.Flagged {
		t.Errorf("a change of %g dB against U %g dB: flagged %+v", small, sameRange, r.Drift)
	}
	// A response without checks has no drift record.
	if r, err := Analyze(pts, Options{Spec: spec, RefHz: ref}); err != nil || r.Drift != nil {
		t.Errorf("no checks: drift %+v, %v", r.Drift, err)
	}
}
