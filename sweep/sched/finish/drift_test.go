package finish_test

import (
	"bytes"
	"math"
	"testing"

	"rolloff/sweep/point"
)

// TestDriftCheck sweeps the demo plan on the imperfect demo bench with
// the drift check every 20 plan points and at the end: without drift
// every check agrees with the sweep within its expanded uncertainty; with
// the simulated converter's gain drifting at +500 000 ppm per hour of
// model time (about +1.4 % over the sweep's ~100 model-s), the run is
// flagged and the change has the drift's sign and size (within a factor
// two: the sweep's own gain at the reference drifted too, by the share of
// the run elapsed when it was read).
func TestDriftCheck(t *testing.T) {
	if testing.Short() {
		t.Skip("sweeps the simulated bench")
	}
	every := func(b []byte) []byte {
		return bytes.Replace(b, []byte("every_points = 0"), []byte("every_points = 20"), 1)
	}
	for _, c := range []struct {
		name     string
		sim      string
		flagged  bool
		rateRelS float64
	}{
		{"steady", "", false, 0},
		{"drifting", "drift_ppm_per_hour = 500000", true, 0.5 / 3600},
	} {
		r := sweepWith(t, 7, 1000, t.TempDir(), c.sim, every)
		if r.err != nil {
			t.Fatalf("%s: %v", c.name, r.err)
		}
		var checks []point.Point
		for _, p := range r.points {
			if p.Has(point.FlagDriftCheck) {
				checks = append(checks, p)
				if p.FreqHz != r.plan.ReferenceHz {
					t.Errorf("%s: drift check seq %d at %g Hz, reference %g Hz", c.name, p.Seq, p.FreqHz, r.plan.ReferenceHz)
				}
			}
		}
		freqs, _ := r.plan.Freqs()
		if want := (len(freqs)-1)/20 + 1; len(checks) != want || want != r.plan.Drift.DriftChecks(len(freqs)) {
			t.Errorf("%s: %d drift checks, want %d", c.name, len(checks), want)
		}
		d := r.result.Drift
		if d == nil || len(d.Checks) != len(checks) {
			t.Fatalf("%s: result.json drift %+v, want %d checks", c.name, d, len(checks))
		}
		t.Logf("%s: %s", c.name, d.Line())
		if d.Flagged != c.flagged {
			t.Errorf("%s: flagged %v, want %v (largest change %+.4f dB ± %.4f dB)", c.name, d.Flagged, c.flagged, d.ChangeDB, d.UDB)
		}
		for _, k := range d.Checks {
			if len(k.Unusable) > 0 || !(k.UDB > 0) {
				t.Errorf("%s: check seq %d unusable %v, U %g dB", c.name, k.Seq, k.Unusable, k.UDB)
			}
		}
		if c.rateRelS > 0 {
			// The last check against a sweep that read the reference
			// about midway: some tens of model seconds of drift.
			last := checks[len(checks)-1]
			dur := last.Time.Sub(r.points[0].Time).Seconds() * 1000 // model s at time scale 1000
			wantDB := 20 / math.Ln10 * c.rateRelS * dur / 2
			if got := d.Checks[len(d.Checks)-1].ChangeDB; !(got > wantDB/2 && got < wantDB*2) {
				t.Errorf("%s: last change %+.4f dB over %.0f model-s, want about %+.4f dB", c.name, got, dur, wantDB)
			}
		}
		if r.result.Included+len(r.result.Excluded) != r.result.Points {
			t.Errorf("%s: %d points, %d included, %d excluded: the drift checks must stand apart", c.name, r.result.Points, r.result.Included, len(r.result.Excluded))
		}
	}
}
