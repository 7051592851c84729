package hub

import (
	"context"
	"encoding/json"
	"fmt"
	"net/http"
	"net/http/httptest"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/gorilla/websocket"
)

// testServer serves the hub on loopback; every connection follows topic
// "t" with replay.
func testServer(t *testing.T, h *Hub, replay ReplayFunc) string {
	t.Helper()
	up := websocket.Upgrader{}
	srv := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		c, err := up.Upgrade(w, r, nil)
		if err != nil {
			return
		}
		if _, err := h.Attach(c, "t", replay, nil); err != nil {
			c.Close()
		}
	}))
	t.Cleanup(srv.Close)
	return "ws" + strings.TrimPrefix(srv.URL, "http")
}

func dial(t *testing.T, url string) *websocket.Conn {
	t.Helper()
	c, _, err := websocket.DefaultDialer.Dial(url, nil)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close() })
	return c
}

func waitClients(t *testing.T, h *Hub, n int) {
	t.Helper()
	deadline := time.Now().Add(3 * time.Second)
	for h.Clients("t") != n {
		if time.Now().After(deadline) {
			t.Fatalf("clients = %d, want %d", h.Clients("t"), n)
		}
		time.Sleep(2 * time.Millisecond)
	}
}

type seqMsg struct {
	Type string `json:"type"`
	Seq  int    `json:"seq"`
}

func pointMsg(seq int) Message {
	return NewMessage([]byte(fmt.Sprintf(`{"type":"point","seq":%d}`, seq)), seq)
}

// A client that joins while points are being published receives each
// point exactly once, in order: the replay covers what was stored before,
// the live queue what came after, and the overlap is dropped by seq.
func TestLateJoinerMissesNothing(t *testing.T) {
	h := New(Options{})
	var mu sync.Mutex
	stored := 0 // points 0..stored-1 are "in the store"
	replay := func(ctx context.Context, from int, send func(Message) error) (int, error) {
		mu.Lock()
		n := stored
		mu.Unlock()
		last := from - 1
		for i := from; i < n; i++ {
			if err := send(pointMsg(i)); err != nil {
				return last, err
			}
			last = i
		}
		return last, nil
	}
	url := testServer(t, h, replay)
	const total = 400
	started := make(chan struct{})
	go func() {
		for i := 0; i < total; i++ {
			mu.Lock()
			stored = i + 1 // stored before it is published
			mu.Unlock()
			h.Publish("t", pointMsg(i))
			if i == total/4 {
				close(started)
			}
			time.Sleep(200 * time.Microsecond)
		}
	}()
	<-started
	c := dial(t, url)
	c.SetReadDeadline(time.Now().Add(10 * time.Second))
	for want := 0; want < total; want++ {
		var m seqMsg
		if err := c.ReadJSON(&m); err != nil {
			t.Fatalf("reading point %d: %v", want, err)
		}
		if m.Seq != want {
			t.Fatalf("got point %d, want %d", m.Seq, want)
		}
	}
}

// TestStalledWriteDropped: a client that stops reading, with a queue
// long enough never to fill, is dropped when a write to it runs out of
// WriteWait, and counted with the clients dropped for being too slow (a
// loaded host makes this path the one taken: the publisher is slower
// than the write deadline).
func TestStalledWriteDropped(t *testing.T) {
	h := New(Options{SendQueue: 100000, WriteWait: 200 * time.Millisecond})
	url := testServer(t, h, nil)
	stalled := dial(t, url)
	_ = stalled // never read
	waitClients(t, h, 1)
	payload := strings.Repeat("x", 64<<10)
	deadline := time.Now().Add(20 * time.Second)
	for i := 0; h.Clients("t") > 0; i++ {
		if time.Now().After(deadline) {
			t.Fatalf("after %d messages of 64 KiB the stalled client is still attached", i)
		}
		if i < 2000 { // 125 MiB, beyond any socket buffer
			h.Publish("t", NewMessage([]byte(`{"type":"log","message":"`+payload+`"}`), NoSeq))
		}
		time.Sleep(time.Millisecond)
	}
	if d := h.Dropped(); d != 1 {
		t.Errorf("dropped = %d, want 1: a write past its deadline is a client too slow", d)
	}
}

// A client that stops reading is dropped; Publish never waits for it and
// the clients that keep up receive everything.
func TestSlowClientDropped(t *testing.T) {
	const total = 500
	h := New(Options{SendQueue: 128, WriteWait: 500 * time.Millisecond})
	url := testServer(t, h, nil)
	slow := dial(t, url)
	_ = slow // never read
	good := dial(t, url)
	waitClients(t, h, 2)
	got := make(chan int, 1)
	go func() {
		n := 0
		good.SetReadDeadline(time.Now().Add(20 * time.Second))
		for {
			if _, _, err := good.ReadMessage(); err != nil {
				break
			}
			n++
			if n == total {
				break
			}
		}
		got <- n
	}()
	payload := strings.Repeat("x", 64<<10)
	var worst time.Duration
	for i := 0; i < total; i++ {
		m := NewMessage([]byte(`{"type":"log","message":"`+payload+`"}`), NoSeq)
		t0 := time.Now()
		h.Publish("t", m)
		if d := time.Since(t0); d > worst {
			worst = d
		}
		time.Sleep(time.Millisecond)
	}
	if n := <-got; n != total {
		t.Errorf("the reading client got %d messages, want %d", n, total)
	}
	if h.Dropped() != 1 {
		t.Errorf("dropped = %d, want 1 (the client that does not read)", h.Dropped())
	}
	// Publish is a non-blocking send per client; a blocked client must
	// not make it wait anywhere near the write deadline.
	if worst > 100*time.Millisecond {
		t.Errorf("slowest Publish took %v", worst)
	}
}

// A client that does not answer pings is closed after PongWait; one that
// reads (and so answers) stays.
func TestPongDeadline(t *testing.T) {
	h := New(Options{PongWait: 400 * time.Millisecond, PingPeriod: 100 * time.Millisecond})
	url := testServer(t, h, nil)
	silent := dial(t, url)
	_ = silent
	alive := dial(t, url)
	go func() {
		for {
			if _, _, err := alive.ReadMessage(); err != nil {
				return
			}
		}
	}()
	waitClients(t, h, 2)
	time.Sleep(1200 * time.Millisecond)
	if n := h.Clients("t"); n != 1 {
		t.Fatalf("clients after the pong wait = %d, want 1", n)
	}
}

func closeCode(t *testing.T, c *websocket.Conn) int {
	t.Helper()
	c.SetReadDeadline(time.Now().Add(3 * time.Second))
	for {
		_, _, err := c.ReadMessage()
		if err != nil {
			var ce *websocket.CloseError
			if ok := asClose(err, &ce); ok {
				return ce.Code
			}
			t.Fatalf("read ended without a close frame: %v", err)
		}
	}
}

func asClose(err error, ce **websocket.CloseError) bool {
	e, ok := err.(*websocket.CloseError)
	if ok {
		*ce = e
	}
	return ok
}

func TestReadLimit(t *testing.T) {
	h := New(Options{MaxMessageBytes: 256})
	c := dial(t, testServer(t, h, nil))
	waitClients(t, h, 1)
	if err := c.WriteMessage(websocket.TextMessage, []byte(`{"type":"ping","x":"`+strings.Repeat("a", 1000)+`"}`)); err != nil {
		t.Fatal(err)
	}
	if code := closeCode(t, c); code != websocket.CloseMessageTooBig {
		t.Fatalf("close code %d, want %d", code, websocket.CloseMessageTooBig)
	}
}

func TestClientMessages(t *testing.T) {
	var mu sync.Mutex
	var froms []int
	replay := func(ctx context.Context, from int, send func(Message) error) (int, error) {
		mu.Lock()
		froms = append(froms, from)
		mu.Unlock()
		for i := from; i < 3; i++ {
			if err := send(pointMsg(i)); err != nil {
				return i - 1, err
			}
		}
		return 2, nil
	}
	h := New(Options{})
	c := dial(t, testServer(t, h, replay))
	c.SetReadDeadline(time.Now().Add(3 * time.Second))
	for i := 0; i < 3; i++ {
		var m seqMsg
		if err := c.ReadJSON(&m); err != nil || m.Seq != i {
			t.Fatalf("replay %d: %+v %v", i, m, err)
		}
	}
	if err := c.WriteMessage(websocket.TextMessage, []byte(`{"type":"ping"}`)); err != nil {
		t.Fatal(err)
	}
	var pong seqMsg
	if err := c.ReadJSON(&pong); err != nil || pong.Type != "pong" {
		t.Fatalf("ping answered with %+v, %v", pong, err)
	}
	if err := c.WriteMessage(websocket.TextMessage, []byte(`{"type":"replay","from_seq":1}`)); err != nil {
		t.Fatal(err)
	}
	for i := 1; i < 3; i++ {
		var m seqMsg
		if err := c.ReadJSON(&m); err != nil || m.Seq != i {
			t.Fatalf("second replay %d: %+v %v", i, m, err)
		}
	}
	mu.Lock()
	if fmt.Sprint(froms) != "[0 1]" {
		t.Errorf("replays asked from %v, want [0 1]", froms)
	}
	mu.Unlock()
	// A live copy of a point already replayed is not sent again.
	h.Publish("t", pointMsg(2))
	h.Publish("t", pointMsg(3))
	var m seqMsg
	if err := c.ReadJSON(&m); err != nil || m.Seq != 3 {
		t.Fatalf("after dedupe got %+v %v, want point 3", m, err)
	}
	if err := c.WriteMessage(websocket.TextMessage, []byte(`{"type":"shout"}`)); err != nil {
		t.Fatal(err)
	}
	if code := closeCode(t, c); code != websocket.ClosePolicyViolation {
		t.Fatalf("bad message: close code %d, want %d", code, websocket.ClosePolicyViolation)
	}
}

func TestCloseTellsClients(t *testing.T) {
	h := New(Options{})
	url := testServer(t, h, nil)
	a, b := dial(t, url), dial(t, url)
	waitClients(t, h, 2)
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
	defer cancel()
	done := make(chan error, 1)
	go func() { done <- h.Close(ctx, NewMessage([]byte(`{"type":"closing"}`), NoSeq)) }()
	for _, c := range []*websocket.Conn{a, b} {
		c.SetReadDeadline(time.Now().Add(2 * time.Second))
		var m seqMsg
		if err := c.ReadJSON(&m); err != nil || m.Type != "closing" {
			t.Fatalf("final message %+v, %v", m, err)
		}
		if code := closeCode(t, c); code != websocket.CloseGoingAway {
			t.Fatalf("close code %d, want %d", code, websocket.CloseGoingAway)
		}
	}
	if err := <-done; err != nil {
		t.Fatalf("Close: %v", err)
	}
	if _, err := h.Attach(nil, "t", nil, nil); err != ErrClosed {
		t.Fatalf("Attach after Close: %v, want ErrClosed", err)
	}
}

func TestDecodeClientMessage(t *testing.T) {
	good := map[string]ClientMessage{
		`{"type":"ping"}`:                    {Type: "ping"},
		` {"type" : "replay", "from_seq":0}`: {Type: "replay"},
		`{"from_seq":17,"type":"replay"}`:    {Type: "replay", FromSeq: 17},
	}
	for in, want := range good {
		got, err := DecodeClientMessage([]byte(in))
		if err != nil || got != want {
			t.Errorf("%s: %+v, %v; want %+v", in, got, err, want)
		}
	}
	bad := map[string]string{ // input -> field named in the error
		``:                                        "",
		`[]`:                                      "",
		`{"type":"ping"} {}`:                      "",
		`{"type":"ping"}x`:                        "",
		`{"type":"ping","type":"ping"}`:           "type",
		`{"type":"shout"}`:                        "type",
		`{}`:                                      "type",
		`{"type":1}`:                              "type",
		`{"type":"ping","from_seq":1}`:            "from_seq",
		`{"type":"replay"}`:                       "from_seq",
		`{"type":"replay","from_seq":-1}`:         "from_seq",
		`{"type":"replay","from_seq":1.5}`:        "from_seq",
		`{"type":"replay","from_seq":"1"}`:        "from_seq",
		`{"type":"replay","from_seq":1e40}`:       "from_seq",
		`{"type":"ping","extra":{"a":[1,2]}}`:     "extra",
		"{\"type\":\"p\xffng\"}":                  "",
		`{"type":"ping"`:                          "",
		`{"type":"replay","from_seq":2000000000}`: "from_seq",
	}
	for in, field := range bad {
		_, err := DecodeClientMessage([]byte(in))
		me, ok := err.(*MessageError)
		if !ok {
			t.Errorf("%q: error %v, want a *MessageError", in, err)
			continue
		}
		if me.Field != field {
			t.Errorf("%q: field %q, want %q (%v)", in, me.Field, field, err)
		}
	}
	if _, err := DecodeClientMessage([]byte(`{"type":"ping","pad":"` + strings.Repeat(" ", 2000) + `"}`)); err == nil {
		t.Error("oversize message accepted")
	}
}

// FuzzDecodeClientMessage: the decoder never panics, accepts only the
// documented shapes, and what it accepts survives a round trip.
func FuzzDecodeClientMessage(f *testing.F) {
	for _, s := range []string{`{"type":"ping"}`, `{"type":"replay","from_seq":3}`, `{"type":"replay","from_seq":-3}`, `{"type":"x"}`, `[1]`, `{"type":"ping","type":"ping"}`} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		m, err := DecodeClientMessage(data)
		if err != nil {
			if _, ok := err.(*MessageError); !ok {
				t.Fatalf("error of type %T: %v", err, err)
			}
			return
		}
		if m.Type != TypePing && m.Type != TypeReplay {
			t.Fatalf("accepted type %q", m.Type)
		}
		if m.FromSeq < 0 || m.FromSeq > MaxSeq || (m.Type == TypePing && m.FromSeq != 0) {
			t.Fatalf("accepted %+v", m)
		}
		var generic map[string]any
		if err := json.Unmarshal(data, &generic); err != nil {
			t.Fatalf("accepted %q, which encoding/json refuses: %v", data, err)
		}
		out := map[string]any{"type": m.Type}
		if m.Type == TypeReplay {
			out["from_seq"] = m.FromSeq
		}
		enc, _ := json.Marshal(out)
		m2, err := DecodeClientMessage(enc)
		if err != nil || m2 != m {
			t.Fatalf("round trip of %+v: %+v, %v", m, m2, err)
		}
	})
}
