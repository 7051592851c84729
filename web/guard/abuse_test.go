package guard

import (
	"crypto/tls"
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"
)

// TestCrossOriginResourcePolicy: every response, refusals included,
// carries Cross-Origin-Resource-Policy: same-origin, so that no other
// origin's page can read it even as an image (Fetch standard, CORP).
func TestCrossOriginResourcePolicy(t *testing.T) {
	g, err := New(Config{Addr: "127.0.0.1:8470"})
	if err != nil {
		t.Fatal(err)
	}
	h := g.Wrap(http.HandlerFunc(ok))
	for _, c := range []struct {
		method, host, path string
		status             int
	}{
		{"GET", "127.0.0.1:8470", "/", 204},
		{"GET", "127.0.0.1:8470", "/api/runs", 204},
		{"GET", "evil.example:8470", "/api/runs", 403},
		{"DELETE", "127.0.0.1:8470", "/api/runs", 405},
		{"POST", "127.0.0.1:8470", "/api/runs", 415},
	} {
		r := httptest.NewRequest(c.method, "http://"+c.host+c.path, nil)
		r.Host = c.host
		w := httptest.NewRecorder()
		h.ServeHTTP(w, r)
		if w.Code != c.status {
			t.Errorf("%s %s Host %s: %d, want %d", c.method, c.path, c.host, w.Code, c.status)
		}
		if got := w.Header().Get("Cross-Origin-Resource-Policy"); got != "same-origin" {
			t.Errorf("%s %s Host %s: Cross-Origin-Resource-Policy %q", c.method, c.path, c.host, got)
		}
	}
}

// TestSecFetchSite: the API refuses what a browser marks cross-site (Fetch
// Metadata Request Headers, W3C), before any handler runs; same-origin,
// same-site, none and an absent header (a non-browser client) pass.
func TestSecFetchSite(t *testing.T) {
	g, err := New(Config{Addr: "127.0.0.1:8470"})
	if err != nil {
		t.Fatal(err)
	}
	ran := 0
	h := g.Wrap(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) { ran++; ok(w, r) }))
	for _, c := range []struct {
		path, site string
		status     int
	}{
		{"/api/runs/20260101-000000-x/files/response.png", "cross-site", 403},
		{"/api/overlay.png?runs=a", "Cross-Site", 403},
		{"/api/runs", "same-origin", 204},
		{"/api/runs", "none", 204},
		{"/api/runs", "", 204},
		{"/", "cross-site", 204}, // the page itself: a link from elsewhere may open it
	} {
		before := ran
		r := httptest.NewRequest("GET", "http://127.0.0.1:8470"+c.path, nil)
		if c.site != "" {
			r.Header.Set("Sec-Fetch-Site", c.site)
		}
		w := httptest.NewRecorder()
		h.ServeHTTP(w, r)
		if w.Code != c.status {
			t.Errorf("%s Sec-Fetch-Site %q: %d, want %d (%s)", c.path, c.site, w.Code, c.status, w.Body)
		}
		if c.status == 403 && (ran != before || !strings.Contains(w.Body.String(), "another site")) {
			t.Errorf("%s: refusal reached the handler or does not say why: %s", c.path, w.Body)
		}
	}
}

// TestDefaultPort: on port 80 (443 over TLS) a browser leaves the port
// out of Host and Origin (RFC 9110 §7.2, RFC 6454 §6.2); both forms are
// this daemon's, no other port is.
func TestDefaultPort(t *testing.T) {
	for _, c := range []struct {
		addr, host string
		tls        bool
		want       bool
	}{
		{"127.0.0.1:80", "127.0.0.1", false, true},
		{"127.0.0.1:80", "127.0.0.1:80", false, true},
		{"127.0.0.1:80", "localhost", false, true},
		{"127.0.0.1:80", "LOCALHOST", false, true},
		{"[::1]:80", "[::1]", false, true},
		{"127.0.0.1:80", "localhost:8080", false, false},
		{"127.0.0.1:80", "evil.example", false, false},
		{"127.0.0.1:80", "localhost", true, false}, // https's default is 443
		{"127.0.0.1:443", "localhost", true, true},
		{"127.0.0.1:443", "localhost", false, false},
		{"127.0.0.1:8470", "localhost", false, false},
		{"127.0.0.1:8470", "localhost:8470", false, true},
		{"127.0.0.1:80", "", false, false},
		{"127.0.0.1:80", "localhost:", false, false},
		{"127.0.0.1:80", "::1", false, false}, // an IPv6 host needs brackets
	} {
		g, err := New(Config{Addr: c.addr})
		if err != nil {
			t.Fatal(err)
		}
		if got := g.hostAllowed(c.host, c.tls); got != c.want {
			t.Errorf("listening on %s, Host %q (tls %v): allowed %v, want %v", c.addr, c.host, c.tls, got, c.want)
		}
	}

	g, err := New(Config{Addr: "127.0.0.1:80"})
	if err != nil {
		t.Fatal(err)
	}
	h := g.Wrap(http.HandlerFunc(ok))
	for _, c := range []struct {
		host, origin string
		status       int
	}{
		{"localhost", "http://localhost", 204},
		{"localhost:80", "http://localhost", 204},
		{"localhost", "http://localhost:80", 204},
		{"localhost", "http://localhost:8080", 403},
		{"localhost", "https://localhost", 403},
		{"localhost", "http://evil.example", 403},
	} {
		r := httptest.NewRequest("POST", "http://"+c.host+"/api/runs", strings.NewReader("{}"))
		r.Host = c.host
		r.Header.Set("Origin", c.origin)
		r.Header.Set("Content-Type", "application/json")
		w := httptest.NewRecorder()
		h.ServeHTTP(w, r)
		if w.Code != c.status {
			t.Errorf("POST Host %q Origin %q: %d, want %d (%s)", c.host, c.origin, w.Code, c.status, w.Body)
		}
	}

	// Over TLS on 443: Host without the port, https origin.
	g, err = New(Config{Addr: "127.0.0.1:443"})
	if err != nil {
		t.Fatal(err)
	}
	r := httptest.NewRequest("POST", "https://localhost/api/runs", strings.NewReader("{}"))
	r.TLS = &tls.ConnectionState{}
	r.Host = "localhost"
	r.Header.Set("Origin", "https://localhost")
	r.Header.Set("Content-Type", "application/json")
	w := httptest.NewRecorder()
	g.Wrap(http.HandlerFunc(ok)).ServeHTTP(w, r)
	if w.Code != 204 {
		t.Errorf("TLS POST Host localhost Origin https://localhost: %d (%s)", w.Code, w.Body)
	}
}
