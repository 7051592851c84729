//go:build linux

package transport

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"os"
	"runtime"
	"sync"
	"syscall"
	"time"
	"unsafe"

	"rolloff/driver"
)

// usbtmcSetTimeout is USBTMC_IOCTL_SET_TIMEOUT from linux/usb/tmc.h:
// _IOW('[', 10, __u32), the driver's transfer time-out in milliseconds.
// The direction bits of _IOW differ between architectures.
var usbtmcSetTimeout = func() uintptr {
	const nr = 91<<8 | 10 // USBTMC_IOC_NR '[' and command 10
	switch runtime.GOARCH {
	case "mips", "mipsle", "mips64", "mips64le", "ppc64", "ppc64le":
		return 4<<29 | 4<<16 | nr
	}
	return 1<<30 | 4<<16 | nr // 0x40045B0A
}()

// usbtmcMinTimeout is the smallest transfer time-out the Linux usbtmc
// driver accepts (from memory: it refuses values below 100 ms).
const usbtmcMinTimeout = 100 * time.Millisecond

// usbtmcConn is the Linux USBTMC character device (usbtmc:///dev/usbtmcN):
// a write sends one message, a read returns one. The kernel read cannot be
// interrupted, so a context ends a Read by abandoning it to a goroutine;
// the kernel's own transfer time-out (set from the Read's deadline) bounds
// it, and its late result is discarded before the next Write.
type usbtmcConn struct {
	name string
	path string
	opts Opts

	mu      sync.Mutex // serialises Write and Read; guards pending, buf
	pending chan readResult
	buf     []byte // owned by the read goroutine while pending is set

	state      sync.Mutex // guards r, w, closed, reconnects
	r, w       *os.File   // the device, opened once for both; nil while broken
	closed     bool
	closing    chan struct{}
	reconnects int
	open       func(path string) (r, w *os.File, err error)
}

var _ Conn = (*usbtmcConn)(nil)
var _ ReconnectCounter = (*usbtmcConn)(nil)

type readResult struct {
	n   int
	err error
}

// openDevice opens a character device for reading and writing.
func openDevice(path string) (r, w *os.File, err error) {
	f, err := os.OpenFile(path, os.O_RDWR, 0)
	if err != nil {
		return nil, nil, err
	}
	return f, f, nil
}

func openUSBTMC(_ context.Context, a Address, opts Opts) (*usbtmcConn, error) {
	return newUSBTMC(a.String(), a.Path, opts, openDevice)
}

// newUSBTMC opens a USBTMC connection whose files come from open, which is
// also used to reopen the device after it vanished.
func newUSBTMC(name, path string, opts Opts, open func(string) (r, w *os.File, err error)) (*usbtmcConn, error) {
	r, w, err := open(path)
	if err != nil {
		return nil, fmt.Errorf("transport: %s: open: %w", name, err)
	}
	return &usbtmcConn{
		name: name, path: path, opts: opts, open: open,
		r: r, w: w, closing: make(chan struct{}),
		buf: make([]byte, opts.MaxRead+len(opts.ReadTerm)+1),
	}, nil
}

// String returns the connection's address.
func (c *usbtmcConn) String() string { return c.name }

// Reconnects returns how many times the device was opened again after it
// vanished.
func (c *usbtmcConn) Reconnects() int {
	c.state.Lock()
	defer c.state.Unlock()
	return c.reconnects
}

func (c *usbtmcConn) files() (r, w *os.File, err error) {
	c.state.Lock()
	defer c.state.Unlock()
	if c.closed {
		return nil, nil, fmt.Errorf("transport: %s: %w", c.name, driver.ErrClosed)
	}
	return c.r, c.w, nil
}

func (c *usbtmcConn) isClosed() bool {
	c.state.Lock()
	defer c.state.Unlock()
	return c.closed
}

func (c *usbtmcConn) markBroken(r *os.File) {
	c.state.Lock()
	defer c.state.Unlock()
	if c.r == r && r != nil {
		closeFiles(c.r, c.w)
		c.r, c.w = nil, nil
	}
}

func closeFiles(r, w *os.File) error {
	err := r.Close()
	if w != r {
		if werr := w.Close(); err == nil {
			err = werr
		}
	}
	return err
}

// setKernelTimeout sets the usbtmc driver's transfer time-out, where the
// file is a usbtmc device (anything else refuses the ioctl, which is fine).
func setKernelTimeout(f *os.File, d time.Duration) {
	sc, err := f.SyscallConn()
	if err != nil {
		return
	}
	ms := uint32(max(d, usbtmcMinTimeout).Milliseconds())
	sc.Control(func(fd uintptr) {
		syscall.Syscall(syscall.SYS_IOCTL, fd, usbtmcSetTimeout, uintptr(unsafe.Pointer(&ms)))
	})
}

// settle waits for an abandoned read to end and discards its result, so
// that it cannot swallow the response to the next command.
func (c *usbtmcConn) settle(ctx context.Context, r *os.File) error {
	if c.pending == nil {
		return nil
	}
	// A pollable file (not a usbtmc device, whose read sits in the kernel
	// until its transfer time-out) is woken at once.
	r.SetReadDeadline(aLongTimeAgo)
	defer r.SetReadDeadline(time.Time{})
	select {
	case res := <-c.pending:
		c.pending = nil
		if res.err != nil && isDrop(res.err) && !errors.Is(res.err, os.ErrDeadlineExceeded) {
			c.markBroken(r)
		}
		return nil
	case <-ctx.Done():
		return fmt.Errorf("transport: %s: write: %w: an abandoned read is still in progress", c.name, ctxFailure(ctx))
	case <-c.closing:
		return fmt.Errorf("transport: %s: write: %w", c.name, driver.ErrClosed)
	}
}

// Write sends msg and the write terminator as one message. On a broken
// connection it first opens the device again with bounded backoff.
func (c *usbtmcConn) Write(ctx context.Context, msg []byte) error {
	c.mu.Lock()
	defer c.mu.Unlock()
	r, w, err := c.files()
	if err != nil {
		return err
	}
	if ctx.Err() != nil {
		return fmt.Errorf("transport: %s: write: %w", c.name, ctxFailure(ctx))
	}
	wctx, cancel := context.WithDeadline(ctx, c.opts.deadline(ctx))
	defer cancel()
	if r != nil {
		if err := c.settle(wctx, r); err != nil {
			return err
		}
		r, w, _ = c.files()
	}
	c.pending = nil
	if r == nil {
		if w, err = c.reopen(wctx); err != nil {
			return err
		}
	}
	data := make([]byte, 0, len(msg)+len(c.opts.WriteTerm))
	data = append(append(data, msg...), c.opts.WriteTerm...)
	setKernelTimeout(w, time.Until(c.opts.deadline(wctx)))
	n, err := w.Write(data)
	if err == nil && n < len(data) {
		err = fmt.Errorf("short write: %d of %d bytes", n, len(data))
	}
	if err == nil {
		return nil
	}
	switch {
	case c.isClosed():
		return fmt.Errorf("transport: %s: write: %w", c.name, driver.ErrClosed)
	case isTimeout(err):
		return fmt.Errorf("transport: %s: write: %w: %w", c.name, driver.ErrTimeout, err)
	}
	c.markBroken(r)
	return fmt.Errorf("transport: %s: write: %w: %w", c.name, driver.ErrDisconnected, err)
}

func (c *usbtmcConn) reopen(ctx context.Context) (*os.File, error) {
	var r, w *os.File
	tries, err := reconnectPolicy.retry(ctx, func() error {
		var err error
		r, w, err = c.open(c.path)
		return err
	})
	if err != nil {
		return nil, relinkFailed(ctx, c.name, "reopen", tries, err)
	}
	c.state.Lock()
	defer c.state.Unlock()
	if c.closed {
		closeFiles(r, w)
		return nil, fmt.Errorf("transport: %s: write: %w", c.name, driver.ErrClosed)
	}
	c.r, c.w = r, w
	c.reconnects++
	return w, nil
}

// Read returns the next message without its read terminator (the
// terminator is optional on USBTMC, whose transfers carry an end flag).
func (c *usbtmcConn) Read(ctx context.Context) ([]byte, error) {
	c.mu.Lock()
	defer c.mu.Unlock()
	r, _, err := c.files()
	if err != nil {
		return nil, err
	}
	if r == nil {
		return nil, fmt.Errorf("transport: %s: read: %w: the device went away; the next write opens it again", c.name, driver.ErrDisconnected)
	}
	if ctx.Err() != nil {
		return nil, fmt.Errorf("transport: %s: read: %w", c.name, ctxFailure(ctx))
	}
	start := time.Now()
	deadline := c.opts.deadline(ctx)
	if c.pending == nil {
		setKernelTimeout(r, time.Until(deadline))
		ch := make(chan readResult, 1)
		buf := c.buf
		go func() {
			n, err := r.Read(buf)
			ch <- readResult{n, err}
		}()
		c.pending = ch
	}
	timer := time.NewTimer(time.Until(deadline))
	defer timer.Stop()
	select {
	case res := <-c.pending:
		c.pending = nil
		return c.result(r, res)
	case <-ctx.Done():
		return nil, fmt.Errorf("transport: %s: read: %w", c.name, ctxFailure(ctx))
	case <-timer.C:
		return nil, fmt.Errorf("transport: %s: read: %w", c.name, timedOut(ctx, start))
	case <-c.closing:
		return nil, fmt.Errorf("transport: %s: read: %w", c.name, driver.ErrClosed)
	}
}

func (c *usbtmcConn) result(r *os.File, res readResult) ([]byte, error) {
	if res.err != nil {
		switch {
		case c.isClosed():
			return nil, fmt.Errorf("transport: %s: read: %w", c.name, driver.ErrClosed)
		case isTimeout(res.err):
			return nil, fmt.Errorf("transport: %s: read: %w: %w", c.name, driver.ErrTimeout, res.err)
		}
		c.markBroken(r)
		return nil, fmt.Errorf("transport: %s: read: %w: %w", c.name, driver.ErrDisconnected, res.err)
	}
	msg := c.buf[:res.n]
	if res.n >= len(c.buf) {
		return nil, fmt.Errorf("transport: %s: read: %w: message longer than %d bytes", c.name, driver.ErrMalformed, c.opts.MaxRead)
	}
	msg = bytes.TrimSuffix(msg, []byte(c.opts.ReadTerm))
	return append([]byte(nil), msg...), nil
}

// Close closes the device. A Read blocked in another goroutine returns
// driver.ErrClosed at once.
func (c *usbtmcConn) Close() error {
	c.state.Lock()
	defer c.state.Unlock()
	if c.closed {
		return fmt.Errorf("transport: %s: close: %w", c.name, driver.ErrClosed)
	}
	c.closed = true
	close(c.closing)
	if c.r == nil {
		return nil
	}
	err := closeFiles(c.r, c.w)
	c.r, c.w = nil, nil
	if err != nil {
		return fmt.Errorf("transport: %s: close: %w", c.name, err)
	}
	return nil
}
