package analysis

import (
	"testing"
	"time"
)

// BenchmarkFit100 analyses a 100-point response (the battery's playback
// equalization with a rumble high-pass, 20 points per decade over five
// decades, 0.01 dB of declared noise) with the full model search; the metric
// ms-fit-100 is the wall time per analysis in milliseconds (target < 100
// on one core, GOMAXPROCS=1).
func BenchmarkFit100(b *testing.B) {
	var g batteryGrid
	for _, d := range loadBattery(b) {
		if d.Name == "playback_eq_rumble" {
			g = d.Grids[4] // 20 points per decade, regular
		}
	}
	if len(g.FreqHz) < 100 {
		b.Fatalf("grid has %d points: want at least 100", len(g.FreqHz))
	}
	g.FreqHz, g.GainDB = g.FreqHz[:100], g.GainDB[:100]
	pts := batteryPoints(g, 0.01, 1, true)
	b.ResetTimer()
	start := time.Now()
	for i := 0; i < b.N; i++ {
		if _, err := Analyze(pts, Options{RefHz: g.FreqHz[0]}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(time.Since(start).Milliseconds())/float64(b.N), "ms-fit-100")
}
