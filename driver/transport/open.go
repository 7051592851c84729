package transport

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"os"
	"syscall"
	"time"

	"rolloff/driver"
)

// Open parses address, applies the defaults to opts and connects to the
// instrument with the transport the address names. ctx bounds the
// connection set-up only (dial or device open); when it has no deadline,
// opts.Timeout applies. On error the returned Conn is a nil interface.
func Open(ctx context.Context, address string, opts Opts) (Conn, error) {
	a, err := ParseAddress(address)
	if err != nil {
		return nil, err
	}
	return OpenAddress(ctx, a, opts)
}

// OpenAddress is Open for an address already parsed.
func OpenAddress(ctx context.Context, a Address, opts Opts) (Conn, error) {
	if err := opts.Validate(); err != nil {
		return nil, err
	}
	opts = opts.WithDefaults()
	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("transport: %s: open: %w", a, ctxFailure(ctx))
	}
	switch a.Scheme {
	case SchemeTCP:
		c, err := dialTCP(ctx, a, opts)
		if err != nil {
			return nil, err
		}
		return c, nil
	case SchemeSerial:
		c, err := openSerial(ctx, a, opts)
		if err != nil {
			return nil, err
		}
		return c, nil
	case SchemeUSBTMC:
		c, err := openUSBTMC(ctx, a, opts)
		if err != nil {
			return nil, err
		}
		return c, nil
	}
	return nil, &AddressError{Address: a.String(), Part: "scheme", Value: a.Scheme, Allowed: "tcp, serial, usbtmc"}
}

// ReconnectCounter is an optional capability of a Conn: how many times it
// has re-established its link after a drop, for logging.
type ReconnectCounter interface {
	Reconnects() int
}

// ctxFailure is the error for an operation that ctx ended: a deadline wraps
// driver.ErrTimeout as well as context.DeadlineExceeded.
func ctxFailure(ctx context.Context) error {
	err := ctx.Err()
	if errors.Is(err, context.DeadlineExceeded) {
		return fmt.Errorf("%w: %w", driver.ErrTimeout, err)
	}
	if cause := context.Cause(ctx); cause != nil && cause != err {
		return fmt.Errorf("%w: %w", err, cause)
	}
	return err
}

// timedOut is the error for an operation that reached its deadline: the
// context's (then wrapping context.DeadlineExceeded as well, even if the
// I/O deadline fired a moment before the context noticed) or Opts.Timeout.
func timedOut(ctx context.Context, start time.Time) error {
	if _, ok := ctx.Deadline(); ok {
		return fmt.Errorf("%w: %w", driver.ErrTimeout, context.DeadlineExceeded)
	}
	return fmt.Errorf("%w: no response within %v", driver.ErrTimeout, time.Since(start).Round(time.Millisecond))
}

// isDrop reports whether err means the link went away (peer closed, reset,
// broken pipe, device removed) rather than a time-out.
func isDrop(err error) bool {
	if err == nil {
		return false
	}
	if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) || errors.Is(err, net.ErrClosed) || errors.Is(err, os.ErrClosed) {
		return true
	}
	for _, e := range []error{syscall.ECONNRESET, syscall.ECONNABORTED, syscall.EPIPE, syscall.ENOTCONN,
		syscall.ENETRESET, syscall.ENETUNREACH, syscall.EHOSTUNREACH, syscall.EIO, syscall.ENODEV, syscall.ENXIO,
		syscall.ESHUTDOWN, syscall.ENOENT} {
		if errors.Is(err, e) {
			return true
		}
	}
	return false
}

// isTimeout reports whether err is an I/O deadline expiring.
func isTimeout(err error) bool {
	if errors.Is(err, os.ErrDeadlineExceeded) || errors.Is(err, syscall.ETIMEDOUT) {
		return true
	}
	var ne net.Error
	return errors.As(err, &ne) && ne.Timeout()
}

// backoff is the re-connection policy after a drop: attempts tries, the
// first at once, then waiting initial, doubling up to max between tries.
type backoff struct {
	attempts     int
	initial, max time.Duration
}

// reconnectPolicy bounds how long a Write spends re-establishing a link;
// the Write's context bounds it further.
var reconnectPolicy = backoff{attempts: 6, initial: 50 * time.Millisecond, max: time.Second}

// retry calls try until it succeeds, the policy's attempts are spent or ctx
// ends, waiting between tries. It returns the number of tries made and the
// last error.
func (b backoff) retry(ctx context.Context, try func() error) (int, error) {
	delay := b.initial
	var err error
	for n := 1; ; n++ {
		if err = try(); err == nil {
			return n, nil
		}
		if n >= b.attempts || ctx.Err() != nil {
			return n, err
		}
		t := time.NewTimer(delay)
		select {
		case <-ctx.Done():
			t.Stop()
			return n, err
		case <-t.C:
		}
		delay = min(2*delay, b.max)
	}
}

// relinkFailed is the error of a Write whose link could not be
// re-established: what (e.g. "reconnect", "reopen") gave up after tries,
// naming the context's end when that is why.
func relinkFailed(ctx context.Context, name, what string, tries int, err error) error {
	if ctx.Err() != nil {
		return fmt.Errorf("transport: %s: write: %w: %s gave up after %d tries: %w (%w)", name, driver.ErrDisconnected, what, tries, ctxFailure(ctx), err)
	}
	return fmt.Errorf("transport: %s: write: %w: %s gave up after %d tries: %w", name, driver.ErrDisconnected, what, tries, err)
}

// takeMessage removes the first message ending in term from *buf and
// returns it without the terminator.
func takeMessage(buf *[]byte, term string) ([]byte, bool) {
	b := *buf
	i := bytes.Index(b, []byte(term))
	if i < 0 {
		return nil, false
	}
	msg := append([]byte(nil), b[:i]...)
	n := copy(b, b[i+len(term):])
	*buf = b[:n]
	return msg, true
}
