package analysis

import "testing"

func BenchmarkZZSlow(b *testing.B) {
	var g batteryGrid
	var c batteryCase
	for _, d := range loadBattery(b) {
		if d.Name == "cheby2_lp6" {
			g = d.Grids[5]
			c = d.Corners[0]
		}
	}
	pts := batteryPoints(g, 0, 1, true)
	for i := 0; i < b.N; i++ {
		Analyze(pts, Options{RefHz: c.RefHz})
	}
}
