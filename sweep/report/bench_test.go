package report

import (
	"io"
	"testing"
	"time"
)

// BenchmarkReport1000 writes the report of a 1,000-point run as `rolloff
// report` does: the run's recorded figures, a mask checked, the page
// written; the target is under 300 ms (metric ms-1000). The sub-benchmark
// analyses the run again first (the path of a run without result.json).
func BenchmarkReport1000(b *testing.B) {
	b.Run("recorded", func(b *testing.B) { benchReport(b, LoadRecorded) })
	b.Run("reanalysed", func(b *testing.B) { benchReport(b, Load) })
}

func benchReport(b *testing.B, load func(string, Options) (*Input, error)) {
	dir := makeRun(b, demoFixture(1000))
	mask := relMask("prototype acceptance", 30, 20e3, -0.6)
	b.ResetTimer()
	start, cpu0 := time.Now(), cpuTime()
	for i := 0; i < b.N; i++ {
		in, err := load(dir, Options{Mask: mask})
		if err != nil {
			b.Fatal(err)
		}
		if err := Write(io.Discard, in, A4); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(time.Since(start).Microseconds())/1e3/float64(b.N), "ms-1000")
	b.ReportMetric((cpuTime()-cpu0).Seconds()*1e3/float64(b.N), "cpu-ms-1000")
}
