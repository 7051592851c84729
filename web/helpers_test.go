package web

import (
	"bytes"
	"context"
	"encoding/json"
	"io"
	"net/http"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"rolloff/configs"
	"rolloff/driver/bench"
	"rolloff/sweep/event"
	"rolloff/sweep/point"
	"rolloff/sweep/sched"
	"rolloff/sweep/store"
	"rolloff/web/hub"
)

type demoOpts struct {
	scale  float64 // simulated seconds per wall second (default 400)
	token  string
	hub    hub.Options
	sched  func(*sched.Opts)
	dir    string // store directory (default a temp dir)
	noStop bool   // leave shutdown to the test
}

type browserPlan struct{ start, stop, ppd, vrms string }

type demo struct {
	t           testing.TB
	srv         *Server
	b           *bench.Bench
	st          *store.Store
	dir         string
	base        string // http://127.0.0.1:PORT
	origin      string
	cancel      context.CancelFunc
	served      chan error
	browserPlan browserPlan
}

// openDemoBench opens the demo simulated bench in-process, time-scaled.
func openDemoBench(t testing.TB, scale float64) *bench.Bench {
	t.Helper()
	cfg, err := configs.LoadBench(configs.SimBench)
	if err != nil {
		t.Fatal(err)
	}
	if scale <= 0 {
		scale = 400
	}
	cfg.TimeScale = scale
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancel()
	b, err := bench.Open(ctx, cfg, zerolog.Nop())
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// startDemo serves the demo bench on 127.0.0.1:0 with a fresh store.
func startDemo(t *testing.T, o demoOpts) *demo { return startDemoTB(t, o) }

func startDemoTB(t testing.TB, o demoOpts) *demo {
	t.Helper()
	b := openDemoBench(t, o.scale)
	// The operator has set the converter to its 10 V range, where the
	// demo DUT's passband output (5 Vrms for 0.5 Vrms in) reads in spec.
	if err := b.Sim.SelectRange(8); err != nil {
		t.Fatal(err)
	}
	dir := o.dir
	if dir == "" {
		dir = t.TempDir()
	}
	st, err := store.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	cfg := Config{Addr: "127.0.0.1:0", Token: o.token, Log: zerolog.Nop(), Hub: o.hub, Bench: b, Store: st, Sched: o.sched}
	srv, err := New(cfg)
	if err != nil {
		b.Close()
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	d := &demo{t: t, srv: srv, b: b, st: st, dir: dir, cancel: cancel, served: make(chan error, 1),
		base:        strings.TrimSuffix(srv.URL(), "/"),
		browserPlan: browserPlan{start: "1000", stop: "1000000", ppd: "5", vrms: "0.5"}}
	d.origin = d.base
	go func() { d.served <- srv.Serve(ctx) }()
	if !o.noStop {
		t.Cleanup(d.stop)
	}
	return d
}

// stop shuts the daemon down and closes the bench; it returns Serve's
// error.
func (d *demo) stop() {
	d.cancel()
	select {
	case err := <-d.served:
		if err != nil {
			d.t.Errorf("Serve: %v", err)
		}
	case <-time.After(10 * time.Second):
		d.t.Error("Serve did not return")
	}
	d.b.Close()
}

// do sends a request as the page would (own Origin, JSON).
func (d *demo) do(method, path string, body any, hdr ...string) (*http.Response, []byte) {
	d.t.Helper()
	var rd io.Reader
	switch b := body.(type) {
	case nil:
	case string:
		rd = strings.NewReader(b)
	case []byte:
		rd = bytes.NewReader(b)
	default:
		data, _ := json.Marshal(b)
		rd = bytes.NewReader(data)
	}
	req, err := http.NewRequest(method, d.base+path, rd)
	if err != nil {
		d.t.Fatal(err)
	}
	if method == http.MethodPost {
		req.Header.Set("Content-Type", "application/json")
		req.Header.Set("Origin", d.origin)
	}
	for i := 0; i+1 < len(hdr); i += 2 {
		if hdr[i] == "Host" {
			req.Host = hdr[i+1]
			continue
		}
		if hdr[i+1] == "" {
			req.Header.Del(hdr[i])
			continue
		}
		req.Header.Set(hdr[i], hdr[i+1])
	}
	res, err := http.DefaultClient.Do(req)
	if err != nil {
		d.t.Fatal(err)
	}
	defer res.Body.Close()
	data, _ := io.ReadAll(res.Body)
	return res, data
}

// want checks a response's status and, for errors, the field named.
func want(t *testing.T, what string, res *http.Response, data []byte, status int, field string) {
	t.Helper()
	if res.StatusCode != status {
		t.Fatalf("%s: status %d, want %d: %s", what, res.StatusCode, status, data)
	}
	if status >= 400 {
		var e struct{ Error, Field string }
		if err := json.Unmarshal(data, &e); err != nil || e.Error == "" {
			t.Fatalf("%s: body %q is not the error format", what, data)
		}
		if e.Field != field {
			t.Fatalf("%s: field %q, want %q (%s)", what, e.Field, field, e.Error)
		}
	}
	if res.Header.Get("Access-Control-Allow-Origin") != "" {
		t.Fatalf("%s: CORS header set", what)
	}
}

func (d *demo) lastRunID(t *testing.T) string {
	t.Helper()
	list := d.srv.Queue().List()
	if len(list) == 0 {
		t.Fatal("no runs")
	}
	return list[0].ID
}

func (d *demo) points(t *testing.T, id string) []point.Point {
	t.Helper()
	r, err := d.st.OpenRun(id)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	pts, err := r.Points()
	if err != nil {
		t.Fatal(err)
	}
	return pts
}

func (d *demo) runDir(t *testing.T, id string) string {
	t.Helper()
	return filepath.Join(d.dir, id)
}

// waitState waits for run id to reach one of the states, answering
// operator prompts on the way (moving the simulated switch) when answer
// is set.
func (d *demo) waitState(t *testing.T, id string, answer bool, timeout time.Duration, states ...event.State) event.State {
	t.Helper()
	deadline := time.Now().Add(timeout)
	for {
		in, err := d.srv.Queue().Get(id)
		if err != nil {
			t.Fatal(err)
		}
		for _, s := range states {
			if in.State == s {
				return s
			}
		}
		if in.State.Final() {
			t.Fatalf("run %s ended %s (%s), want %v", id, in.State, in.Message, states)
		}
		if answer && in.State == event.WaitingOperator && in.Prompt != nil {
			res, data := d.do("POST", "/api/runs/"+id+"/confirm", map[string]int{"prompt_id": in.Prompt.ID, "range_index": in.Prompt.RangeIndex})
			if res.StatusCode != 200 && res.StatusCode != 409 {
				t.Fatalf("confirm: %d %s", res.StatusCode, data)
			}
		}
		if time.Now().After(deadline) {
			t.Fatalf("run %s is %s after %v, want %v", id, in.State, timeout, states)
		}
		time.Sleep(5 * time.Millisecond)
	}
}

// smallPlan is a short plan over the upper corner of the demo DUT.
func smallPlan(strategy string) map[string]any {
	return map[string]any{
		"name":         "api check",
		"frequencies":  map[string]any{"spacing": "log", "start_hz": 1000, "stop_hz": 300000, "points_per_decade": 4},
		"level":        map[string]any{"vrms": 0.5},
		"ranging":      map[string]any{"strategy": strategy, "start": "10 V"},
		"reference_hz": 1000,
		"refine":       map[string]any{"enabled": false},
	}
}

func newTestStore(t *testing.T) (*store.Store, string) {
	t.Helper()
	dir := t.TempDir()
	st, err := store.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	return st, dir
}
