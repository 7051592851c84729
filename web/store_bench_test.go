package web

import (
	"io"
	"net/http"
	"os"
	"runtime"
	"runtime/debug"
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
// runs: start-up until the page's list answers, the first time
// (cold-startup-s, the run index built from the runs' meta.json) and
// again (startup-s, from the index the first daemon left), the CPU the
// idle daemon uses over a window (idle-cpu-pct, percent of one core) and
// the time to list one page of runs (list-page-ms, the mean of 50
// requests), with the size of the answer (list-page-kb).
func benchStore(b *testing.B, n int, page string) {
	dir := os.Getenv("ROLLOFF_BENCH_STORE") // a store generated before, for profiling
	if dir == "" {
		dir = b.TempDir()
		t0 := time.Now()
		if _, err := storetest.Generate(dir, storetest.Opts{Runs: n}); err != nil {
			b.Fatal(err)
		}
		b.Logf("generated %d runs in %v", n, time.Since(t0).Round(time.Millisecond))
	}
	for i := 0; i < b.N; i++ {
		var cold time.Duration
		if i == 0 {
			start := time.Now()
			d := startDemoTB(b, demoOpts{dir: dir, noStop: true})
			res, err := http.Get(d.base + page)
			if err != nil {
				b.Fatal(err)
			}
			res.Body.Close()
			cold = time.Since(start)
			d.stop()
			// A restart is a new process: the first daemon's memory is
			// not the second's to collect.
			runtime.GC()
			debug.FreeOSMemory()
		}
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
		// store. The window opens once the start-up's garbage is
		// collected and its memory returned (the runtime does that in
		// the background for a few seconds), and holds three rescans.
		time.Sleep(10 * time.Second)
		const window = 15 * time.Second
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
		if cold > 0 {
			b.ReportMetric(cold.Seconds(), "cold-startup-s")
		}
		b.ReportMetric(startup.Seconds(), "startup-s")
		b.ReportMetric(idle, "idle-cpu-pct")
		b.ReportMetric(listMS, "list-page-ms")
		b.ReportMetric(float64(size)/1024, "list-page-kb")
	}
}

// BenchmarkStore3k is a store of a few weeks of a line: 3,000 runs.
func BenchmarkStore3k(b *testing.B) { benchStore(b, 3000, "/api/runs") }

// BenchmarkStore50k is a store of a year or more of a line: 50,000 runs,
// listed a page of 50 at a time.
func BenchmarkStore50k(b *testing.B) { benchStore(b, 50000, "/api/runs?limit=50") }
