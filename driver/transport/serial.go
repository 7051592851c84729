package transport

import (
	"context"
	"fmt"
	"sync"
	"time"

	"go.bug.st/serial"

	"rolloff/driver"
)

// serialPoll is the longest a serial read waits before looking at its
// context again. go.bug.st/serial has no context: a read that times out
// returns 0, nil, and Close from another goroutine wakes a blocked read.
var serialPoll = 50 * time.Millisecond

// serialConn is a serial port (serial:///dev/ttyX?...). After the device
// vanishes it is broken: a Read says so and the next Write opens the device
// again with bounded backoff before sending.
type serialConn struct {
	name string // canonical address, for messages
	path string
	mode serial.Mode
	opts Opts

	mu    sync.Mutex // serialises Write and Read; guards buf, tmp, stale
	buf   []byte
	tmp   []byte
	stale bool

	state      sync.Mutex // guards port, closed, reconnects
	port       serial.Port
	closed     bool
	reconnects int
}

var _ Conn = (*serialConn)(nil)
var _ ReconnectCounter = (*serialConn)(nil)

func serialMode(p SerialParams) serial.Mode {
	m := serial.Mode{BaudRate: p.Baud, DataBits: p.DataBits, StopBits: serial.OneStopBit}
	if p.StopBits == 2 {
		m.StopBits = serial.TwoStopBits
	}
	switch p.Parity {
	case "odd":
		m.Parity = serial.OddParity
	case "even":
		m.Parity = serial.EvenParity
	case "mark":
		m.Parity = serial.MarkParity
	case "space":
		m.Parity = serial.SpaceParity
	default:
		m.Parity = serial.NoParity
	}
	return m
}

func openSerial(_ context.Context, a Address, opts Opts) (*serialConn, error) {
	c := &serialConn{name: a.String(), path: a.Path, mode: serialMode(a.Serial), opts: opts, tmp: make([]byte, 4096)}
	p, err := c.openPort()
	if err != nil {
		return nil, fmt.Errorf("transport: %s: open: %w", c.name, err)
	}
	c.port = p
	return c, nil
}

// openPort opens the device and discards whatever it had buffered.
func (c *serialConn) openPort() (serial.Port, error) {
	mode := c.mode
	p, err := serial.Open(c.path, &mode)
	if err != nil {
		return nil, err
	}
	if err := p.SetReadTimeout(serialPoll); err != nil {
		p.Close()
		return nil, err
	}
	if err := p.ResetInputBuffer(); err != nil {
		p.Close()
		return nil, err
	}
	return p, nil
}

// String returns the connection's address.
func (c *serialConn) String() string { return c.name }

// Reconnects returns how many times the device was opened again after it
// vanished.
func (c *serialConn) Reconnects() int {
	c.state.Lock()
	defer c.state.Unlock()
	return c.reconnects
}

func (c *serialConn) current() (serial.Port, error) {
	c.state.Lock()
	defer c.state.Unlock()
	if c.closed {
		return nil, fmt.Errorf("transport: %s: %w", c.name, driver.ErrClosed)
	}
	return c.port, nil
}

func (c *serialConn) isClosed() bool {
	c.state.Lock()
	defer c.state.Unlock()
	return c.closed
}

func (c *serialConn) markBroken(p serial.Port) {
	c.state.Lock()
	defer c.state.Unlock()
	if c.port == p && p != nil {
		p.Close()
		c.port = nil
	}
}

// Write sends msg and the write terminator. On a broken connection it first
// opens the device again. go.bug.st/serial cannot interrupt a write, so ctx
// is looked at before the write starts; without flow control a write
// finishes at line speed.
func (c *serialConn) Write(ctx context.Context, msg []byte) error {
	c.mu.Lock()
	defer c.mu.Unlock()
	p, err := c.current()
	if err != nil {
		return err
	}
	if ctx.Err() != nil {
		return fmt.Errorf("transport: %s: write: %w", c.name, ctxFailure(ctx))
	}
	if c.stale {
		if p != nil {
			if err := p.ResetInputBuffer(); err != nil {
				c.markBroken(p)
				p = nil
			}
		}
		c.buf = c.buf[:0]
		c.stale = false
	}
	if p == nil {
		wctx, cancel := context.WithDeadline(ctx, c.opts.deadline(ctx))
		defer cancel()
		if p, err = c.reopen(wctx); err != nil {
			return err
		}
	}
	data := make([]byte, 0, len(msg)+len(c.opts.WriteTerm))
	data = append(append(data, msg...), c.opts.WriteTerm...)
	for len(data) > 0 {
		n, err := p.Write(data)
		if err != nil {
			c.markBroken(p)
			if c.isClosed() {
				return fmt.Errorf("transport: %s: write: %w", c.name, driver.ErrClosed)
			}
			return fmt.Errorf("transport: %s: write: %w: %w", c.name, driver.ErrDisconnected, err)
		}
		data = data[n:]
	}
	return nil
}

func (c *serialConn) reopen(ctx context.Context) (serial.Port, error) {
	var p serial.Port
	tries, err := reconnectPolicy.retry(ctx, func() error {
		var err error
		p, err = c.openPort()
		return err
	})
	if err != nil {
		return nil, relinkFailed(ctx, c.name, "reopen", tries, err)
	}
	c.state.Lock()
	defer c.state.Unlock()
	if c.closed {
		p.Close()
		return nil, fmt.Errorf("transport: %s: write: %w", c.name, driver.ErrClosed)
	}
	c.port = p
	c.reconnects++
	c.buf = c.buf[:0]
	c.stale = false
	return p, nil
}

// Read returns the next response without its read terminator. It reads in
// short slices so that a cancelled ctx ends it within serialPoll.
func (c *serialConn) Read(ctx context.Context) ([]byte, error) {
	c.mu.Lock()
	defer c.mu.Unlock()
	p, err := c.current()
	if err != nil {
		return nil, err
	}
	start := time.Now()
	deadline := c.opts.deadline(ctx)
	for {
		if msg, ok := takeMessage(&c.buf, c.opts.ReadTerm); ok {
			return msg, nil
		}
		if p == nil {
			return nil, fmt.Errorf("transport: %s: read: %w: the device went away; the next write opens it again", c.name, driver.ErrDisconnected)
		}
		if len(c.buf) > c.opts.MaxRead {
			c.stale = true
			return nil, fmt.Errorf("transport: %s: read: %w: more than %d bytes without the read terminator %q", c.name, driver.ErrMalformed, c.opts.MaxRead, c.opts.ReadTerm)
		}
		if ctx.Err() != nil {
			c.stale = true
			return nil, fmt.Errorf("transport: %s: read: %w", c.name, ctxFailure(ctx))
		}
		wait := time.Until(deadline)
		if wait <= 0 {
			c.stale = true
			return nil, fmt.Errorf("transport: %s: read: %w", c.name, timedOut(ctx, start))
		}
		if err := p.SetReadTimeout(min(wait, serialPoll)); err != nil {
			return nil, fmt.Errorf("transport: %s: read: %w", c.name, err)
		}
		n, err := p.Read(c.tmp)
		c.buf = append(c.buf, c.tmp[:n]...)
		if err != nil {
			if c.isClosed() {
				return nil, fmt.Errorf("transport: %s: read: %w", c.name, driver.ErrClosed)
			}
			c.markBroken(p)
			if msg, ok := takeMessage(&c.buf, c.opts.ReadTerm); ok {
				return msg, nil
			}
			return nil, fmt.Errorf("transport: %s: read: %w: %w", c.name, driver.ErrDisconnected, err)
		}
	}
}

// Close closes the port, waking a Read blocked in another goroutine, which
// then returns driver.ErrClosed.
func (c *serialConn) Close() error {
	c.state.Lock()
	defer c.state.Unlock()
	if c.closed {
		return fmt.Errorf("transport: %s: close: %w", c.name, driver.ErrClosed)
	}
	c.closed = true
	if c.port == nil {
		return nil
	}
	err := c.port.Close()
	c.port = nil
	if err != nil {
		return fmt.Errorf("transport: %s: close: %w", c.name, err)
	}
	return nil
}
