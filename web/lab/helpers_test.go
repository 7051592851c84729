package lab

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"net/http"
	"os"
	"path/filepath"
	"sync"
	"testing"
	"time"

	"github.com/gorilla/websocket"
	"github.com/rs/zerolog"

	"rolloff/configs"
	"rolloff/sweep/event"
	"rolloff/sweep/point"
	"rolloff/sweep/publish"
	"rolloff/sweep/store"
)

// simSweep writes a run into st as the scheduler does (each point
// appended and fsynced, then the state and result), n points every
// interval, and returns the run id once the run is created; done is
// closed when the run has ended.
func simSweep(t testing.TB, st *store.Store, name string, n int, interval time.Duration) (id string, done chan struct{}) {
	t.Helper()
	data, err := configs.ReadFile("demo-plan.toml")
	if err != nil {
		t.Fatal(err)
	}
	run, err := st.Create(store.CreateOpts{Name: name, PlanFile: "demo-plan.toml", PlanData: data})
	if err != nil {
		t.Fatal(err)
	}
	done = make(chan struct{})
	go func() {
		defer close(done)
		defer run.Close()
		if err := run.SetState(event.Reading, ""); err != nil {
			t.Error(err)
			return
		}
		for i := 0; i < n; i++ {
			time.Sleep(interval)
			f := 10 * math.Pow(10, 5*float64(i)/float64(n))
			// A first-order low-pass at 20 kHz, |H| = 1/sqrt(1+(f/fc)^2).
			g := 1 / math.Sqrt(1+(f/2e4)*(f/2e4))
			p := point.Point{Seq: i, Index: i, FreqHz: f, VinVrms: 0.05, VoutVrms: 0.05 * g, GainDB: 20 * math.Log10(g), Time: time.Now().UTC()}
			if err := run.AppendPoint(p); err != nil {
				t.Error(err)
				return
			}
		}
		res, _ := json.Marshal(map[string]any{"high_hz": 2e4, "points": n})
		if err := run.WriteFileAtomic(store.FileResult, res); err != nil {
			t.Error(err)
		}
		if err := run.SetState(event.Done, ""); err != nil {
			t.Error(err)
		}
	}()
	return run.ID(), done
}

// startLab starts a lab on a free loopback port.
func startLab(t testing.TB, b publish.Broker) *Lab {
	t.Helper()
	l, err := New(Config{Broker: b, Addr: "127.0.0.1:0", Log: zerolog.Nop()})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	served := make(chan error, 1)
	go func() { served <- l.Serve(ctx) }()
	t.Cleanup(func() {
		cancel()
		if err := <-served; err != nil {
			t.Errorf("lab: %v", err)
		}
	})
	return l
}

// startBench starts a publisher for a new store; stopped at the end.
func startBench(t testing.TB, b publish.Broker, id string, poll ...time.Duration) (*publish.Publisher, *store.Store) {
	t.Helper()
	st, err := store.Open(filepath.Join(t.TempDir(), "runs"))
	if err != nil {
		t.Fatal(err)
	}
	every := 20 * time.Millisecond
	if len(poll) > 0 {
		every = poll[0]
	}
	p, err := publish.Start(publish.Config{Broker: b, BenchID: id, StoreDir: st.Dir(), Poll: every, Log: zerolog.Nop()})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
		defer cancel()
		_ = p.Stop(ctx)
	})
	return p, st
}

// waitFor polls cond until it holds or d passes.
func waitFor(t testing.TB, d time.Duration, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(d)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("%s: not within %s", what, d)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// labRun finds a run in a snapshot.
func labRun(s Snapshot, bench, run string) *Run {
	for _, b := range s.Benches {
		if b.ID != bench {
			continue
		}
		for _, r := range b.Runs {
			if r.ID == run {
				return r
			}
		}
	}
	return nil
}

func labBench(s Snapshot, bench string) *Bench {
	for _, b := range s.Benches {
		if b.ID == bench {
			return b
		}
	}
	return nil
}

// checkRun checks that the lab holds every stored point of the run
// once, equal to points.jsonl, with the result and the final state.
func checkRun(t testing.TB, l *Lab, st *store.Store, bench, id string) {
	t.Helper()
	r, err := st.OpenRun(id)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	want, err := r.Points()
	if err != nil {
		t.Fatal(err)
	}
	got := labRun(l.Snapshot(), bench, id)
	if got == nil {
		t.Fatalf("%s/%s: not in the lab", bench, id)
	}
	if len(got.Points) != len(want) {
		t.Fatalf("%s/%s: lab holds %d points, the store %d", bench, id, len(got.Points), len(want))
	}
	for i, p := range got.Points {
		w := want[i]
		if p.Seq != w.Seq || p.Point.Seq != w.Seq || p.Point.FreqHz != w.FreqHz || p.Point.GainDB != w.GainDB || !p.Point.Time.Equal(w.Time) {
			t.Fatalf("%s/%s: lab point %d = seq %d %g Hz %g dB, stored seq %d %g Hz %g dB", bench, id, i, p.Seq, p.Point.FreqHz, p.Point.GainDB, w.Seq, w.FreqHz, w.GainDB)
		}
	}
	if got.State == nil || got.State.State != event.Done || got.State.Points != len(want) {
		t.Errorf("%s/%s: lab state %+v, want done with %d points", bench, id, got.State, len(want))
	}
	if len(got.Result) == 0 {
		t.Errorf("%s/%s: no result in the lab", bench, id)
	}
}

// liveClient reads the lab's websocket and records each point's
// latency (received − sent by the bench).
type liveClient struct {
	mu        sync.Mutex
	latencies []time.Duration
	points    map[string]int
	snapshot  chan struct{}
	conn      *websocket.Conn
}

func dialLive(t testing.TB, addr string) *liveClient {
	t.Helper()
	d := websocket.Dialer{Subprotocols: []string{LiveProtocol}, HandshakeTimeout: 5 * time.Second}
	conn, resp, err := d.Dial("ws://"+addr+"/api/live", http.Header{})
	if err != nil {
		t.Fatalf("lab websocket: %v (%v)", err, resp)
	}
	c := &liveClient{points: map[string]int{}, snapshot: make(chan struct{}), conn: conn}
	go func() {
		first := true
		for {
			_, data, err := conn.ReadMessage()
			now := time.Now()
			if err != nil {
				return
			}
			var m struct {
				Type  string    `json:"type"`
				Bench string    `json:"bench"`
				Run   string    `json:"run"`
				Point PointMsg  `json:"point"`
				Sent  time.Time `json:"-"`
			}
			if json.Unmarshal(data, &m) != nil {
				continue
			}
			if m.Type == "snapshot" && first {
				first = false
				close(c.snapshot)
			}
			if m.Type == publish.TopicPoints {
				c.mu.Lock()
				c.latencies = append(c.latencies, now.Sub(m.Point.Sent))
				c.points[m.Bench+"/"+m.Run]++
				c.mu.Unlock()
			}
		}
	}()
	t.Cleanup(func() { conn.Close() })
	select {
	case <-c.snapshot:
	case <-time.After(5 * time.Second):
		t.Fatal("no snapshot on the lab websocket")
	}
	return c
}

func (c *liveClient) count() int {
	c.mu.Lock()
	defer c.mu.Unlock()
	n := 0
	for _, v := range c.points {
		n += v
	}
	return n
}

// rssKB reads a process's resident set size (VmRSS) and its peak
// (VmHWM) from /proc, in KiB.
func rssKB(pid int) (rss, peak int64, err error) {
	data, err := os.ReadFile(fmt.Sprintf("/proc/%d/status", pid))
	if err != nil {
		return 0, 0, err
	}
	for _, line := range splitLines(string(data)) {
		var v int64
		if _, e := fmt.Sscanf(line, "VmRSS: %d kB", &v); e == nil {
			rss = v
		}
		if _, e := fmt.Sscanf(line, "VmHWM: %d kB", &v); e == nil {
			peak = v
		}
	}
	return rss, peak, nil
}

func splitLines(s string) []string {
	var out []string
	for len(s) > 0 {
		i := 0
		for i < len(s) && s[i] != '\n' {
			i++
		}
		out = append(out, s[:i])
		if i < len(s) {
			i++
		}
		s = s[i:]
	}
	return out
}
