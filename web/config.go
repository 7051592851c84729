package web

import (
	"io/fs"
	"net"

	"github.com/rs/zerolog"

	"rolloff/driver/bench"
	"rolloff/sweep/sched"
	"rolloff/sweep/store"

	"rolloff/web/guard"
	"rolloff/web/hub"
	"rolloff/web/page"
)

// TokenHeader is the request header carrying the access token.
const TokenHeader = guard.TokenHeader

// Config configures a Server.
type Config struct {
	// Addr is the listen address (default DefaultAddr). Any address other
	// than loopback requires a token; one is generated when Token is empty.
	Addr string
	// Token, when set, is required on every API request (header
	// X-Rolloff-Token, or the websocket subprotocol "rolloff-token.T").
	Token string
	// Listener, when set, is used instead of listening on Addr.
	Listener net.Listener
	// MaxBodyBytes limits request bodies (default 1 MiB).
	MaxBodyBytes int64
	Log          zerolog.Logger
	Version      string
	// Hub tunes the websocket hub.
	Hub hub.Options

	// Bench is the open bench the daemon drives. The caller opened it and
	// closes it after Serve returns (Close halts the generator first).
	Bench *bench.Bench
	// Store is the run store.
	Store *store.Store
	// MaxQueued is how many runs may wait for the bench (default
	// queue.DefaultMaxQueued); past it a submission gets 429.
	MaxQueued int
	// Sched adjusts the scheduler's options of every run; may be nil.
	Sched func(*sched.Opts)
}

func readAsset(name string) ([]byte, error) { return fs.ReadFile(page.Static, name) }
