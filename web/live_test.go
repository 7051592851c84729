package web

import (
	"context"
	"encoding/json"
	"net"
	"net/http"
	"strings"
	"testing"
	"time"

	"github.com/gorilla/websocket"

	"rolloff/sweep/event"
)

// liveDial opens a run's live websocket as the page would.
func liveDial(t testing.TB, base, id string, dialer *websocket.Dialer) *websocket.Conn {
	t.Helper()
	if dialer == nil {
		dialer = websocket.DefaultDialer
	}
	url := "ws" + strings.TrimPrefix(base, "http") + "/api/runs/" + id + "/live"
	c, resp, err := dialer.Dial(url, http.Header{"Origin": {base}, "Sec-WebSocket-Protocol": {"rolloff.live.v1"}})
	if err != nil {
		t.Fatalf("dial %s: %v (%v)", url, err, resp)
	}
	if c.Subprotocol() != "rolloff.live.v1" {
		t.Fatalf("subprotocol %q", c.Subprotocol())
	}
	return c
}

// follow reads live messages until the run's final state, and returns
// the point seqs in order of arrival (with duplicates, if any) and
// whether a result came.
func follow(t testing.TB, c *websocket.Conn, timeout time.Duration) (seqs []int, result bool, final event.State) {
	t.Helper()
	c.SetReadDeadline(time.Now().Add(timeout))
	for {
		var ev event.Event
		if err := c.ReadJSON(&ev); err != nil {
			t.Fatalf("live read after %d points: %v", len(seqs), err)
		}
		switch ev.Type {
		case event.TypePoint:
			seqs = append(seqs, ev.Point.Seq)
		case event.TypeResult:
			result = len(ev.Result) > 0
		case event.TypeState:
			if ev.State.Final() {
				return seqs, result, ev.State
			}
		}
	}
}

func checkSeqs(t *testing.T, who string, seqs []int, n int) {
	t.Helper()
	if len(seqs) != n {
		t.Fatalf("%s received %d points, the store has %d", who, len(seqs), n)
	}
	for i, s := range seqs {
		if s != i {
			t.Fatalf("%s: point %d has seq %d (duplicated or missing points)", who, i, s)
		}
	}
}

// A client that joins mid-run receives every point exactly once, and one
// that joins after the end receives the whole run; a client that never
// reads neither holds up the sweep nor the others.
func TestLiveLateJoinerAndStuckClient(t *testing.T) {
	d := startDemo(t, demoOpts{scale: 300})
	plan := smallPlan("fixed")
	plan["frequencies"] = map[string]any{"spacing": "log", "start_hz": 1000, "stop_hz": 100000, "points_per_decade": 12}
	plan["ranging"] = map[string]any{"strategy": "fixed", "start": "10 V"}
	res, data := d.do("POST", "/api/runs", plan)
	want(t, "create", res, data, 201, "")
	id := decode[map[string]string](t, data)["id"]
	early := liveDial(t, d.base, id, nil)
	defer early.Close()
	// A stuck client: a tiny receive buffer, and it never reads.
	stuckDialer := &websocket.Dialer{NetDialContext: func(ctx context.Context, network, addr string) (net.Conn, error) {
		c, err := (&net.Dialer{}).DialContext(ctx, network, addr)
		if tc, ok := c.(*net.TCPConn); ok {
			_ = tc.SetReadBuffer(1024)
		}
		return c, err
	}}
	stuck := liveDial(t, d.base, id, stuckDialer)
	defer stuck.Close()
	// Join late: after some points are stored.
	deadline := time.Now().Add(20 * time.Second)
	for len(d.points(t, id)) < 5 {
		if time.Now().After(deadline) {
			t.Fatal("no points stored")
		}
		time.Sleep(5 * time.Millisecond)
	}
	late := liveDial(t, d.base, id, nil)
	defer late.Close()
	type got struct {
		seqs   []int
		result bool
		final  event.State
	}
	lateC := make(chan got, 1)
	go func() { s, r, f := follow(t, late, 40*time.Second); lateC <- got{s, r, f} }()
	seqs, result, final := follow(t, early, 40*time.Second)
	lg := <-lateC
	if final != event.Done || lg.final != event.Done {
		t.Fatalf("final states %s and %s", final, lg.final)
	}
	n := len(d.points(t, id))
	checkSeqs(t, "the early client", seqs, n)
	checkSeqs(t, "the late client", lg.seqs, n)
	if !result || !lg.result {
		t.Fatal("a client did not receive the result")
	}
	// After the end, a new client is replayed the whole run.
	after := liveDial(t, d.base, id, nil)
	defer after.Close()
	after.SetReadDeadline(time.Now().Add(5 * time.Second))
	var aseqs []int
	var sawResult bool
	for len(aseqs) < n || !sawResult {
		var ev event.Event
		if err := after.ReadJSON(&ev); err != nil {
			t.Fatalf("replay after the end: %v (%d points)", err, len(aseqs))
		}
		if ev.Type == event.TypePoint {
			aseqs = append(aseqs, ev.Point.Seq)
		}
		if ev.Type == event.TypeResult {
			sawResult = true
		}
	}
	checkSeqs(t, "the client joining after the end", aseqs, n)
	t.Logf("%d points; stuck client dropped: %v", n, d.srv.Hub().Dropped() > 0)
}

// Shutdown tells live clients (a final message, then a close frame), turns
// the generator off, leaves the run resumable, and takes less than 5 s.
func TestShutdownAndResume(t *testing.T) {
	dir := t.TempDir()
	d := startDemo(t, demoOpts{scale: 100, dir: dir, noStop: true})
	plan := smallPlan("fixed")
	plan["frequencies"] = map[string]any{"spacing": "log", "start_hz": 1000, "stop_hz": 100000, "points_per_decade": 20}
	res, data := d.do("POST", "/api/runs", plan)
	want(t, "create", res, data, 201, "")
	id := decode[map[string]string](t, data)["id"]
	c := liveDial(t, d.base, id, nil)
	defer c.Close()
	deadline := time.Now().Add(20 * time.Second)
	for len(d.points(t, id)) < 3 {
		if time.Now().After(deadline) {
			t.Fatal("no points stored")
		}
		time.Sleep(5 * time.Millisecond)
	}
	t0 := time.Now()
	d.cancel()
	var closing bool
	var code int
	c.SetReadDeadline(time.Now().Add(6 * time.Second))
	for {
		_, msg, err := c.ReadMessage()
		if err != nil {
			if ce, ok := err.(*websocket.CloseError); ok {
				code = ce.Code
			}
			break
		}
		var m map[string]any
		_ = json.Unmarshal(msg, &m)
		if m["type"] == "closing" {
			closing = true
		}
	}
	if err := <-d.served; err != nil {
		t.Fatalf("Serve: %v", err)
	}
	took := time.Since(t0)
	if !closing || code != websocket.CloseGoingAway {
		t.Fatalf("client told %v, close code %d", closing, code)
	}
	if took > 5*time.Second {
		t.Fatalf("shutdown took %v", took)
	}
	if d.b.Sim.OutputOn() {
		t.Fatal("generator output still on after shutdown")
	}
	stored := len(d.points(t, id))
	d.b.Close()

	// A new daemon on the same store lists the run interrupted and
	// resumes it from the store.
	d2 := startDemo(t, demoOpts{scale: 300, dir: dir})
	res, data = d2.do("GET", "/api/runs/"+id, nil)
	want(t, "info after restart", res, data, 200, "")
	if in := decode[map[string]any](t, data); in["state"] != string(event.Interrupted) {
		t.Fatalf("after restart the run is %v, want interrupted", in["state"])
	}
	res, data = d2.do("POST", "/api/runs/"+id+"/resume", "{}")
	want(t, "resume from the store", res, data, 200, "")
	d2.waitState(t, id, true, 40*time.Second, event.Done)
	pts := d2.points(t, id)
	if len(pts) <= stored {
		t.Fatalf("resumed run has %d points, had %d", len(pts), stored)
	}
	seen := map[int]bool{}
	for i, p := range pts {
		if p.Seq != i || seen[p.Index] {
			t.Fatalf("resumed run: point %d seq %d index %d (repeated or out of order)", i, p.Seq, p.Index)
		}
		seen[p.Index] = true
	}
	t.Logf("shutdown took %v; %d points before, %d after resuming", took, stored, len(pts))
}
