package web

import (
	"bytes"
	"encoding/json"
	"net/http"
	"sort"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/gorilla/websocket"

	"rolloff/sweep/event"
	"rolloff/sweep/point"
	"rolloff/sweep/store"
)

// submit posts a plan as the page does and returns the run id.
func submit(tb testing.TB, base string, plan map[string]any) string {
	tb.Helper()
	data, _ := json.Marshal(plan)
	req, _ := http.NewRequest("POST", base+"/api/runs", bytes.NewReader(data))
	req.Header.Set("Content-Type", "application/json")
	req.Header.Set("Origin", base)
	res, err := http.DefaultClient.Do(req)
	if err != nil {
		tb.Fatal(err)
	}
	defer res.Body.Close()
	var out map[string]string
	if err := json.NewDecoder(res.Body).Decode(&out); err != nil || res.StatusCode != 201 {
		tb.Fatalf("submit: %d %v", res.StatusCode, err)
	}
	return out["id"]
}

var (
	typePoint = []byte(`"type":"point"`)
	typeState = []byte(`"type":"state"`)
)

// readAll follows a run's live messages to its final state and counts
// the points; fn, when not nil, receives each point (decoded) with its
// arrival time. Without fn the messages are only scanned, as a light
// client would, so that the clients cost the machine little.
func readAll(tb testing.TB, c *websocket.Conn, fn func(p *point.Point, at time.Time)) int {
	c.SetReadDeadline(time.Now().Add(120 * time.Second))
	n := 0
	for {
		_, msg, err := c.ReadMessage()
		if err != nil {
			tb.Errorf("live read: %v", err)
			return n
		}
		at := time.Now()
		switch {
		case bytes.Contains(msg, typePoint):
			n++
			if fn != nil {
				var ev event.Event
				if err := json.Unmarshal(msg, &ev); err != nil || ev.Point == nil {
					tb.Errorf("live message: %v", err)
					return n
				}
				fn(ev.Point, at)
			}
		case bytes.Contains(msg, typeState):
			var ev event.Event
			if err := json.Unmarshal(msg, &ev); err == nil && ev.State.Final() {
				return n
			}
		}
	}
}

func percentile(xs []float64, q float64) float64 {
	if len(xs) == 0 {
		return 0
	}
	s := append([]float64(nil), xs...)
	sort.Float64s(s)
	i := int(q * float64(len(s)-1))
	return s[i]
}

// BenchmarkLiveLatency: from a point stored (AppendPoint returned, so
// fsynced) to a websocket client on loopback holding it, through the run
// queue, the hub and the connection. Reports p50-ms and p99-ms.
func BenchmarkLiveLatency(b *testing.B) {
	n := max(b.N, 1000)
	srv, be, stop := startSource(b, n, 2*time.Millisecond)
	defer stop()
	be.startDelay = 300 * time.Millisecond
	base := strings.TrimSuffix(srv.URL(), "/")
	id := submit(b, base, smallPlan("fixed"))
	c := liveDial(b, base, id, nil)
	defer c.Close()
	var lat []float64
	b.ResetTimer()
	got := readAll(b, c, func(p *point.Point, at time.Time) {
		if t, ok := be.storedAt(p.Seq); ok {
			lat = append(lat, float64(at.Sub(t))/1e6)
		}
	})
	b.StopTimer()
	if got != n {
		b.Fatalf("received %d points of %d", got, n)
	}
	b.ReportMetric(percentile(lat, 0.5), "p50-ms")
	b.ReportMetric(percentile(lat, 0.99), "p99-ms")
}

// BenchmarkSlowdown50: a real sweep (the scheduler on the simulated
// bench at time scale 5, 11 points in about 1.8 s) in a daemon subprocess,
// alone and with 50 live clients (in this process, on the same two cores)
// reading every message; x-slowdown-50 is the ratio of the median sweep
// durations, taken from the run's own preparing and done events, so 1
// means no slowdown. The clients' cost is per point, so the faster the
// time scale the larger the ratio: at 20 it is about 1.04.
func BenchmarkSlowdown50(b *testing.B) {
	td := startTestDaemon(b, "demo:5")
	defer td.stop()
	st, err := store.Open(td.dir)
	if err != nil {
		b.Fatal(err)
	}
	plan := smallPlan("fixed")
	plan["frequencies"] = map[string]any{"spacing": "log", "start_hz": 1000, "stop_hz": 100000, "points_per_decade": 5}
	holder := smallPlan("fixed")
	holder["frequencies"] = map[string]any{"spacing": "list", "frequencies_hz": []float64{1000, 2000}}
	duration := func(id string) (float64, bool) {
		r, err := st.OpenRun(id)
		if err != nil {
			return 0, false
		}
		defer r.Close()
		evs, err := r.Events()
		if err != nil {
			return 0, false
		}
		var t0, t1 time.Time
		for _, e := range evs {
			if e.Type == event.TypeState && e.State == event.Preparing && t0.IsZero() {
				t0 = e.Time
			}
			if e.Type == event.TypeState && e.State == event.Done {
				t1 = e.Time
			}
		}
		return t1.Sub(t0).Seconds(), !t0.IsZero() && !t1.IsZero()
	}
	wait := func(id string) float64 {
		deadline := time.Now().Add(60 * time.Second)
		for time.Now().Before(deadline) {
			if s, ok := duration(id); ok {
				return s
			}
			time.Sleep(20 * time.Millisecond)
		}
		b.Fatalf("run %s did not finish", id)
		return 0
	}
	var alone, crowd []float64
	rounds := max(b.N, 5)
	wait(submit(b, td.base, plan)) // warm up
	b.ResetTimer()
	for i := 0; i < 2*rounds; i++ {
		clients := 0
		if i%2 == 1 {
			clients = 50
		}
		// A short run first holds the bench while the clients join the
		// measured run, which waits in the queue.
		submit(b, td.base, holder)
		id := submit(b, td.base, plan)
		var wg sync.WaitGroup
		for k := 0; k < clients; k++ {
			c := liveDial(b, td.base, id, nil)
			wg.Add(1)
			go func() { defer wg.Done(); defer c.Close(); readAll(b, c, nil) }()
		}
		s := wait(id)
		wg.Wait()
		if clients == 0 {
			alone = append(alone, s)
		} else {
			crowd = append(crowd, s)
		}
	}
	b.StopTimer()
	b.Logf("sweep seconds alone %.3f, with 50 clients %.3f", alone, crowd)
	b.ReportMetric(percentile(crowd, 0.5)/percentile(alone, 0.5), "x-slowdown-50")
	b.ReportMetric(percentile(alone, 0.5), "s-alone")
}

// BenchmarkRSS10k: the daemon's resident memory (a subprocess, read from
// /proc/PID/status) during a 10,000-point sweep from the fast point source
// into the real store, with 10 live clients. Reports the peak.
func BenchmarkRSS10k(b *testing.B) {
	peak := 0.0
	for i := 0; i < b.N; i++ {
		td := startTestDaemon(b, "source:10000:500us")
		done := make(chan struct{})
		var mu sync.Mutex
		go func() {
			t := time.NewTicker(10 * time.Millisecond)
			defer t.Stop()
			for {
				select {
				case <-done:
					return
				case <-t.C:
					r := rssMB(td.cmd.Process.Pid)
					mu.Lock()
					peak = max(peak, r)
					mu.Unlock()
				}
			}
		}()
		id := submit(b, td.base, smallPlan("fixed"))
		var wg sync.WaitGroup
		for k := 0; k < 10; k++ {
			c := liveDial(b, td.base, id, nil)
			wg.Add(1)
			go func() {
				defer wg.Done()
				defer c.Close()
				if n := readAll(b, c, nil); n != 10000 {
					b.Errorf("client received %d points of 10000", n)
				}
			}()
		}
		wg.Wait()
		close(done)
		td.stop()
	}
	b.ReportMetric(peak, "rss-mb")
}
