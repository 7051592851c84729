package guard

import (
	"encoding/json"
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"
)

func ok(w http.ResponseWriter, r *http.Request) {
	if r.Body != nil {
		buf := make([]byte, 4096)
		for {
			_, err := r.Body.Read(buf)
			if err != nil {
				if strings.Contains(err.Error(), "too large") {
					WriteError(w, http.StatusRequestEntityTooLarge, "body", err.Error())
					return
				}
				break
			}
		}
	}
	w.WriteHeader(http.StatusNoContent)
}

type req struct {
	name    string
	method  string
	host    string
	path    string
	origin  string
	ctype   string
	token   string
	proto   string // Sec-WebSocket-Protocol
	upgrade bool
	body    string
	chunked bool // hide the length so that only the reader limit applies
	status  int
	field   string
}

func run(t *testing.T, g *Guard, cases []req) {
	t.Helper()
	h := g.Wrap(http.HandlerFunc(ok))
	for _, c := range cases {
		m := c.method
		if m == "" {
			m = http.MethodGet
		}
		p := c.path
		if p == "" {
			p = "/api/runs"
		}
		r := httptest.NewRequest(m, p, strings.NewReader(c.body))
		if c.chunked {
			r.ContentLength = -1
		}
		r.Host = c.host
		if c.origin != "" {
			r.Header.Set("Origin", c.origin)
		}
		if c.ctype != "" {
			r.Header.Set("Content-Type", c.ctype)
		}
		if c.token != "" {
			r.Header.Set(TokenHeader, c.token)
		}
		if c.proto != "" {
			r.Header.Set("Sec-WebSocket-Protocol", c.proto)
		}
		if c.upgrade {
			r.Header.Set("Upgrade", "websocket")
			r.Header.Set("Connection", "Upgrade")
		}
		w := httptest.NewRecorder()
		h.ServeHTTP(w, r)
		if w.Code != c.status {
			t.Errorf("%s: status %d, want %d (%s)", c.name, w.Code, c.status, w.Body.String())
			continue
		}
		if w.Header().Get("Access-Control-Allow-Origin") != "" {
			t.Errorf("%s: a CORS header was set", c.name)
		}
		if c.status >= 400 {
			var e Error
			if err := json.Unmarshal(w.Body.Bytes(), &e); err != nil || e.Error == "" {
				t.Errorf("%s: error body %q is not the error format", c.name, w.Body.String())
			} else if e.Field != c.field {
				t.Errorf("%s: field %q, want %q", c.name, e.Field, c.field)
			}
		}
	}
}

func TestLoopbackRules(t *testing.T) {
	g, err := New(Config{Addr: "127.0.0.1:8470", MaxBodyBytes: 1000})
	if err != nil {
		t.Fatal(err)
	}
	if g.TokenRequired() {
		t.Fatal("a loopback daemon without --token requires a token")
	}
	own := "http://127.0.0.1:8470"
	big := strings.Repeat("x", 1001)
	run(t, g, []req{
		{name: "own host", host: "127.0.0.1:8470", status: 204},
		{name: "localhost", host: "localhost:8470", status: 204},
		{name: "LOCALHOST", host: "LOCALHOST:8470", status: 204},
		{name: "other loopback literal", host: "127.0.0.2:8470", status: 204},
		{name: "ipv6 loopback", host: "[::1]:8470", status: 204},
		{name: "foreign host (DNS rebinding)", host: "attacker.example:8470", status: 403, field: "host"},
		{name: "foreign host on the page", host: "attacker.example:8470", path: "/", status: 403, field: "host"},
		{name: "loopback name as a suffix", host: "localhost.attacker.example:8470", status: 403, field: "host"},
		{name: "wrong port", host: "127.0.0.1:9999", status: 403, field: "host"},
		{name: "no port", host: "127.0.0.1", status: 403, field: "host"},
		{name: "empty host", host: "", status: 403, field: "host"},
		{name: "post json same origin", method: "POST", host: "127.0.0.1:8470", origin: own, ctype: "application/json", body: "{}", status: 204},
		{name: "post json with charset", method: "POST", host: "127.0.0.1:8470", origin: own, ctype: "application/json; charset=utf-8", body: "{}", status: 204},
		{name: "post json without origin (a script)", method: "POST", host: "127.0.0.1:8470", ctype: "application/json", body: "{}", status: 204},
		{name: "post from localhost origin to localhost", method: "POST", host: "localhost:8470", origin: "http://localhost:8470", ctype: "application/json", body: "{}", status: 204},
		{name: "foreign origin", method: "POST", host: "127.0.0.1:8470", origin: "http://attacker.example", ctype: "application/json", body: "{}", status: 403, field: "origin"},
		{name: "null origin", method: "POST", host: "127.0.0.1:8470", origin: "null", ctype: "application/json", body: "{}", status: 403, field: "origin"},
		{name: "origin of another loopback name", method: "POST", host: "127.0.0.1:8470", origin: "http://localhost:8470", ctype: "application/json", body: "{}", status: 403, field: "origin"},
		{name: "https origin", method: "POST", host: "127.0.0.1:8470", origin: "https://127.0.0.1:8470", ctype: "application/json", body: "{}", status: 403, field: "origin"},
		{name: "origin with a path", method: "POST", host: "127.0.0.1:8470", origin: own + "/", ctype: "application/json", body: "{}", status: 403, field: "origin"},
		{name: "text/plain post", method: "POST", host: "127.0.0.1:8470", origin: own, ctype: "text/plain", body: "{}", status: 415, field: "content-type"},
		{name: "form post", method: "POST", host: "127.0.0.1:8470", origin: own, ctype: "application/x-www-form-urlencoded", body: "a=1", status: 415, field: "content-type"},
		{name: "post without content type", method: "POST", host: "127.0.0.1:8470", origin: own, body: "{}", status: 415, field: "content-type"},
		{name: "put", method: "PUT", host: "127.0.0.1:8470", origin: own, ctype: "application/json", body: "{}", status: 405, field: "method"},
		{name: "delete", method: "DELETE", host: "127.0.0.1:8470", status: 405, field: "method"},
		{name: "preflight", method: "OPTIONS", host: "127.0.0.1:8470", origin: "http://attacker.example", status: 405, field: "method"},
		{name: "oversize body, declared", method: "POST", host: "127.0.0.1:8470", origin: own, ctype: "application/json", body: big, status: 413, field: "body"},
		{name: "oversize body, chunked", method: "POST", host: "127.0.0.1:8470", origin: own, ctype: "application/json", body: big, chunked: true, status: 413, field: "body"},
		{name: "websocket same origin", host: "127.0.0.1:8470", path: "/api/runs/x/live", origin: own, upgrade: true, status: 204},
		{name: "websocket foreign origin", host: "127.0.0.1:8470", path: "/api/runs/x/live", origin: "http://attacker.example", upgrade: true, status: 403, field: "origin"},
		{name: "websocket null origin", host: "127.0.0.1:8470", path: "/api/runs/x/live", origin: "null", upgrade: true, status: 403, field: "origin"},
		{name: "websocket foreign host", host: "attacker.example:8470", path: "/api/runs/x/live", origin: "http://attacker.example:8470", upgrade: true, status: 403, field: "host"},
	})
}

func TestTokenRules(t *testing.T) {
	if _, err := New(Config{Addr: "192.0.2.10:8470"}); err == nil {
		t.Fatal("a non-loopback daemon without a token was accepted")
	}
	tok := NewToken()
	if !ValidToken(tok) || len(tok) != 64 {
		t.Fatalf("NewToken %q", tok)
	}
	if NewToken() == tok {
		t.Fatal("two tokens alike")
	}
	g, err := New(Config{Addr: "192.0.2.10:8470", Token: tok})
	if err != nil {
		t.Fatal(err)
	}
	own := "http://192.0.2.10:8470"
	wrong := tok[:63] + "0"
	if wrong == tok {
		wrong = tok[:63] + "1"
	}
	run(t, g, []req{
		{name: "own address with token", host: "192.0.2.10:8470", token: tok, status: 204},
		{name: "missing token", host: "192.0.2.10:8470", status: 401, field: "token"},
		{name: "wrong token", host: "192.0.2.10:8470", token: wrong, status: 401, field: "token"},
		{name: "page needs no token", host: "192.0.2.10:8470", path: "/", status: 204},
		{name: "post without token", method: "POST", host: "192.0.2.10:8470", origin: own, ctype: "application/json", body: "{}", status: 401, field: "token"},
		{name: "post with token", method: "POST", host: "192.0.2.10:8470", origin: own, ctype: "application/json", token: tok, body: "{}", status: 204},
		{name: "websocket token as subprotocol", host: "192.0.2.10:8470", path: "/api/runs/x/live", origin: own, upgrade: true, proto: LiveProtocol + ", " + TokenProtocolPrefix + tok, status: 204},
		{name: "websocket wrong subprotocol token", host: "192.0.2.10:8470", path: "/api/runs/x/live", origin: own, upgrade: true, proto: TokenProtocolPrefix + "nope", status: 401, field: "token"},
		{name: "foreign host even with token", host: "attacker.example:8470", token: tok, status: 403, field: "host"},
		{name: "loopback with token", host: "127.0.0.1:8470", token: tok, status: 204},
	})
	code := g.NewOnce()
	if got, ok := g.ExchangeOnce(code); !ok || got != tok {
		t.Fatalf("first exchange: %q %v", got, ok)
	}
	if _, ok := g.ExchangeOnce(code); ok {
		t.Fatal("a one-time code worked twice")
	}
	if _, ok := g.ExchangeOnce("unknown"); ok {
		t.Fatal("an unknown code worked")
	}
	if _, err := New(Config{Addr: "127.0.0.1:8470", Token: "short"}); err == nil {
		t.Fatal("a short token was accepted")
	}
}

// Listening on every interface, the daemon answers to its interfaces'
// addresses and still to nothing else.
func TestWildcardHosts(t *testing.T) {
	g, err := New(Config{Addr: "0.0.0.0:8470", Token: NewToken()})
	if err != nil {
		t.Fatal(err)
	}
	if !g.HostAllowed("127.0.0.1:8470") || g.HostAllowed("attacker.example:8470") || g.HostAllowed("0.0.0.0:9") {
		t.Fatal("wildcard host rules")
	}
}

func TestIsLoopback(t *testing.T) {
	for h, want := range map[string]bool{
		"127.0.0.1": true, "127.9.8.7": true, "::1": true, "[::1]": true, "localhost": true,
		"0.0.0.0": false, "::": false, "192.0.2.1": false, "localhost.example": false, "": false, "::ffff:127.0.0.1": true,
	} {
		if IsLoopback(h) != want {
			t.Errorf("IsLoopback(%q) = %v", h, !want)
		}
	}
}
