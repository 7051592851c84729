package web

import (
	"context"
	"errors"
	"fmt"
	"net"
	"net/http"
	"net/netip"
	"sync"
	"sync/atomic"
	"time"

	"github.com/gorilla/websocket"
	"github.com/rs/zerolog"

	"rolloff/sweep/event"
	"rolloff/sweep/queue"
	"rolloff/web/guard"
	"rolloff/web/hub"
)

// DefaultAddr is the address the daemon listens on by default.
const DefaultAddr = "127.0.0.1:8470"

// Server timeouts.
const (
	ReadHeaderTimeout = 5 * time.Second
	ReadTimeout       = 30 * time.Second
	WriteTimeout      = 60 * time.Second // not applied to the websocket
	IdleTimeout       = 120 * time.Second
	// ShutdownTimeout bounds the whole shutdown.
	ShutdownTimeout = 4500 * time.Millisecond
)

// Server is the daemon's HTTP server for one bench.
type Server struct {
	cfg   Config
	log   zerolog.Logger
	be    backend
	guard *guard.Guard
	hub   *hub.Hub
	queue *queue.Queue
	ln    net.Listener
	http  *http.Server
	url   string
	once  string

	upgrader websocket.Upgrader

	closeOnce sync.Once
	serving   atomic.Bool
	ctx       context.Context
	cancel    context.CancelFunc
}

// newServer builds a server on be; New (bridge.go) supplies the real one.
func newServer(cfg Config, be backend) (*Server, error) {
	if cfg.Addr == "" {
		cfg.Addr = DefaultAddr
	}
	host, _, err := net.SplitHostPort(cfg.Addr)
	if err != nil {
		return nil, fmt.Errorf("web: --addr %q: want host:port, e.g. %s: %w", cfg.Addr, DefaultAddr, err)
	}
	if cfg.Token != "" && !guard.ValidToken(cfg.Token) {
		return nil, fmt.Errorf("web: --token: want 16..256 characters of A-Z a-z 0-9 . _ ~ -")
	}
	if !guard.IsLoopback(host) && cfg.Token == "" {
		cfg.Token = guard.NewToken()
	}
	ln := cfg.Listener
	if ln == nil {
		ln, err = net.Listen("tcp", cfg.Addr)
		if err != nil {
			return nil, fmt.Errorf("web: listen on %s: %w", cfg.Addr, err)
		}
	}
	addr := ln.Addr().String()
	g, err := guard.New(guard.Config{Addr: addr, Token: cfg.Token, MaxBodyBytes: cfg.MaxBodyBytes})
	if err != nil {
		ln.Close()
		return nil, fmt.Errorf("web: %w", err)
	}
	s := &Server{cfg: cfg, log: cfg.Log, be: be, guard: g, ln: ln}
	s.ctx, s.cancel = context.WithCancel(context.Background())
	s.url = "http://" + addr + "/"
	if h, port, err := net.SplitHostPort(addr); err == nil {
		if a, err := netip.ParseAddr(h); err == nil && a.IsUnspecified() {
			// Listening on every interface: the address to open here.
			s.url = "http://" + net.JoinHostPort("127.0.0.1", port) + "/"
		}
	}
	if g.TokenRequired() {
		s.once = g.NewOnce()
	}
	hopts := cfg.Hub
	hopts.Log = cfg.Log
	s.hub = hub.New(hopts)
	s.upgrader = websocket.Upgrader{
		HandshakeTimeout: 10 * time.Second,
		ReadBufferSize:   1024,
		WriteBufferSize:  8192,
		Subprotocols:     []string{guard.LiveProtocol},
		CheckOrigin: func(r *http.Request) bool {
			return s.guard.OriginAllowed(r.Header.Get("Origin"), r.Host)
		},
		Error: func(w http.ResponseWriter, r *http.Request, status int, reason error) {
			guard.WriteError(w, status, "", reason.Error())
		},
	}
	q, err := queue.New(s.ctx, queue.Options{Backend: be, OnEvent: s.publish, Log: cfg.Log, MaxQueued: cfg.MaxQueued})
	if err != nil {
		ln.Close()
		return nil, fmt.Errorf("web: %w", err)
	}
	s.queue = q
	s.http = &http.Server{
		Handler:           s.Handler(),
		ReadHeaderTimeout: ReadHeaderTimeout,
		ReadTimeout:       ReadTimeout,
		WriteTimeout:      WriteTimeout,
		IdleTimeout:       IdleTimeout,
		MaxHeaderBytes:    64 << 10,
		ErrorLog:          nil,
	}
	return s, nil
}

// URL returns the page's address, http://HOST:PORT/.
func (s *Server) URL() string { return s.url }

// OnceURL returns a one-time address that hands the page the token, or ""
// when no token is required.
func (s *Server) OnceURL() string {
	if s.once == "" {
		return ""
	}
	return s.url + "?once=" + s.once
}

// Token returns the access token, "" when none is required.
func (s *Server) Token() string { return s.guard.Token() }

// Queue returns the server's run queue.
func (s *Server) Queue() *queue.Queue { return s.queue }

// Hub returns the server's websocket hub.
func (s *Server) Hub() *hub.Hub { return s.hub }

// Handler returns the whole HTTP handler: access log, guard, routes.
func (s *Server) Handler() http.Handler {
	return accessLog(s.log, s.guard.Wrap(http.HandlerFunc(s.route)))
}

// Serve serves until ctx is cancelled, then shuts down: generator off,
// the live run stopped and its files synced, websocket clients told and
// closed, connections drained, all within ShutdownTimeout.
func (s *Server) Serve(ctx context.Context) error {
	errc := make(chan error, 1)
	s.serving.Store(true)
	go func() { errc <- s.http.Serve(s.ln) }()
	var serveErr error
	select {
	case <-ctx.Done():
	case serveErr = <-errc:
		if errors.Is(serveErr, http.ErrServerClosed) {
			serveErr = nil
		}
	}
	err := s.shutdown()
	if serveErr != nil {
		return fmt.Errorf("web: serve: %w", serveErr)
	}
	return err
}

// Close shuts the server down as Serve does on cancellation.
func (s *Server) Close() error { return s.shutdown() }

func (s *Server) shutdown() error {
	var errs []error
	s.closeOnce.Do(func() {
		start := time.Now()
		ctx, cancel := context.WithTimeout(context.Background(), ShutdownTimeout)
		defer cancel()
		if err := s.be.Halt(); err != nil {
			errs = append(errs, fmt.Errorf("generator off: %w", err))
		}
		qctx, qcancel := context.WithTimeout(ctx, ShutdownTimeout*2/3)
		if err := s.queue.Close(qctx); err != nil {
			errs = append(errs, fmt.Errorf("stopping the run: %w", err))
		}
		qcancel()
		if c, ok := s.be.(interface{ closeQueue() }); ok {
			c.closeQueue()
		}
		s.cancel()
		final := hub.NewMessage([]byte(`{"type":"closing","message":"the daemon is shutting down; the run can be resumed when it is back"}`), hub.NoSeq)
		hctx, hcancel := context.WithTimeout(ctx, time.Second)
		if err := s.hub.Close(hctx, final); err != nil {
			errs = append(errs, fmt.Errorf("closing live clients: %w", err))
		}
		hcancel()
		if !s.serving.Load() {
			_ = s.ln.Close() // Shutdown closes only the listeners it serves
		}
		if err := s.http.Shutdown(ctx); err != nil {
			s.http.Close()
			if !errors.Is(err, context.DeadlineExceeded) {
				errs = append(errs, fmt.Errorf("http shutdown: %w", err))
			}
		}
		s.log.Info().Dur("took", time.Since(start)).Msg("web server stopped")
	})
	return errors.Join(errs...)
}

// publish forwards a run's event to its live clients.
func (s *Server) publish(id string, ev event.Event) {
	if s.hub.Clients(id) == 0 {
		return
	}
	data, err := encodeEvent(ev)
	if err != nil {
		s.log.Error().Err(err).Str("run", id).Msg("cannot encode an event")
		return
	}
	seq := hub.NoSeq
	if ev.Type == event.TypePoint && ev.Point != nil {
		seq = ev.Point.Seq
	}
	s.hub.Publish(id, hub.NewMessage(data, seq))
}

// isLoopbackRemote reports whether a request came over loopback.
func isLoopbackRemote(r *http.Request) bool {
	host, _, err := net.SplitHostPort(r.RemoteAddr)
	if err != nil {
		return false
	}
	return guard.IsLoopback(host)
}
