package web

import (
	"bytes"
	"context"
	"encoding/json"
	"net"
	"net/http"
	"strings"
	"testing"
	"time"

	"github.com/gorilla/websocket"

	"rolloff/sweep/event"
	"rolloff/web/guard"
)

func decode[T any](t *testing.T, data []byte) T {
	t.Helper()
	var v T
	if err := json.Unmarshal(data, &v); err != nil {
		t.Fatalf("decoding %s: %v", data, err)
	}
	return v
}

func TestBenchEndpoint(t *testing.T) {
	d := startDemo(t, demoOpts{})
	res, data := d.do("GET", "/api/bench", nil)
	want(t, "bench", res, data, 200, "")
	b := decode[BenchInfo](t, data)
	if !b.Simulated || b.TimeScale <= 1 || len(b.Instruments) < 2 || len(b.Ranges) == 0 || b.Limits.MaxVrms <= 0 {
		t.Fatalf("bench %+v", b)
	}
	for _, in := range b.Instruments {
		if in.Identity.Manufacturer == "" || in.Identity.Model == "" {
			t.Fatalf("instrument without identity: %+v", in)
		}
	}
	if strings.Join(b.Roles, ",") == "" {
		t.Fatal("no roles")
	}
	res, data = d.do("POST", "/api/bench", "{}")
	want(t, "POST bench", res, data, 405, "method")
}

func TestEstimateAndPlanErrors(t *testing.T) {
	d := startDemo(t, demoOpts{})
	res, data := d.do("POST", "/api/plan/estimate", smallPlan("fixed"))
	want(t, "estimate", res, data, 200, "")
	e := decode[Estimate](t, data)
	if e.Points != 11 || e.DurationS <= 0 || e.TimeScale != d.b.TimeScale || e.Plan == nil || e.Plan.Settle.Readings == 0 {
		t.Fatalf("estimate %+v", e)
	}
	toml := "name = \"upload\"\n[frequencies]\nstart_hz = 1000\nstop_hz = 10000\npoints_per_decade = 3\n[level]\nvrms = 0.5\n"
	res, data = d.do("POST", "/api/plan/estimate", map[string]string{"plan_toml": toml, "file_name": "up.toml"})
	want(t, "estimate of a TOML upload", res, data, 200, "")
	if e := decode[Estimate](t, data); e.Points != 4 {
		t.Fatalf("TOML estimate %+v", e)
	}
	bad := smallPlan("fixed")
	bad["frequencies"].(map[string]any)["start_hz"] = -5
	res, data = d.do("POST", "/api/plan/estimate", bad)
	want(t, "negative start", res, data, 400, "frequencies.start_hz")
	res, data = d.do("POST", "/api/runs", bad)
	want(t, "run with a negative start", res, data, 400, "frequencies.start_hz")
	over := smallPlan("fixed")
	over["level"] = map[string]any{"vrms": 1000}
	res, data = d.do("POST", "/api/plan/estimate", over)
	want(t, "amplitude above the bench limit", res, data, 400, "level.vrms")
	unknown := smallPlan("fixed")
	unknown["colour"] = "red"
	res, data = d.do("POST", "/api/plan/estimate", unknown)
	if res.StatusCode != 400 || !strings.Contains(string(data), "colour") {
		t.Fatalf("unknown field: %d %s", res.StatusCode, data)
	}
	res, data = d.do("POST", "/api/plan/estimate", map[string]string{"plan_toml": toml + "bogus = 1\n", "file_name": "up.toml"})
	if res.StatusCode != 400 || !strings.Contains(string(data), "up.toml") || !strings.Contains(string(data), "bogus") {
		t.Fatalf("TOML with an unknown key: %d %s", res.StatusCode, data)
	}
	res, data = d.do("POST", "/api/plan/estimate", map[string]any{"plan_toml": toml, "extra": 1})
	want(t, "upload with an extra field", res, data, 400, "plan_toml")
	res, data = d.do("POST", "/api/plan/estimate", "")
	want(t, "empty body", res, data, 400, "body")
	res, data = d.do("POST", "/api/plan/estimate", "[1,2]")
	want(t, "array body", res, data, 400, "body")
	res, data = d.do("GET", "/api/plan/estimate", nil)
	want(t, "GET estimate", res, data, 405, "method")
}

func TestRunLifecycle(t *testing.T) {
	d := startDemo(t, demoOpts{})
	res, data := d.do("POST", "/api/runs", smallPlan("operator"))
	want(t, "create", res, data, 201, "")
	id := decode[map[string]string](t, data)["id"]
	if id == "" || res.Header.Get("Location") != "/api/runs/"+id {
		t.Fatalf("create answered %s, Location %q", data, res.Header.Get("Location"))
	}
	// A second run waits for the first.
	res, data = d.do("POST", "/api/runs", smallPlan("operator"))
	want(t, "second", res, data, 201, "")
	id2 := decode[map[string]string](t, data)["id"]
	res, data = d.do("GET", "/api/runs/"+id2, nil)
	want(t, "queued info", res, data, 200, "")
	if in := decode[map[string]any](t, data); in["state"] != string(event.Queued) || in["queue_position"] != 1.0 {
		t.Fatalf("second run %v", in)
	}
	res, data = d.do("POST", "/api/runs/"+id2+"/pause", "{}")
	want(t, "pause a queued run", res, data, 409, "state")

	// The operator strategy prompts for a range; answer with the wrong
	// prompt id, the wrong range and the right one.
	d.waitState(t, id, false, 20*time.Second, event.WaitingOperator)
	res, data = d.do("GET", "/api/runs/"+id, nil)
	want(t, "waiting info", res, data, 200, "")
	in := decode[map[string]any](t, data)
	pr, ok := in["prompt"].(map[string]any)
	if !ok {
		t.Fatalf("waiting run without a prompt: %s", data)
	}
	pid, ri := int(pr["id"].(float64)), int(pr["range_index"].(float64))
	res, data = d.do("POST", "/api/runs/"+id+"/confirm", map[string]int{"prompt_id": pid + 7, "range_index": ri})
	want(t, "confirm a stale prompt", res, data, 409, "prompt_id")
	res, data = d.do("POST", "/api/runs/"+id+"/confirm", map[string]int{"prompt_id": pid, "range_index": 99})
	want(t, "confirm a range that does not exist", res, data, 400, "range_index")
	res, data = d.do("POST", "/api/runs/"+id+"/confirm", map[string]any{"prompt_id": pid})
	want(t, "confirm without a range", res, data, 400, "range_index")
	res, data = d.do("POST", "/api/runs/"+id+"/confirm", `{"prompt_id":1,"range_index":2,"x":3}`)
	want(t, "confirm with an unknown field", res, data, 400, "body")
	res, data = d.do("GET", "/api/runs/"+id+"/confirm", nil)
	want(t, "GET confirm", res, data, 405, "method")
	before := d.b.Sim.ConverterRange()
	res, data = d.do("POST", "/api/runs/"+id+"/confirm", map[string]int{"prompt_id": pid, "range_index": ri})
	if res.StatusCode != 200 {
		_, info := d.do("GET", "/api/runs/"+id, nil)
		t.Logf("info: %.600s", info)
	}
	want(t, "confirm", res, data, 200, "")
	if got := d.b.Sim.ConverterRange(); got != ri {
		t.Fatalf("simulated range switch at %d after confirming %d (was %d)", got, ri, before)
	}
	// Pause and resume while it measures.
	st := d.waitState(t, id, true, 20*time.Second, event.Settling, event.Reading, event.Done)
	if st != event.Done {
		res, data = d.do("POST", "/api/runs/"+id+"/pause", nil)
		want(t, "pause", res, data, 200, "")
		st = d.waitState(t, id, true, 20*time.Second, event.Paused, event.Done)
		if st == event.Paused {
			if d.b.Sim.OutputOn() {
				t.Fatal("generator output on while paused")
			}
			res, data = d.do("POST", "/api/runs/"+id+"/pause", `{"now":true}`)
			want(t, "pause with a field", res, data, 400, "body")
			res, data = d.do("POST", "/api/runs/"+id+"/resume", "{}")
			want(t, "resume", res, data, 200, "")
		}
	}
	d.waitState(t, id, true, 40*time.Second, event.Done)
	res, data = d.do("POST", "/api/runs/"+id+"/pause", "{}")
	want(t, "pause a finished run", res, data, 409, "state")
	res, data = d.do("POST", "/api/runs/"+id+"/resume", "{}")
	want(t, "resume a finished run", res, data, 409, "state")

	res, data = d.do("GET", "/api/runs/"+id, nil)
	want(t, "done info", res, data, 200, "")
	in = decode[map[string]any](t, data)
	result, _ := in["result"].(map[string]any)
	if result == nil || result["high_hz"] == nil {
		t.Fatalf("done run without a result giving the upper corner: %s", data)
	}
	// The corner is the simulated DUT's (second-order Butterworth at
	// 95 kHz: -3.01 dB at 95 kHz); within 2 %.
	if hz := result["high_hz"].(float64); hz < 93e3 || hz > 97e3 {
		t.Fatalf("upper corner %g Hz, want about 95 kHz", hz)
	}

	// Points: all of them, and from a seq on.
	stored := d.points(t, id)
	res, data = d.do("GET", "/api/runs/"+id+"/points", nil)
	want(t, "points", res, data, 200, "")
	pts := decode[struct {
		Points []map[string]any `json:"points"`
	}](t, data).Points
	if len(pts) != len(stored) || len(pts) < 11 {
		t.Fatalf("points: %d, store %d", len(pts), len(stored))
	}
	res, data = d.do("GET", "/api/runs/"+id+"/points?from_seq=5", nil)
	want(t, "points from 5", res, data, 200, "")
	if p := decode[struct{ Points []map[string]any }](t, data).Points; len(p) != len(stored)-5 || p[0]["seq"].(float64) != 5 {
		t.Fatalf("points from 5: %d", len(p))
	}
	res, data = d.do("GET", "/api/runs/"+id+"/points?from_seq=-1", nil)
	want(t, "negative from_seq", res, data, 400, "from_seq")

	// Files: every export, and nothing else.
	for name, ct := range files {
		res, data = d.do("GET", "/api/runs/"+id+"/files/"+name, nil)
		want(t, name, res, data, 200, "")
		if res.Header.Get("Content-Type") != ct || len(data) == 0 {
			t.Fatalf("%s: type %q, %d bytes", name, res.Header.Get("Content-Type"), len(data))
		}
	}
	res, data = d.do("GET", "/api/runs/"+id+"/files/response.png", nil)
	want(t, "png", res, data, 200, "")
	if !bytes.HasPrefix(data, []byte("\x89PNG")) {
		t.Fatal("response.png is not a PNG")
	}
	res, data = d.do("GET", "/api/runs/"+id+"/files/points.jsonl", nil)
	want(t, "a store file outside the allowlist", res, data, 404, "name")
	res, data = d.do("GET", "/api/runs/"+id+"/files/..%2Fmeta.json", nil)
	want(t, "an escaped file name", res, data, 400, "path")
	for _, bad := range []string{"..%2F..%2Fetc", "..", "%2E%2E", "a..b", ".hidden", "x%00y"} {
		res, data = d.do("GET", "/api/runs/"+bad+"/files/response.csv", nil)
		want(t, "run id "+bad, res, data, 400, "id")
	}
	res, data = d.do("GET", "/api/runs/no-such-run", nil)
	want(t, "unknown run", res, data, 404, "id")
	res, data = d.do("GET", "/api/runs/no-such-run/points", nil)
	want(t, "points of an unknown run", res, data, 404, "id")
	res, data = d.do("GET", "/api/nothing", nil)
	want(t, "unknown path", res, data, 404, "path")

	// The second run now runs to its end; a third is aborted.
	d.waitState(t, id2, true, 40*time.Second, event.Done)
	res, data = d.do("POST", "/api/runs", smallPlan("fixed"))
	want(t, "third", res, data, 201, "")
	id3 := decode[map[string]string](t, data)["id"]
	d.waitState(t, id3, true, 20*time.Second, event.Settling, event.Reading, event.Done)
	res, data = d.do("POST", "/api/runs/"+id3+"/abort", nil)
	if res.StatusCode != 200 && res.StatusCode != 409 {
		t.Fatalf("abort: %d %s", res.StatusCode, data)
	}
	st = d.waitState(t, id3, false, 20*time.Second, event.Aborted, event.Done)
	if st == event.Aborted && d.b.Sim.OutputOn() {
		t.Fatal("generator output on after abort")
	}

	// History lists them, newest first.
	res, data = d.do("GET", "/api/runs", nil)
	want(t, "runs", res, data, 200, "")
	runs := decode[struct{ Runs []map[string]any }](t, data).Runs
	if len(runs) != 3 || runs[0]["id"] != id3 || runs[1]["id"] != id2 || runs[2]["id"] != id {
		t.Fatalf("runs %v", runs)
	}

	// Overlays.
	res, data = d.do("GET", "/api/overlay.png?runs="+id+","+id2, nil)
	want(t, "overlay png", res, data, 200, "")
	if !bytes.HasPrefix(data, []byte("\x89PNG")) || res.Header.Get("Content-Type") != "image/png" {
		t.Fatal("overlay.png is not a PNG")
	}
	res, data = d.do("GET", "/api/overlay.svg?runs="+id+","+id2+"&diff=1", nil)
	want(t, "diff svg", res, data, 200, "")
	if !bytes.Contains(data, []byte("<svg")) {
		t.Fatal("overlay.svg is not SVG")
	}
	res, data = d.do("GET", "/api/overlay.svg?runs="+id, nil)
	want(t, "overlay of one run", res, data, 200, "")
	res, data = d.do("GET", "/api/overlay.png", nil)
	want(t, "overlay without runs", res, data, 400, "runs")
	res, data = d.do("GET", "/api/overlay.png?runs="+id+","+id, nil)
	want(t, "overlay naming a run twice", res, data, 400, "runs")
	res, data = d.do("GET", "/api/overlay.png?runs="+id+",nope", nil)
	want(t, "overlay of an unknown run", res, data, 404, "id")
	res, data = d.do("GET", "/api/overlay.png?runs=../x", nil)
	want(t, "overlay of a bad id", res, data, 400, "id")
	res, data = d.do("GET", "/api/overlay.png?runs="+id+"&diff=1", nil)
	want(t, "diff of one run", res, data, 400, "diff")
	res, data = d.do("GET", "/api/overlay.png?runs="+id+","+id2+"&diff=yes", nil)
	want(t, "bad diff", res, data, 400, "diff")
}

// The locking rules through a real loopback connection.
func TestLockingOverHTTP(t *testing.T) {
	d := startDemo(t, demoOpts{})
	body := smallPlan("fixed")
	res, data := d.do("GET", "/api/runs", nil, "Host", "attacker.example:80")
	want(t, "foreign Host", res, data, 403, "host")
	res, data = d.do("GET", "/", nil, "Host", "rebound.example"+d.base[strings.LastIndex(d.base, ":"):])
	want(t, "foreign Host with our port", res, data, 403, "host")
	res, data = d.do("POST", "/api/runs", body, "Origin", "http://attacker.example")
	want(t, "foreign Origin", res, data, 403, "origin")
	res, data = d.do("POST", "/api/runs", body, "Origin", "null")
	want(t, "null Origin", res, data, 403, "origin")
	res, data = d.do("GET", "/api/runs/x/abort", nil)
	want(t, "GET on a state change", res, data, 405, "method")
	res, data = d.do("POST", "/api/runs", `{"name":"x"}`, "Content-Type", "text/plain")
	want(t, "text/plain POST", res, data, 415, "content-type")
	res, data = d.do("PUT", "/api/runs", nil)
	want(t, "PUT", res, data, 405, "method")
	big := `{"name":"` + strings.Repeat("x", guard.DefaultMaxBodyBytes) + `"}`
	res, data = d.do("POST", "/api/runs", big)
	want(t, "oversize body", res, data, 413, "body")
	if len(d.srv.Queue().List()) != 0 {
		t.Fatal("a refused request created a run")
	}
	// The page: no CORS, a strict CSP, and no token (none is required).
	res, data = d.do("GET", "/", nil)
	want(t, "page", res, data, 200, "")
	if !strings.Contains(res.Header.Get("Content-Security-Policy"), "default-src 'none'") || !bytes.Contains(data, []byte(`name="rolloff-token" content=""`)) {
		t.Fatalf("page headers %v", res.Header)
	}
	for _, a := range []string{"/app.js", "/plot.js", "/style.css"} {
		res, data = d.do("GET", a, nil)
		want(t, a, res, data, 200, "")
	}
	// Websocket upgrades from a foreign or null origin are refused.
	wsURL := "ws" + strings.TrimPrefix(d.base, "http") + "/api/runs/x/live"
	for _, o := range []string{"http://attacker.example", "null"} {
		_, resp, err := websocket.DefaultDialer.Dial(wsURL, http.Header{"Origin": {o}})
		if err == nil || resp == nil || resp.StatusCode != 403 {
			t.Fatalf("websocket from origin %q: %v %v", o, err, resp)
		}
	}
}

// With a token, every API request must carry it; the page gets it from a
// one-time link, once.
func TestTokenRequired(t *testing.T) {
	tok := guard.NewToken()
	d := startDemo(t, demoOpts{token: tok})
	if d.srv.Token() != tok || d.srv.OnceURL() == "" {
		t.Fatalf("token %q, once %q", d.srv.Token(), d.srv.OnceURL())
	}
	res, data := d.do("GET", "/api/runs", nil)
	want(t, "no token", res, data, 401, "token")
	res, data = d.do("POST", "/api/plan/estimate", smallPlan("fixed"))
	want(t, "POST without token", res, data, 401, "token")
	res, data = d.do("GET", "/api/runs", nil, guard.TokenHeader, "wrong-token-0123456789")
	want(t, "wrong token", res, data, 401, "token")
	res, data = d.do("GET", "/api/runs", nil, guard.TokenHeader, tok)
	want(t, "with token", res, data, 200, "")
	once := strings.TrimPrefix(d.srv.OnceURL(), d.base)
	res, data = d.do("GET", once, nil)
	want(t, "one-time link", res, data, 200, "")
	if !bytes.Contains(data, []byte(tok)) {
		t.Fatal("the one-time link did not hand over the token")
	}
	res, data = d.do("GET", once, nil)
	want(t, "one-time link used twice", res, data, 403, "once")
	wsURL := "ws" + strings.TrimPrefix(d.base, "http") + "/api/runs/x/live"
	_, resp, err := websocket.DefaultDialer.Dial(wsURL, nil)
	if err == nil || resp.StatusCode != 401 {
		t.Fatalf("websocket without token: %v %v", err, resp)
	}
}

// TestNonLoopbackNeedsToken: asking for an address other than loopback
// without a token makes the daemon generate one and require it. (The
// listener is handed in on loopback: tests never listen elsewhere.)
func TestNonLoopbackNeedsToken(t *testing.T) {
	if _, err := guard.New(guard.Config{Addr: "192.0.2.1:8470"}); err == nil {
		t.Fatal("guard accepted a public address without a token")
	}
	b := openDemoBench(t, 0)
	defer b.Close()
	st, _ := newTestStore(t)
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	s, err := New(Config{Addr: "0.0.0.0:8470", Listener: ln, Bench: b, Store: st})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	served := make(chan error, 1)
	go func() { served <- s.Serve(ctx) }()
	defer func() { cancel(); <-served }()
	tok := s.Token()
	if !guard.ValidToken(tok) || len(tok) != 64 {
		t.Fatalf("generated token %q", tok)
	}
	base := strings.TrimSuffix(s.URL(), "/")
	for _, c := range []struct {
		tok    string
		status int
	}{{"", 401}, {tok, 200}} {
		req, _ := http.NewRequest("GET", base+"/api/runs", nil)
		if c.tok != "" {
			req.Header.Set(guard.TokenHeader, c.tok)
		}
		res, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		res.Body.Close()
		if res.StatusCode != c.status {
			t.Fatalf("token %q: status %d, want %d", c.tok, res.StatusCode, c.status)
		}
	}
	// A loopback daemon without --token requires none.
	s2, err := New(Config{Addr: "127.0.0.1:0", Bench: b, Store: st})
	if err != nil {
		t.Fatal(err)
	}
	defer s2.Close()
	if s2.Token() != "" {
		t.Fatal("a loopback daemon without --token requires a token")
	}
}
