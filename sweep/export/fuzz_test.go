package export

import (
	"bytes"
	"math"
	"testing"
)

// FuzzReadCSV: ReadCSV must never panic or hang, and whatever it accepts
// must have positive finite frequencies and finite gains, and survive a
// write/read round trip.
func FuzzReadCSV(f *testing.F) {
	f.Add([]byte("frequency_hz,gain_db\n100,-1\n1000,-3\n"))
	f.Add([]byte("frequency_hz,vin_vrms,vout_vrms,flags\n10,1,0.5,clipped|refined\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		pts, err := ReadCSV(bytes.NewReader(data), "fuzz.csv", ReadOptions{VinVrms: 1, MaxRows: 10000})
		if err != nil {
			return
		}
		for _, p := range pts {
			if !(p.FreqHz > 0) || math.IsInf(p.FreqHz, 0) || math.IsNaN(p.GainDB) || math.IsInf(p.GainDB, 0) {
				t.Fatalf("accepted a bad point %+v", p)
			}
		}
		var buf bytes.Buffer
		if err := WriteCSV(&buf, pts, nil); err != nil {
			t.Fatal(err)
		}
		back, err := ReadCSV(&buf, "again.csv", ReadOptions{})
		if err != nil || len(back) != len(pts) {
			t.Fatalf("round trip: %d → %d points, %v", len(pts), len(back), err)
		}
	})
}
