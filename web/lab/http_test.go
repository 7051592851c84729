package lab

import (
	"io"
	"net/http"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/gorilla/websocket"
	"github.com/rs/zerolog"

	"rolloff/sweep/publish"
)

// TestPageAndGuard: the page and its assets are served with the
// caution; requests for a foreign Host and websocket upgrades from a
// foreign origin are refused (DNS rebinding, cross-site reads); a lab
// on a non-loopback address requires its token on /api.
func TestPageAndGuard(t *testing.T) {
	l, err := New(Config{Broker: publish.Broker{URL: "mqtt://127.0.0.1:1"}, Addr: "127.0.0.1:0", Log: zerolog.Nop()})
	if err != nil {
		t.Fatal(err)
	}
	defer l.ln.Close()
	srv := &http.Server{Handler: l.Handler()}
	go srv.Serve(l.ln)
	defer srv.Close()
	base := "http://" + l.Addr()
	get := func(path string, hdr map[string]string) (int, string) {
		req, _ := http.NewRequest("GET", base+path, nil)
		for k, v := range hdr {
			if k == "Host" {
				req.Host = v
			} else {
				req.Header.Set(k, v)
			}
		}
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		defer resp.Body.Close()
		b, _ := io.ReadAll(resp.Body)
		return resp.StatusCode, string(b)
	}
	if code, body := get("/", nil); code != 200 || !strings.Contains(body, "Read-only overview") || !strings.Contains(body, "treat every generator output as live") {
		t.Errorf("page: %d %q", code, body)
	}
	for _, a := range []string{"/static/lab.js", "/static/lab.css"} {
		if code, _ := get(a, nil); code != 200 {
			t.Errorf("%s: %d", a, code)
		}
	}
	if code, body := get("/api/lab", nil); code != 200 || !strings.Contains(body, `"type":"snapshot"`) {
		t.Errorf("/api/lab: %d %q", code, body)
	}
	if code, _ := get("/", map[string]string{"Host": "attacker.example:80"}); code != http.StatusForbidden {
		t.Errorf("foreign Host: %d, want 403", code)
	}
	d := websocket.Dialer{Subprotocols: []string{LiveProtocol}}
	if _, resp, err := d.Dial("ws://"+l.Addr()+"/api/live", http.Header{"Origin": {"http://attacker.example"}}); err == nil || resp == nil || resp.StatusCode != http.StatusForbidden {
		t.Errorf("foreign origin websocket: %v %v, want 403", err, resp)
	}
	c, _, err := d.Dial("ws://"+l.Addr()+"/api/live", http.Header{"Origin": {"http://" + l.Addr()}})
	if err != nil {
		t.Fatalf("own origin websocket: %v", err)
	}
	c.Close()

	// Any address but loopback: a token is made and required.
	open, err := New(Config{Broker: publish.Broker{URL: "mqtt://127.0.0.1:1"}, Addr: "0.0.0.0:0", Log: zerolog.Nop()})
	if err != nil {
		t.Fatal(err)
	}
	defer open.ln.Close()
	if open.Token() == "" || !strings.Contains(open.URL(), "#token="+open.Token()) {
		t.Fatalf("no token on a non-loopback lab: %q", open.URL())
	}
	osrv := &http.Server{Handler: open.Handler()}
	go osrv.Serve(open.ln)
	defer osrv.Close()
	port := open.Addr()[strings.LastIndexByte(open.Addr(), ':'):]
	for tok, want := range map[string]int{"": http.StatusUnauthorized, "wrong-token-0123456789": http.StatusUnauthorized, open.Token(): 200} {
		req, _ := http.NewRequest("GET", "http://127.0.0.1"+port+"/api/lab", nil)
		if tok != "" {
			req.Header.Set("X-Rolloff-Token", tok)
		}
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != want {
			t.Errorf("token %q: %d, want %d", tok, resp.StatusCode, want)
		}
	}
}

// TestViewApply: payloads of another schema, malformed topics and
// mismatched run ids are ignored; repeats by seq are dropped.
func TestViewApply(t *testing.T) {
	v := newView()
	pt := `{"schema":1,"bench":"b","run":"r1","seq":%d,"point":{"seq":%d,"freq_hz":1000,"gain_db":-0.1}}`
	topic := publish.RunTopic("b", "r1", publish.TopicPoints)
	for _, seq := range []int{0, 2, 1, 2, 0} {
		v.apply(topic, []byte(strings.NewReplacer("%d", itoa(seq)).Replace(pt)), timeZero)
	}
	if n := len(v.apply(publish.RunTopic("b", "r2", publish.TopicPoints), []byte(strings.ReplaceAll(pt, "%d", "3")), timeZero)); n != 0 {
		t.Error("a point naming another run than its topic was taken")
	}
	if n := len(v.apply(topic, []byte(`{"schema":2,"run":"r1","seq":9}`), timeZero)); n != 0 {
		t.Error("a payload of schema 2 was taken")
	}
	if n := len(v.apply("rolloff/v1/benches/b+/status", []byte(`{"schema":1,"online":true}`), timeZero)); n != 0 {
		t.Error("a bench id with a wildcard was taken")
	}
	s := v.snapshot()
	if len(s) != 1 || len(s[0].Runs) != 1 {
		t.Fatalf("snapshot %+v", s)
	}
	r := s[0].Runs[0]
	if len(r.Points) != 3 || r.Points[0].Seq != 0 || r.Points[1].Seq != 1 || r.Points[2].Seq != 2 || r.Repeats != 2 {
		t.Errorf("points %+v, repeats %d: want seq 0 1 2 once each and 2 repeats", r.Points, r.Repeats)
	}
}

var timeZero = time.Time{}

func itoa(i int) string { return strconv.Itoa(i) }
