// Package guard keeps the daemon's HTTP interface to its owner: it refuses
// requests for foreign Host names (DNS rebinding), state changes from
// foreign or null origins, state changes by other methods than POST with a
// JSON body, oversize bodies and, where a token is required, requests
// without it. It writes the daemon's JSON error format.
package guard

import (
	"crypto/rand"
	"crypto/subtle"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"mime"
	"net"
	"net/http"
	"net/netip"
	"os"
	"strconv"
	"strings"
	"sync"
)

// TokenHeader is the request header carrying the access token.
const TokenHeader = "X-Rolloff-Token"

// TokenProtocolPrefix prefixes the token offered as a websocket
// subprotocol (browsers cannot set headers on a websocket upgrade).
const TokenProtocolPrefix = "rolloff-token."

// LiveProtocol is the websocket subprotocol the daemon speaks.
const LiveProtocol = "rolloff.live.v1"

// DefaultMaxBodyBytes is the request body limit.
const DefaultMaxBodyBytes = 1 << 20

// Error is the body of every error response.
type Error struct {
	Error string `json:"error"`
	Field string `json:"field,omitempty"`
}

// WriteError writes {"error": msg, "field": field} with status.
func WriteError(w http.ResponseWriter, status int, field, msg string) {
	h := w.Header()
	h.Set("Content-Type", "application/json; charset=utf-8")
	h.Set("X-Content-Type-Options", "nosniff")
	h.Set("Cache-Control", "no-store")
	w.WriteHeader(status)
	_ = json.NewEncoder(w).Encode(Error{Error: msg, Field: field})
}

// NewToken returns 32 random bytes in hex, from crypto/rand.
func NewToken() string {
	b := make([]byte, 32)
	if _, err := rand.Read(b); err != nil {
		panic("guard: crypto/rand: " + err.Error())
	}
	return hex.EncodeToString(b)
}

// ValidToken reports whether t is acceptable as a configured token: 16 to
// 256 characters of [A-Za-z0-9._~-].
func ValidToken(t string) bool {
	if len(t) < 16 || len(t) > 256 {
		return false
	}
	for _, r := range t {
		if !(r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9' || strings.ContainsRune("._~-", r)) {
			return false
		}
	}
	return true
}

// Config says who the daemon is.
type Config struct {
	// Addr is the address the daemon listens on, host:port with the port
	// resolved (not 0).
	Addr string
	// Token, when not empty, is required on every /api request.
	Token string
	// MaxBodyBytes limits request bodies (default DefaultMaxBodyBytes).
	MaxBodyBytes int64
}

// Guard is the locking middleware.
type Guard struct {
	cfg   Config
	host  string // listening host, lower case, without brackets
	port  string
	own   map[string]bool // the names and addresses this daemon answers to
	mu    sync.Mutex
	onces map[string]bool
}

// New checks cfg and returns a Guard.
func New(cfg Config) (*Guard, error) {
	host, port, err := net.SplitHostPort(cfg.Addr)
	if err != nil {
		return nil, fmt.Errorf("guard: address %q: %w", cfg.Addr, err)
	}
	if p, err := strconv.Atoi(port); err != nil || p <= 0 || p > 65535 {
		return nil, fmt.Errorf("guard: address %q: port %q: want 1..65535", cfg.Addr, port)
	}
	if cfg.Token != "" && !ValidToken(cfg.Token) {
		return nil, fmt.Errorf("guard: token: want 16..256 characters of A-Z a-z 0-9 . _ ~ -")
	}
	if !IsLoopback(host) && cfg.Token == "" {
		return nil, fmt.Errorf("guard: address %q is not loopback: a token is required", cfg.Addr)
	}
	if cfg.MaxBodyBytes <= 0 {
		cfg.MaxBodyBytes = DefaultMaxBodyBytes
	}
	g := &Guard{cfg: cfg, host: strings.ToLower(host), port: port, onces: map[string]bool{}, own: map[string]bool{}}
	g.own[g.host] = true
	if a, err := netip.ParseAddr(host); err == nil && a.IsUnspecified() {
		// Listening on every interface: the daemon's own addresses are
		// those of the interfaces, and the machine's name.
		if addrs, err := net.InterfaceAddrs(); err == nil {
			for _, ad := range addrs {
				if pfx, err := netip.ParsePrefix(ad.String()); err == nil {
					g.own[pfx.Addr().String()] = true
				}
			}
		}
		if h, err := os.Hostname(); err == nil && h != "" {
			g.own[strings.ToLower(h)] = true
		}
	}
	return g, nil
}

// TokenRequired reports whether requests must carry the token.
func (g *Guard) TokenRequired() bool { return g.cfg.Token != "" }

// Token returns the configured token ("" when none).
func (g *Guard) Token() string { return g.cfg.Token }

// IsLoopback reports whether host (a name or literal, without port) is
// "localhost" or a loopback IP literal.
func IsLoopback(host string) bool {
	host = strings.TrimSuffix(strings.TrimPrefix(host, "["), "]")
	if strings.EqualFold(host, "localhost") {
		return true
	}
	a, err := netip.ParseAddr(host)
	return err == nil && a.Unmap().IsLoopback()
}

// HostAllowed reports whether a request's Host header names this daemon:
// its own listening host, localhost or a loopback literal, with its port
// (left out when it is plain http's default, 80, as browsers do).
func (g *Guard) HostAllowed(hostport string) bool {
	return g.hostAllowed(hostport, false)
}

// defaultPort is a scheme's default port, which a browser leaves out of
// Host and Origin: 443 for https, 80 for http.
func defaultPort(tls bool) string {
	if tls {
		return "443"
	}
	return "80"
}

// splitHost splits a Host header value into host and port, the port ""
// when it is left out.
func splitHost(hostport string) (host, port string, ok bool) {
	host, port, err := net.SplitHostPort(hostport)
	if err == nil {
		return host, port, port != ""
	}
	if strings.HasPrefix(hostport, "[") && strings.HasSuffix(hostport, "]") {
		return hostport[1 : len(hostport)-1], "", true
	}
	if hostport == "" || strings.ContainsAny(hostport, ":[]") {
		return "", "", false
	}
	return hostport, "", true
}

// hostAllowed is HostAllowed for a request over TLS or not.
func (g *Guard) hostAllowed(hostport string, tls bool) bool {
	host, port, ok := splitHost(hostport)
	if !ok {
		return false
	}
	if port == "" {
		port = defaultPort(tls)
	}
	if port != g.port {
		return false
	}
	host = strings.ToLower(host)
	if g.own[host] || host == "localhost" {
		return true
	}
	a, err := netip.ParseAddr(host)
	if err != nil || a.Zone() != "" {
		return false
	}
	return a.Unmap().IsLoopback() || g.own[a.Unmap().String()]
}

// OriginAllowed reports whether an Origin header is this daemon's own
// origin for the request's (already allowed) Host: exactly
// "http://"+host. An absent Origin (a non-browser client) is allowed;
// "null" and every other origin are not.
func (g *Guard) OriginAllowed(origin, host string) bool {
	if origin == "" {
		return true
	}
	return g.originAllowed(origin, host, false)
}

// originAllowed compares origin with scheme://host, the scheme's default
// port given or left out on either side.
func (g *Guard) originAllowed(origin, host string, tls bool) bool {
	scheme := "http://"
	if tls {
		scheme = "https://"
	}
	rest, ok := strings.CutPrefix(origin, scheme)
	if !ok {
		return false
	}
	norm := func(hp string) (string, bool) {
		h, p, ok := splitHost(strings.ToLower(hp))
		if !ok {
			return "", false
		}
		if p == "" {
			p = defaultPort(tls)
		}
		return net.JoinHostPort(h, p), true
	}
	a, ok1 := norm(rest)
	b, ok2 := norm(host)
	return ok1 && ok2 && a == b
}

// CrossSite reports whether a browser marked r as sent by another site
// (Fetch Metadata, Sec-Fetch-Site: cross-site): an <img> or a script
// of any web page aimed at the daemon.
func CrossSite(r *http.Request) bool {
	return strings.EqualFold(strings.TrimSpace(r.Header.Get("Sec-Fetch-Site")), "cross-site")
}

// TokenOK reports whether r carries the token (header, or the websocket
// subprotocol for an upgrade), or none is required.
func (g *Guard) TokenOK(r *http.Request) bool {
	if g.cfg.Token == "" {
		return true
	}
	want := []byte(g.cfg.Token)
	if t := r.Header.Get(TokenHeader); t != "" {
		return subtle.ConstantTimeCompare([]byte(t), want) == 1
	}
	for _, h := range r.Header.Values("Sec-WebSocket-Protocol") {
		for _, p := range strings.Split(h, ",") {
			p = strings.TrimSpace(p)
			if t, ok := strings.CutPrefix(p, TokenProtocolPrefix); ok {
				if subtle.ConstantTimeCompare([]byte(t), want) == 1 {
					return true
				}
			}
		}
	}
	return false
}

// NewOnce returns a one-time code that ExchangeOnce trades for the token
// once.
func (g *Guard) NewOnce() string {
	c := NewToken()[:32]
	g.mu.Lock()
	g.onces[c] = true
	g.mu.Unlock()
	return c
}

// ExchangeOnce spends a one-time code: it returns the token and true the
// first time, "" and false after that or for an unknown code.
func (g *Guard) ExchangeOnce(code string) (string, bool) {
	if code == "" || g.cfg.Token == "" {
		return "", false
	}
	g.mu.Lock()
	defer g.mu.Unlock()
	if !g.onces[code] {
		return "", false
	}
	delete(g.onces, code)
	return g.cfg.Token, true
}

// isStateChange reports whether a request asks to change something.
func isStateChange(r *http.Request) bool {
	return r.Method != http.MethodGet && r.Method != http.MethodHead && r.Method != http.MethodOptions
}

// IsUpgrade reports whether r asks for a websocket.
func IsUpgrade(r *http.Request) bool {
	return strings.EqualFold(r.Header.Get("Upgrade"), "websocket")
}

// Wrap returns next behind the checks, in this order: Host (403, before
// routing), method (only GET, HEAD and POST; 405), Sec-Fetch-Site
// cross-site on /api (403), Origin on POST and on
// websocket upgrades (403), token on /api (401), Content-Type on POST
// (application/json, 415) and body size (413).
func (g *Guard) Wrap(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		// No response of the daemon may be read by another origin's
		// page, not even as an image (Fetch, Cross-Origin-Resource-Policy).
		w.Header().Set("Cross-Origin-Resource-Policy", "same-origin")
		if !g.hostAllowed(r.Host, r.TLS != nil) {
			WriteError(w, http.StatusForbidden, "host", fmt.Sprintf("host %q is not this daemon's address", clip(r.Host)))
			return
		}
		// Never allow cross-origin reads: no CORS headers are set
		// anywhere; preflights are refused.
		switch r.Method {
		case http.MethodGet, http.MethodHead, http.MethodPost:
		default:
			w.Header().Set("Allow", "GET, HEAD, POST")
			WriteError(w, http.StatusMethodNotAllowed, "method", fmt.Sprintf("method %s not allowed", clip(r.Method)))
			return
		}
		if strings.HasPrefix(r.URL.Path, "/api/") && CrossSite(r) {
			// Another site's page asked: refuse before any work (an
			// overlay costs CPU; a 404 or 200 would tell what runs exist).
			WriteError(w, http.StatusForbidden, "sec-fetch-site", "requests from another site are refused")
			return
		}
		if isStateChange(r) || IsUpgrade(r) {
			origin := r.Header.Get("Origin")
			if origin != "" && !g.originAllowed(origin, r.Host, r.TLS != nil) {
				WriteError(w, http.StatusForbidden, "origin", fmt.Sprintf("origin %q is not this daemon's own", clip(origin)))
				return
			}
		}
		if strings.HasPrefix(r.URL.Path, "/api/") && !g.TokenOK(r) {
			WriteError(w, http.StatusUnauthorized, "token", "missing or wrong "+TokenHeader+" header")
			return
		}
		if isStateChange(r) {
			mt, _, err := mime.ParseMediaType(r.Header.Get("Content-Type"))
			if err != nil || mt != "application/json" {
				WriteError(w, http.StatusUnsupportedMediaType, "content-type",
					fmt.Sprintf("content type %q: want application/json", clip(r.Header.Get("Content-Type"))))
				return
			}
			if r.ContentLength > g.cfg.MaxBodyBytes {
				WriteError(w, http.StatusRequestEntityTooLarge, "body",
					fmt.Sprintf("body of %d bytes: at most %d", r.ContentLength, g.cfg.MaxBodyBytes))
				return
			}
		}
		if r.Body != nil {
			r.Body = http.MaxBytesReader(w, r.Body, g.cfg.MaxBodyBytes)
		}
		next.ServeHTTP(w, r)
	})
}

// MaxBodyBytes returns the body limit.
func (g *Guard) MaxBodyBytes() int64 { return g.cfg.MaxBodyBytes }

func clip(s string) string {
	if len(s) > 80 {
		return s[:80] + "..."
	}
	return s
}
