package scpi

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"rolloff/driver"
	"rolloff/driver/transport"
)

// Opts are a Session's timing settings.
type Opts struct {
	// QueryTimeout bounds each exchange (a write, or a write and its
	// response) whose context has no deadline of its own.
	QueryTimeout time.Duration
	// InterCommandDelay is the least time between the end of one exchange
	// and the next write, for instruments that lose commands sent back to
	// back.
	InterCommandDelay time.Duration
	// MaxErrors bounds DrainErrors: an error queue that still has entries
	// after this many reads is reported as an error.
	MaxErrors int
	// Response is how the instrument writes numbers and its identity.
	Response ResponseFormat
	// ErrorQuery reads one entry of the error queue; "" means
	// DefaultErrorQuery unless NoErrorQuery.
	ErrorQuery   string
	NoErrorQuery bool
	// OPCQuery answers 1 once pending operations are complete; ""
	// means DefaultOPCQuery unless NoOPCQuery.
	OPCQuery   string
	NoOPCQuery bool
}

// The IEEE 488.2 and SCPI-1999 common queries a session uses unless told
// otherwise.
const (
	DefaultErrorQuery = "SYST:ERR?" // SCPI-1999 Vol 2 §21.8
	DefaultOPCQuery   = "*OPC?"     // IEEE 488.2 §10.19
)

// ErrNotSupported is wrapped by a call needing a query the instrument
// does not have (Opts.NoErrorQuery, Opts.NoOPCQuery).
var ErrNotSupported = errors.New("scpi: not supported by this instrument")

// errorQuery returns the error query, or "" when there is none.
func (o Opts) errorQuery() string {
	switch {
	case o.NoErrorQuery:
		return ""
	case o.ErrorQuery != "":
		return o.ErrorQuery
	}
	return DefaultErrorQuery
}

// opcQuery returns the operation-complete query, or "" when none.
func (o Opts) opcQuery() string {
	switch {
	case o.NoOPCQuery:
		return ""
	case o.OPCQuery != "":
		return o.OPCQuery
	}
	return DefaultOPCQuery
}

// HasErrorQuery reports whether the instrument has an error queue query.
func (s *Session) HasErrorQuery() bool { return s.opts.errorQuery() != "" }

// HasOPCQuery reports whether the instrument has an operation-complete
// query.
func (s *Session) HasOPCQuery() bool { return s.opts.opcQuery() != "" }

// DefaultOpts are the settings New uses for nil Opts, and for zero fields.
var DefaultOpts = Opts{QueryTimeout: 2 * time.Second, InterCommandDelay: 0, MaxErrors: 64}

// ErrInvalidCommand is wrapped by the error of a Write or Query refused
// before anything was sent.
var ErrInvalidCommand = errors.New("scpi: invalid command")

// Session is a SCPI conversation with one instrument over a Conn. Its
// methods are safe for concurrent use; exchanges are serialised.
type Session struct {
	conn   transport.Conn
	opts   Opts
	mu     sync.Mutex
	last   time.Time // end of the previous exchange
	closed atomic.Bool
}

// New starts a session on conn. opts may be nil for DefaultOpts.
func New(conn transport.Conn, opts *Opts) *Session {
	o := DefaultOpts
	if opts != nil {
		o = *opts
		if o.QueryTimeout <= 0 {
			o.QueryTimeout = DefaultOpts.QueryTimeout
		}
		if o.InterCommandDelay < 0 {
			o.InterCommandDelay = 0
		}
		if o.MaxErrors <= 0 {
			o.MaxErrors = DefaultOpts.MaxErrors
		}
	}
	return &Session{conn: conn, opts: o}
}

// Opts returns the session's settings, defaults filled in.
func (s *Session) Opts() Opts { return s.opts }

// CheckCommand says why cmd cannot be sent as one program message: empty,
// or containing CR, LF (message terminators, IEEE 488.2 §7.5) or another
// byte outside printable 7-bit ASCII and tab. Since transport.Opts only
// accepts control characters as terminators, a command that passes cannot
// hold the connection's terminator. It wraps ErrInvalidCommand.
func CheckCommand(cmd string) error {
	if strings.TrimSpace(cmd) == "" {
		return fmt.Errorf("%w: empty command", ErrInvalidCommand)
	}
	for i := 0; i < len(cmd); i++ {
		c := cmd[i]
		switch {
		case c == '\n' || c == '\r':
			return fmt.Errorf("%w: %q: byte %d is a line terminator", ErrInvalidCommand, quoteable(cmd), i)
		case (c < 0x20 && c != '\t') || c > 0x7e:
			return fmt.Errorf("%w: %q: byte %d (0x%02x) is not printable ASCII", ErrInvalidCommand, quoteable(cmd), i, c)
		}
	}
	return nil
}

// exchange runs one write (and read, if query) under the session lock,
// keeping the inter-command delay and the query time-out.
func (s *Session) exchange(ctx context.Context, cmd string, query bool) (string, error) {
	if err := CheckCommand(cmd); err != nil {
		return "", fmt.Errorf("scpi: %w", err)
	}
	if s.closed.Load() {
		return "", fmt.Errorf("scpi: %s: %w", cmd, driver.ErrClosed)
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	if _, ok := ctx.Deadline(); !ok {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, s.opts.QueryTimeout)
		defer cancel()
	}
	if wait := time.Until(s.last.Add(s.opts.InterCommandDelay)); wait > 0 {
		t := time.NewTimer(wait)
		select {
		case <-ctx.Done():
			t.Stop()
			return "", fmt.Errorf("scpi: %s: %w", cmd, ctx.Err())
		case <-t.C:
		}
	}
	defer func() { s.last = time.Now() }()
	if err := s.conn.Write(ctx, []byte(cmd)); err != nil {
		return "", fmt.Errorf("scpi: %s: %w", cmd, err)
	}
	if !query {
		return "", nil
	}
	resp, err := s.conn.Read(ctx)
	if err != nil {
		return "", fmt.Errorf("scpi: %s: %w", cmd, err)
	}
	return strings.TrimSpace(string(resp)), nil
}

// Write sends a command that has no response.
func (s *Session) Write(ctx context.Context, cmd string) error {
	_, err := s.exchange(ctx, cmd, false)
	return err
}

// Query sends a query and returns its response without surrounding white
// space.
//
// When the answer does not come in time and the instrument has an error
// query, one entry of its error queue is read and, if it holds an error,
// put in the message (e.g. -230 "Data stale"): what the instrument says
// went wrong is worth more than the time-out alone.
func (s *Session) Query(ctx context.Context, cmd string) (string, error) {
	resp, err := s.exchange(ctx, cmd, true)
	if err != nil && errors.Is(err, driver.ErrTimeout) {
		if q := s.opts.errorQuery(); q != "" && q != cmd {
			ectx, cancel := context.WithTimeout(context.Background(), s.opts.QueryTimeout)
			defer cancel()
			if r, qerr := s.exchange(ectx, q, true); qerr == nil {
				if e, perr := ParseErrorEntry(r); perr == nil && e.Code != 0 {
					return "", fmt.Errorf("%w; the instrument's error queue then held: %v", err, e)
				}
			}
		}
	}
	return resp, err
}

// QueryFloat sends a query whose response is one number (see ParseNumber:
// the SCPI overload and not-a-number values are errors).
func (s *Session) QueryFloat(ctx context.Context, cmd string) (float64, error) {
	resp, err := s.Query(ctx, cmd)
	if err != nil {
		return 0, err
	}
	v, err := s.opts.Response.ParseNumber(resp)
	if err != nil {
		return 0, fmt.Errorf("scpi: %s: %w", cmd, err)
	}
	return v, nil
}

// QueryFloats sends a query whose response is a comma-separated list of
// numbers, such as a burst of readings. Any element that is not a finite
// number fails the whole list, naming the element.
func (s *Session) QueryFloats(ctx context.Context, cmd string) ([]float64, error) {
	resp, err := s.Query(ctx, cmd)
	if err != nil {
		return nil, err
	}
	v, err := s.opts.Response.ParseNumbers(resp)
	if err != nil {
		return nil, fmt.Errorf("scpi: %s: %w", cmd, err)
	}
	return v, nil
}

// ParseNumbers parses a comma-separated list of numeric responses (IEEE
// 488.2 §8.4.2: response data elements are separated by commas).
func ParseNumbers(s string) ([]float64, error) {
	if strings.TrimSpace(s) == "" {
		return nil, numberError(s, "empty list", driver.ErrMalformed)
	}
	fields := strings.Split(s, ",")
	out := make([]float64, len(fields))
	for i, f := range fields {
		v, err := ParseNumber(f)
		if err != nil {
			return nil, fmt.Errorf("element %d of %d: %w", i+1, len(fields), err)
		}
		out[i] = v
	}
	return out, nil
}

// Identify queries *IDN? and splits the answer into its four fields (IEEE
// 488.2 §10.14).
func (s *Session) Identify(ctx context.Context) (driver.Identity, error) {
	resp, err := s.Query(ctx, "*IDN?")
	if err != nil {
		return driver.Identity{}, err
	}
	return s.opts.Response.ParseIdentity(resp)
}

// Reset sends *RST (IEEE 488.2 §10.32).
func (s *Session) Reset(ctx context.Context) error { return s.Write(ctx, "*RST") }

// Clear sends *CLS, clearing the status registers and error queue (IEEE
// 488.2 §10.3).
func (s *Session) Clear(ctx context.Context) error { return s.Write(ctx, "*CLS") }

// OperationComplete queries *OPC?, which answers 1 once every pending
// operation has finished (IEEE 488.2 §10.19). Any other answer wraps
// driver.ErrMalformed.
//
// The query is Opts.OPCQuery; without one it wraps ErrNotSupported.
func (s *Session) OperationComplete(ctx context.Context) error {
	q := s.opts.opcQuery()
	if q == "" {
		return fmt.Errorf("scpi: operation-complete query: %w", ErrNotSupported)
	}
	resp, err := s.Query(ctx, q)
	if err != nil {
		return err
	}
	if v, err := ParseNumber(resp); err != nil || v != 1 {
		return fmt.Errorf("scpi: %s: answer %q, want 1: %w", q, quoteable(resp), driver.ErrMalformed)
	}
	return nil
}

// DrainErrors reads SYST:ERR? until the instrument answers error number 0
// ("No error", SCPI-1999 Vol 2 §21.8) and returns the entries read, oldest
// first. A queue that has not emptied after Opts.MaxErrors reads is an
// error wrapping driver.ErrInstrument, returned with the entries read.
//
// The query is Opts.ErrorQuery; without one DrainErrors wraps
// ErrNotSupported.
func (s *Session) DrainErrors(ctx context.Context) ([]Error, error) {
	q := s.opts.errorQuery()
	if q == "" {
		return nil, fmt.Errorf("scpi: error queue: %w", ErrNotSupported)
	}
	var out []Error
	for range s.opts.MaxErrors {
		resp, err := s.exchange(ctx, q, true)
		if err != nil {
			return out, err
		}
		e, err := ParseErrorEntry(resp)
		if err != nil {
			return out, err
		}
		if e.Code == 0 {
			return out, nil
		}
		out = append(out, e)
	}
	return out, fmt.Errorf("scpi: %s: the error queue still had entries after %d reads: %w", q, s.opts.MaxErrors, driver.ErrInstrument)
}

// Close closes the connection. An exchange blocked in another goroutine
// is woken and fails.
func (s *Session) Close() error {
	if s.closed.Swap(true) {
		return fmt.Errorf("scpi: close: %w", driver.ErrClosed)
	}
	return s.conn.Close()
}
