package batch

import (
	"fmt"
	"io"
	"path/filepath"
	"testing"
	"time"

	"rolloff/sweep/internal/runfixture"
	"rolloff/sweep/report"
)

// BenchmarkBatch200 loads, analyses and checks 200 runs of 80 points
// against a mask with a reference unit and writes the CSV and the
// summary, as `rolloff batch` does; the target is under 3 s (metric
// s-200).
func BenchmarkBatch200(b *testing.B) {
	st := filepath.Join(b.TempDir(), "runs")
	var seeds, dirs []string
	for i := range 10 {
		f := unitFixture(st, i)
		f.N = 80
		seeds = append(seeds, runfixture.Make(b, f))
	}
	for i := range 200 {
		dirs = append(dirs, runfixture.Clone(b, seeds[i%10], fmt.Sprintf("20261201-%06d-unit", i), fmt.Sprintf("LD-%04d", i)))
	}
	mask := acceptance()
	b.ResetTimer()
	start, cpu0 := time.Now(), cpuTime()
	for i := 0; i < b.N; i++ {
		bt, err := Load(dirs, Options{Mask: mask, Reference: seeds[0]})
		if err != nil {
			b.Fatal(err)
		}
		if err := WriteCSV(io.Discard, bt); err != nil {
			b.Fatal(err)
		}
		if err := WriteSummary(io.Discard, bt, report.A4, "rolloff test"); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(time.Since(start).Seconds()/float64(b.N), "s-200")
	// CPU seconds, independent of the machine's load (the runs are read
	// on GOMAXPROCS workers, so wall time on an idle machine is lower).
	b.ReportMetric((cpuTime()-cpu0).Seconds()/float64(b.N), "cpu-s-200")
}
