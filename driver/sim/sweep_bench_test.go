package sim

import (
	"fmt"
	"math"
	"testing"
	"time"
)

// BenchmarkDemoSweep runs a plain stepped sweep on the demo bench, 2 Hz to
// 2 MHz at 12 points per decade: for each point set the frequency, wait
// 7τ (settled to 0.1 %), read with an aperture of NPLC 10 or two ripple
// periods, whichever is longer. It reports the wall time of one sweep,
// the figure TimeScale is chosen for.
func BenchmarkDemoSweep(b *testing.B) {
	cfg := DemoConfig()
	bench := startBench(b, cfg)
	g := dial(b, bench.Addr(RoleGenerator))
	v := dial(b, bench.Addr(RoleVoltmeter))
	g.do("FREQ 2;VOLT 0.1;OUTP ON")
	v.do("CONF:VOLT:DC 1")
	tau := cfg.Converter.Ranges[cfg.Converter.InitialRange].TimeConstantS
	var freqs []float64
	for k := 0; k <= 72; k++ {
		freqs = append(freqs, 2*math.Pow(10, float64(k)/12))
	}
	b.ResetTimer()
	start := time.Now()
	for i := 0; i < b.N; i++ {
		for _, f := range freqs {
			g.do(fmt.Sprintf("FREQ %.6g", f))
			waitModel(bench, 7*tau)
			ap := math.Max(0.2, 2/(2*f))
			v.query(fmt.Sprintf("VOLT:APER %.6g;:READ?", ap))
		}
	}
	b.ReportMetric(time.Since(start).Seconds()/float64(b.N), "wall-s/sweep")
	b.ReportMetric(float64(len(freqs)), "points")
}
