package lab

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"net"
	"net/http"
	"strings"
	"sync/atomic"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"
	"github.com/gorilla/websocket"
	"github.com/rs/zerolog"

	"rolloff/sweep/publish"
	"rolloff/web/guard"
	"rolloff/web/hub"
)

// DefaultAddr is the lab page's default listen address.
const DefaultAddr = "127.0.0.1:8471"

// liveTopic is the hub topic every lab page follows.
const liveTopic = "lab"

// LiveProtocol is the websocket subprotocol of the lab page.
const LiveProtocol = "rolloff.lab.v1"

// Config configures a Lab.
type Config struct {
	Broker publish.Broker
	// Addr is the listen address (default DefaultAddr). Any other than
	// loopback requires Token.
	Addr string
	// Token, when set, is required on /api requests and the websocket.
	Token string
	// ClientID is the MQTT client id (default rolloff-lab- and a random
	// suffix).
	ClientID string
	Version  string
	Log      zerolog.Logger
}

// Lab is the overview server.
type Lab struct {
	cfg      Config
	view     *view
	hub      *hub.Hub
	guard    *guard.Guard
	ln       net.Listener
	client   mqtt.Client
	upgrader websocket.Upgrader
	online   atomic.Bool
}

// New checks cfg, listens on its address and returns the lab; Serve
// connects to the broker and serves.
func New(cfg Config) (*Lab, error) {
	if err := cfg.Broker.Check(); err != nil {
		return nil, fmt.Errorf("--broker: %w", err)
	}
	if cfg.Addr == "" {
		cfg.Addr = DefaultAddr
	}
	if cfg.ClientID == "" {
		cfg.ClientID = "rolloff-lab-" + guard.NewToken()[:12]
	}
	host, _, err := net.SplitHostPort(cfg.Addr)
	if err != nil {
		return nil, fmt.Errorf("--addr %q: %w", cfg.Addr, err)
	}
	if !guard.IsLoopback(host) && cfg.Token == "" {
		cfg.Token = guard.NewToken()
	}
	ln, err := net.Listen("tcp", cfg.Addr)
	if err != nil {
		return nil, fmt.Errorf("--addr %s: %w", cfg.Addr, err)
	}
	g, err := guard.New(guard.Config{Addr: ln.Addr().String(), Token: cfg.Token})
	if err != nil {
		ln.Close()
		return nil, err
	}
	l := &Lab{cfg: cfg, view: newView(), guard: g, ln: ln,
		hub: hub.New(hub.Options{SendQueue: 4096, Log: cfg.Log})}
	l.upgrader = websocket.Upgrader{
		HandshakeTimeout: 10 * time.Second,
		ReadBufferSize:   1024,
		WriteBufferSize:  8192,
		Subprotocols:     []string{LiveProtocol},
		CheckOrigin: func(r *http.Request) bool {
			return g.OriginAllowed(r.Header.Get("Origin"), r.Host)
		},
	}
	opts, err := cfg.Broker.ClientOptions(cfg.ClientID)
	if err != nil {
		ln.Close()
		return nil, err
	}
	opts.SetOnConnectHandler(l.subscribe)
	opts.SetConnectionLostHandler(func(_ mqtt.Client, err error) {
		l.online.Store(false)
		l.cfg.Log.Warn().Err(err).Msg("broker connection lost; reconnecting")
		l.hub.Publish(liveTopic, hub.NewMessage([]byte(`{"type":"broker","connected":false}`), hub.NoSeq))
	})
	opts.SetDefaultPublishHandler(func(_ mqtt.Client, m mqtt.Message) { l.receive(m.Topic(), m.Payload()) })
	l.client = mqtt.NewClient(opts)
	return l, nil
}

// URL is the page's address, with the token in the fragment when one
// is required.
func (l *Lab) URL() string {
	u := "http://" + l.ln.Addr().String() + "/"
	if l.cfg.Token != "" {
		u += "#token=" + l.cfg.Token
	}
	return u
}

// Addr is the address the lab listens on.
func (l *Lab) Addr() string { return l.ln.Addr().String() }

// Token is the access token ("" when none is required).
func (l *Lab) Token() string { return l.cfg.Token }

// subscribe (re)subscribes to every bench topic; the broker then sends
// the retained status, states and results again.
func (l *Lab) subscribe(c mqtt.Client) {
	filters := map[string]byte{
		publish.Root + "+/" + publish.TopicStatus:                                    1,
		publish.Root + "+/" + publish.TopicRuns + "/+/+":                             1,
		publish.Root + "+/" + publish.TopicRuns + "/+/" + publish.TopicBlocks + "/+": 1,
	}
	tok := c.SubscribeMultiple(filters, nil)
	go func() {
		if !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
			l.cfg.Log.Error().Err(tok.Error()).Msg("broker subscription failed")
			return
		}
		l.online.Store(true)
		l.cfg.Log.Info().Str("broker", l.cfg.Broker.URL).Msg("watching the broker")
		l.hub.Publish(liveTopic, hub.NewMessage([]byte(`{"type":"broker","connected":true}`), hub.NoSeq))
	}()
}

func (l *Lab) receive(topic string, payload []byte) {
	for _, msg := range l.view.apply(topic, payload, time.Now()) {
		l.hub.Publish(liveTopic, hub.NewMessage(msg, hub.NoSeq))
	}
}

// Snapshot returns the lab's whole view.
func (l *Lab) Snapshot() Snapshot {
	return Snapshot{Type: "snapshot", Broker: l.online.Load(), Benches: l.view.snapshot()}
}

// BrokerConnected reports whether the lab is subscribed to the broker.
func (l *Lab) BrokerConnected() bool { return l.online.Load() }

// Handler is the lab's HTTP interface: the page (/), its assets
// (/static/), the snapshot (/api/lab) and the websocket (/api/live).
func (l *Lab) Handler() http.Handler {
	mux := http.NewServeMux()
	mux.HandleFunc("GET /{$}", l.serveIndex)
	mux.Handle("GET /static/", http.StripPrefix("/static/", http.FileServerFS(staticFS)))
	mux.HandleFunc("GET /api/lab", func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Content-Type", "application/json")
		w.Header().Set("Cache-Control", "no-store")
		_ = json.NewEncoder(w).Encode(l.Snapshot())
	})
	mux.HandleFunc("GET /api/live", l.serveLive)
	return l.guard.Wrap(mux)
}

func (l *Lab) serveLive(w http.ResponseWriter, r *http.Request) {
	conn, err := l.upgrader.Upgrade(w, r, nil)
	if err != nil {
		return
	}
	replay := func(ctx context.Context, fromSeq int, send func(hub.Message) error) (int, error) {
		data, err := json.Marshal(l.Snapshot())
		if err != nil {
			return fromSeq - 1, err
		}
		return fromSeq - 1, send(hub.NewMessage(data, hub.NoSeq))
	}
	if _, err := l.hub.Attach(conn, liveTopic, replay, nil); err != nil {
		conn.Close()
	}
}

// Serve connects to the broker (retrying in the background until it is
// reachable) and serves HTTP until ctx ends.
func (l *Lab) Serve(ctx context.Context) error {
	l.client.Connect()
	srv := &http.Server{Handler: l.Handler(), ReadHeaderTimeout: 10 * time.Second}
	done := make(chan error, 1)
	go func() { done <- srv.Serve(l.ln) }()
	select {
	case err := <-done:
		l.client.Disconnect(250)
		return err
	case <-ctx.Done():
	}
	sctx, cancel := context.WithTimeout(context.Background(), 3*time.Second)
	defer cancel()
	_ = l.hub.Close(sctx, hub.NewMessage([]byte(`{"type":"closing","message":"the lab overview is shutting down"}`), hub.NoSeq))
	err := srv.Shutdown(sctx)
	l.client.Disconnect(250)
	if e := <-done; e != nil && !errors.Is(e, http.ErrServerClosed) {
		err = errors.Join(err, e)
	}
	return err
}

func (l *Lab) serveIndex(w http.ResponseWriter, r *http.Request) {
	w.Header().Set("Content-Type", "text/html; charset=utf-8")
	w.Header().Set("Cache-Control", "no-store")
	w.Header().Set("Content-Security-Policy", "default-src 'self'; connect-src 'self'; img-src 'self' data:")
	w.Header().Set("X-Content-Type-Options", "nosniff")
	data, _ := staticFS.ReadFile("index.html")
	_, _ = w.Write([]byte(strings.ReplaceAll(string(data), "{{version}}", htmlEscape(l.cfg.Version))))
}

func htmlEscape(s string) string {
	r := strings.NewReplacer("&", "&amp;", "<", "&lt;", ">", "&gt;", `"`, "&quot;", "'", "&#39;")
	return r.Replace(s)
}
