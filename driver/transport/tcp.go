package transport

import (
	"context"
	"errors"
	"fmt"
	"net"
	"strconv"
	"sync"
	"time"

	"rolloff/driver"
)

// tcpConn is a LAN raw socket (tcp://host:port). After a drop it is
// broken: a Read says so and the next Write dials again before sending.
type tcpConn struct {
	name     string // canonical address, for messages
	hostport string
	opts     Opts

	mu    sync.Mutex // serialises Write and Read; guards buf, tmp, stale
	buf   []byte     // bytes received and not yet returned
	tmp   []byte
	stale bool // a Read gave up: what it was waiting for is discarded before the next Write

	state      sync.Mutex // guards nc, closed, reconnects
	nc         net.Conn   // nil while broken
	closed     bool
	reconnects int
}

var _ Conn = (*tcpConn)(nil)
var _ ReconnectCounter = (*tcpConn)(nil)

// aLongTimeAgo is a deadline in the past, which wakes a blocked I/O call.
var aLongTimeAgo = time.Unix(1, 0)

func dialTCP(ctx context.Context, a Address, opts Opts) (*tcpConn, error) {
	c := &tcpConn{
		name:     a.String(),
		hostport: net.JoinHostPort(a.Host, strconv.Itoa(a.Port)),
		opts:     opts,
		tmp:      make([]byte, 4096),
	}
	dctx, cancel := context.WithDeadline(ctx, opts.deadline(ctx))
	defer cancel()
	nc, err := c.dial(dctx)
	if err != nil {
		return nil, c.dialError("dial", dctx, err)
	}
	c.nc = nc
	return c, nil
}

func (c *tcpConn) dial(ctx context.Context) (net.Conn, error) {
	var d net.Dialer
	return d.DialContext(ctx, "tcp", c.hostport)
}

func (c *tcpConn) dialError(op string, ctx context.Context, err error) error {
	if ctx.Err() != nil {
		return fmt.Errorf("transport: %s: %s: %w (%w)", c.name, op, ctxFailure(ctx), err)
	}
	if isTimeout(err) {
		return fmt.Errorf("transport: %s: %s: %w: %w", c.name, op, driver.ErrTimeout, err)
	}
	return fmt.Errorf("transport: %s: %s: %w", c.name, op, err)
}

// String returns the connection's address.
func (c *tcpConn) String() string { return c.name }

// Reconnects returns how many times the connection was re-established
// after a drop.
func (c *tcpConn) Reconnects() int {
	c.state.Lock()
	defer c.state.Unlock()
	return c.reconnects
}

// current returns the live socket, or nil while broken.
func (c *tcpConn) current() (net.Conn, error) {
	c.state.Lock()
	defer c.state.Unlock()
	if c.closed {
		return nil, fmt.Errorf("transport: %s: %w", c.name, driver.ErrClosed)
	}
	return c.nc, nil
}

func (c *tcpConn) isClosed() bool {
	c.state.Lock()
	defer c.state.Unlock()
	return c.closed
}

// markBroken closes nc if it is still the live socket.
func (c *tcpConn) markBroken(nc net.Conn) {
	c.state.Lock()
	defer c.state.Unlock()
	if c.nc == nc && nc != nil {
		nc.Close()
		c.nc = nil
	}
}

// Write sends msg and the write terminator. On a broken connection it first
// dials again with bounded exponential backoff (within ctx). A Write that
// fails may or may not have reached the instrument; it is never repeated.
func (c *tcpConn) Write(ctx context.Context, msg []byte) error {
	c.mu.Lock()
	defer c.mu.Unlock()
	nc, err := c.current()
	if err != nil {
		return err
	}
	if ctx.Err() != nil {
		return fmt.Errorf("transport: %s: write: %w", c.name, ctxFailure(ctx))
	}
	deadline := c.opts.deadline(ctx)
	wctx, cancel := context.WithDeadline(ctx, deadline)
	defer cancel()

	if nc != nil {
		// Notice a drop that happened while idle, and collect (or, after
		// a Read gave up, discard) bytes that arrived unasked.
		nc = c.poll(nc)
	}
	if c.stale {
		c.buf = c.buf[:0]
		c.stale = false
	}
	if c.isClosed() {
		return fmt.Errorf("transport: %s: write: %w", c.name, driver.ErrClosed)
	}
	if nc == nil {
		if nc, err = c.reconnect(wctx); err != nil {
			return err
		}
	}
	data := make([]byte, 0, len(msg)+len(c.opts.WriteTerm))
	data = append(append(data, msg...), c.opts.WriteTerm...)
	if err := nc.SetWriteDeadline(deadline); err != nil {
		c.markBroken(nc)
		return fmt.Errorf("transport: %s: write: %w: %w", c.name, driver.ErrDisconnected, err)
	}
	_, err = withWake(wctx, nc.SetWriteDeadline, func() (int, error) { return nc.Write(data) })
	if err == nil {
		return nil
	}
	// A partial write leaves the instrument's parser mid-message: start
	// afresh on the next Write.
	c.markBroken(nc)
	switch {
	case c.isClosed():
		return fmt.Errorf("transport: %s: write: %w", c.name, driver.ErrClosed)
	case wctx.Err() != nil:
		return fmt.Errorf("transport: %s: write: %w", c.name, ctxFailure(wctx))
	case isTimeout(err):
		return fmt.Errorf("transport: %s: write: %w: %w", c.name, driver.ErrTimeout, err)
	}
	return fmt.Errorf("transport: %s: write: %w: %w", c.name, driver.ErrDisconnected, err)
}

// reconnect dials again after a drop. The caller holds c.mu.
func (c *tcpConn) reconnect(ctx context.Context) (net.Conn, error) {
	var nc net.Conn
	tries, err := reconnectPolicy.retry(ctx, func() error {
		var err error
		nc, err = c.dial(ctx)
		return err
	})
	if err != nil {
		return nil, relinkFailed(ctx, c.name, "reconnect", tries, err)
	}
	c.state.Lock()
	defer c.state.Unlock()
	if c.closed {
		nc.Close()
		return nil, fmt.Errorf("transport: %s: write: %w", c.name, driver.ErrClosed)
	}
	c.nc = nc
	c.reconnects++
	c.buf = c.buf[:0]
	c.stale = false
	return nc, nil
}

// poll reads whatever has already arrived on nc without waiting. It
// returns nil (and marks the connection broken) when the peer has gone.
func (c *tcpConn) poll(nc net.Conn) net.Conn {
	if err := nc.SetReadDeadline(time.Time{}); err != nil {
		c.markBroken(nc)
		return nil
	}
	for {
		n, err := readNow(nc, c.tmp)
		if n > 0 && !c.stale {
			c.buf = append(c.buf, c.tmp[:n]...)
		}
		switch {
		case errors.Is(err, errWouldBlock), errors.Is(err, errNoPoll):
			return nc
		case err != nil:
			c.markBroken(nc)
			return nil
		}
	}
}

// Read returns the next response without its read terminator. It waits
// until ctx ends or, without a deadline, for the connection's Timeout.
func (c *tcpConn) Read(ctx context.Context) ([]byte, error) {
	c.mu.Lock()
	defer c.mu.Unlock()
	nc, err := c.current()
	if err != nil {
		return nil, err
	}
	if msg, ok := takeMessage(&c.buf, c.opts.ReadTerm); ok {
		return msg, nil
	}
	if nc == nil {
		return nil, fmt.Errorf("transport: %s: read: %w: the connection dropped; the next write reconnects", c.name, driver.ErrDisconnected)
	}
	if ctx.Err() != nil {
		return nil, fmt.Errorf("transport: %s: read: %w", c.name, ctxFailure(ctx))
	}
	start := time.Now()
	if err := nc.SetReadDeadline(c.opts.deadline(ctx)); err != nil {
		c.markBroken(nc)
		return nil, fmt.Errorf("transport: %s: read: %w: %w", c.name, driver.ErrDisconnected, err)
	}
	for {
		n, err := withWake(ctx, nc.SetReadDeadline, func() (int, error) { return nc.Read(c.tmp) })
		c.buf = append(c.buf, c.tmp[:n]...)
		if msg, ok := takeMessage(&c.buf, c.opts.ReadTerm); ok {
			if err != nil && !isTimeout(err) {
				c.markBroken(nc)
			}
			return msg, nil
		}
		if len(c.buf) > c.opts.MaxRead {
			c.stale = true
			return nil, fmt.Errorf("transport: %s: read: %w: more than %d bytes without the read terminator %q", c.name, driver.ErrMalformed, c.opts.MaxRead, c.opts.ReadTerm)
		}
		if err == nil {
			continue
		}
		switch {
		case c.isClosed():
			return nil, fmt.Errorf("transport: %s: read: %w", c.name, driver.ErrClosed)
		case ctx.Err() != nil:
			c.stale = true
			return nil, fmt.Errorf("transport: %s: read: %w", c.name, ctxFailure(ctx))
		case isTimeout(err):
			c.stale = true
			return nil, fmt.Errorf("transport: %s: read: %w", c.name, timedOut(ctx, start))
		}
		c.markBroken(nc)
		return nil, fmt.Errorf("transport: %s: read: %w: %w", c.name, driver.ErrDisconnected, err)
	}
}

// Close closes the connection. It wakes a Read or Write blocked in another
// goroutine, which then returns driver.ErrClosed.
func (c *tcpConn) Close() error {
	c.state.Lock()
	defer c.state.Unlock()
	if c.closed {
		return fmt.Errorf("transport: %s: close: %w", c.name, driver.ErrClosed)
	}
	c.closed = true
	if c.nc == nil {
		return nil
	}
	err := c.nc.Close()
	c.nc = nil
	if err != nil {
		return fmt.Errorf("transport: %s: close: %w", c.name, err)
	}
	return nil
}

// withWake runs io with ctx's cancellation turned into an immediate
// deadline through set, so that a cancel wakes a blocked call.
func withWake(ctx context.Context, set func(time.Time) error, io func() (int, error)) (int, error) {
	done := make(chan struct{})
	stop := context.AfterFunc(ctx, func() {
		set(aLongTimeAgo)
		close(done)
	})
	n, err := io()
	if !stop() {
		<-done
	}
	return n, err
}
