package report

import (
	"io"
	"testing"
	"time"
)

// BenchmarkReport1000 loads, analyses and writes the report of a
// 1,000-point run, as `rolloff report` does; the target is under 300 ms
// (metric ms-1000).
func BenchmarkReport1000(b *testing.B) {
	dir := makeRun(b, demoFixture(1000))
	mask := relMask("prototype acceptance", 30, 20e3, -0.6)
	b.ResetTimer()
	start := time.Now()
	for i := 0; i < b.N; i++ {
		in, err := Load(dir, Options{Mask: mask})
		if err != nil {
			b.Fatal(err)
		}
		if err := Write(io.Discard, in, A4); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(time.Since(start).Milliseconds())/float64(b.N), "ms-1000")
}
