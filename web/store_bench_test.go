package web

import (
	"io"
	"net/http"
	"strings"
	"syscall"
	"testing"
	"time"

	"rolloff/sweep/store/storetest"
)

// cpuTime is the CPU time (user + system) this process has used.
func cpuTime(tb testing.TB) time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		tb.Fatal(err)
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// benchStore measures the daemon on a store of n generated finished
// runs: start-up until the page's list answers (startup-s), the CPU the
// idle daemon uses over a window (idle-cpu-pct, percent of one core) and
// the time to list one page of runs (list-page-ms, the mean of 50
// requests), with the size of the answer (list-page-kb).
func benchStore(b *testing.B, n int, page string) {
	dir := b.TempDir()
	t0 := time.Now()
	if _, err := storetest.Generate(dir, storetest.Opts{Runs: n}); err != nil {
		b.Fatal(err)
	}
	b.Logf("generated %d runs in %v", n, time.Since(t0).Round(time.Millisecond))
	for i := 0; i < b.N; i++ {
		start := time.Now()
		d := startDemoTB(b, demoOpts{dir: dir, noStop: true})
		get := func(path string) []byte {
			res, err := http.Get(d.base + path)
			if err != nil {
				b.Fatal(err)
			}
			defer res.Body.Close()
			data, _ := io.ReadAll(res.Body)
			if res.StatusCode != 200 {
				b.Fatalf("%s: %d %s", path, res.StatusCode, data)
			}
			return data
		}
		get(page)
		startup := time.Since(start)
		// Idle: nothing runs, nobody asks; the daemon only watches the
		// store. Two rescans fall into the window.
		time.Sleep(2 * time.Second)
		const window = 12 * time.Second
		c0, w0 := cpuTime(b), time.Now()
		time.Sleep(window)
		idle := float64(cpuTime(b)-c0) / float64(time.Since(w0)) * 100
		const reqs = 50
		var size int
		l0 := time.Now()
		for range reqs {
			size = len(get(page))
		}
		listMS := float64(time.Since(l0).Microseconds()) / 1000 / reqs
		if !strings.Contains(string(get(page)), `"id"`) {
			b.Fatal("no runs listed")
		}
		d.stop()
		b.ReportMetric(startup.Seconds(), "startup-s")
		b.ReportMetric(idle, "idle-cpu-pct")
		b.ReportMetric(listMS, "list-page-ms")
		b.ReportMetric(float64(size)/1024, "list-page-kb")
	}
}

// BenchmarkStore3k is a store of a few weeks of a line: 3,000 runs.
func BenchmarkStore3k(b *testing.B) { benchStore(b, 3000, "/api/runs") }
