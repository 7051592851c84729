package sim

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"os"
	"strings"
	"sync"
	"syscall"
	"time"

	"github.com/creack/pty"
	"golang.org/x/term"

	"rolloff/driver/sim/scpiserver"
)

// Server limits.
const (
	maxMessage   = 1 << 20 // longest program message accepted, bytes
	maxReceived  = 1 << 20 // program message units kept for Received
	writeTimeout = 5 * time.Second
)

// instrument is one simulated instrument and its servers.
type instrument struct {
	b      *Bench
	role   string
	dev    *scpiserver.Device
	reset  func()
	faults *Faults
	exec   sync.Mutex // one program message at a time

	recMu    sync.Mutex
	received []string
	queries  int // answers sent, for the slow personality's drops

	personality string
	idn         string

	lnMu      sync.Mutex
	ln        net.Listener
	addr      string
	conns     map[net.Conn]struct{}
	ptys      []*ptyPort
	goneUntil time.Time
	closed    bool
}

func newInstrument(b *Bench, role, idn string, register func(*instrument)) *instrument {
	in := &instrument{b: b, role: role, idn: idn, conns: map[net.Conn]struct{}{}}
	in.faults = &Faults{in: in}
	in.dev = scpiserver.New(scpiserver.Opts{
		IDN:      idn,
		QueueLen: b.cfg.ErrorQueueLen,
		Reset: func() {
			if in.reset != nil {
				in.reset()
			}
		},
		Trace: in.record,
	})
	register(in)
	return in
}

func (in *instrument) record(unit string) {
	in.recMu.Lock()
	defer in.recMu.Unlock()
	if len(in.received) >= maxReceived {
		in.received = append(in.received[:0], in.received[len(in.received)/2:]...)
	}
	in.received = append(in.received, unit)
}

func (in *instrument) isGone() bool {
	in.lnMu.Lock()
	defer in.lnMu.Unlock()
	return time.Now().Before(in.goneUntil)
}

// listen opens the TCP listener and starts accepting.
func (in *instrument) listen(ctx context.Context) error {
	var lc net.ListenConfig
	ln, err := lc.Listen(ctx, "tcp", "127.0.0.1:0")
	if err != nil {
		return err
	}
	in.lnMu.Lock()
	if in.closed {
		in.lnMu.Unlock()
		ln.Close()
		return ErrClosed
	}
	in.ln = ln
	in.addr = ln.Addr().String()
	in.lnMu.Unlock()
	in.b.wg.Add(1)
	go in.acceptLoop(ln)
	return nil
}

func (in *instrument) acceptLoop(ln net.Listener) {
	defer in.b.wg.Done()
	for {
		c, err := ln.Accept()
		if err != nil {
			if ln = in.relisten(ln); ln == nil {
				return
			}
			continue
		}
		if !in.track(c) {
			c.Close()
			continue
		}
		in.b.wg.Add(1)
		go in.serveConn(c)
	}
}

// relisten waits out a Gone fault and reopens the listener on the same
// address; it returns nil when the bench closes.
func (in *instrument) relisten(failed net.Listener) net.Listener {
	for {
		in.lnMu.Lock()
		closed, cur, until := in.closed, in.ln, in.goneUntil
		in.lnMu.Unlock()
		if closed {
			return nil
		}
		if cur != nil {
			if cur == failed {
				// An accept error on a live listener (out of files):
				// back off a little.
				select {
				case <-time.After(10 * time.Millisecond):
				case <-in.b.ctx.Done():
					return nil
				}
			}
			return cur
		}
		if d := time.Until(until); d > 0 {
			select {
			case <-time.After(d):
			case <-in.b.ctx.Done():
				return nil
			}
			continue
		}
		ln, err := net.Listen("tcp", in.addr)
		if err != nil {
			select {
			case <-time.After(10 * time.Millisecond):
			case <-in.b.ctx.Done():
				return nil
			}
			continue
		}
		in.lnMu.Lock()
		if in.closed {
			in.lnMu.Unlock()
			ln.Close()
			return nil
		}
		in.ln = ln
		in.lnMu.Unlock()
		return ln
	}
}

func (in *instrument) track(c net.Conn) bool {
	in.lnMu.Lock()
	defer in.lnMu.Unlock()
	if in.closed || time.Now().Before(in.goneUntil) {
		return false
	}
	in.conns[c] = struct{}{}
	return true
}

func (in *instrument) untrack(c net.Conn) {
	in.lnMu.Lock()
	defer in.lnMu.Unlock()
	delete(in.conns, c)
}

// dropAll closes every TCP connection; serial ports lose their next
// message.
func (in *instrument) dropAll() {
	in.lnMu.Lock()
	conns := make([]net.Conn, 0, len(in.conns))
	for c := range in.conns {
		conns = append(conns, c)
	}
	for _, p := range in.ptys {
		p.mu.Lock()
		p.lose = true
		p.mu.Unlock()
	}
	in.lnMu.Unlock()
	for _, c := range conns {
		c.Close()
	}
}

func (in *instrument) gone(d time.Duration) {
	in.lnMu.Lock()
	if until := time.Now().Add(d); until.After(in.goneUntil) {
		in.goneUntil = until
	}
	ln := in.ln
	in.ln = nil
	in.lnMu.Unlock()
	if ln != nil {
		ln.Close()
	}
	in.dropAllTCP()
}

func (in *instrument) dropAllTCP() {
	in.lnMu.Lock()
	conns := make([]net.Conn, 0, len(in.conns))
	for c := range in.conns {
		conns = append(conns, c)
	}
	in.lnMu.Unlock()
	for _, c := range conns {
		c.Close()
	}
}

// shutdown closes the listener, the connections and the terminals.
func (in *instrument) shutdown() {
	in.lnMu.Lock()
	in.closed = true
	ln := in.ln
	in.ln = nil
	ptys := in.ptys
	in.ptys = nil
	in.lnMu.Unlock()
	if ln != nil {
		ln.Close()
	}
	in.dropAllTCP()
	for _, p := range ptys {
		p.close()
	}
}

// link is the client side a response goes to.
type link interface {
	write(p []byte) error
	hangUp()
}

// process executes one program message and answers it, applying the
// armed faults. It returns false when the link was hung up.
func (in *instrument) process(line string, l link) bool {
	f := in.faults
	in.exec.Lock()
	resp, ok := in.dev.Execute(in.b.ctx, line)
	in.exec.Unlock()
	if f.takeDropMid() {
		l.hangUp()
		return false
	}
	if !ok {
		return true
	}
	slow, drop := in.slowAnswer()
	if d := f.takeDelay() + slow; d > 0 {
		select {
		case <-time.After(d):
		case <-in.b.ctx.Done():
			return false
		}
	}
	if drop {
		l.hangUp()
		return false
	}
	resp, _ = f.takeCorrupt(resp)
	if f.takeTruncate() {
		_ = l.write([]byte(resp[:(len(resp)+1)/2]))
		l.hangUp()
		return false
	}
	return l.write([]byte(resp+"\n")) == nil
}

// readMessage reads one program message up to "\n", without "\r\n".
// A message longer than maxMessage is skipped and reported as too long.
func readMessage(r *bufio.Reader) (msg string, tooLong bool, err error) {
	var buf []byte
	for {
		chunk, err := r.ReadSlice('\n')
		if len(buf)+len(chunk) > maxMessage {
			tooLong = true
		} else {
			buf = append(buf, chunk...)
		}
		switch {
		case err == nil:
			return strings.TrimRight(string(buf), "\r\n"), tooLong, nil
		case errors.Is(err, bufio.ErrBufferFull):
			continue
		default:
			return "", false, err
		}
	}
}

// tcpLink answers on a TCP connection.
type tcpLink struct{ c net.Conn }

func (t tcpLink) write(p []byte) error {
	_ = t.c.SetWriteDeadline(time.Now().Add(writeTimeout))
	_, err := t.c.Write(p)
	return err
}

func (t tcpLink) hangUp() { t.c.Close() }

func (in *instrument) serveConn(c net.Conn) {
	defer in.b.wg.Done()
	defer in.untrack(c)
	defer c.Close()
	r := bufio.NewReaderSize(c, 64<<10)
	l := tcpLink{c}
	for {
		msg, tooLong, err := readMessage(r)
		if err != nil {
			return
		}
		if tooLong {
			in.dev.Push(scpiserver.Errorf(scpiserver.TooMuchData, "message longer than %d bytes", maxMessage))
			continue
		}
		if !in.process(msg, l) {
			return
		}
	}
}

// ptyPort is one pseudo-terminal serving the instrument.
type ptyPort struct {
	master *os.File // pollable, so that Close wakes a blocked Read
	slave  *os.File // kept open so that the master never sees a hang-up
	path   string

	mu   sync.Mutex
	lose bool // DropNow: lose the next message
}

func (p *ptyPort) write(b []byte) error {
	_, err := p.master.Write(b)
	return err
}

func (p *ptyPort) hangUp() {}

func (p *ptyPort) close() {
	p.master.Close()
	p.slave.Close()
}

func (in *instrument) servePTY() (string, error) {
	master, slave, err := pty.Open()
	if err != nil {
		return "", fmt.Errorf("sim: open pty for %s: %w", in.role, err)
	}
	if _, err := term.MakeRaw(int(slave.Fd())); err != nil {
		master.Close()
		slave.Close()
		return "", fmt.Errorf("sim: raw mode on %s: %w", slave.Name(), err)
	}
	// pty.Open's master is in blocking mode (it called Fd); a
	// non-blocking duplicate goes through the runtime poller.
	fd, err := syscall.Dup(int(master.Fd()))
	if err == nil {
		err = syscall.SetNonblock(fd, true)
	}
	if err != nil {
		master.Close()
		slave.Close()
		return "", fmt.Errorf("sim: pty for %s: %w", in.role, err)
	}
	pm := os.NewFile(uintptr(fd), master.Name())
	master.Close()
	p := &ptyPort{master: pm, slave: slave, path: slave.Name()}
	in.lnMu.Lock()
	if in.closed {
		in.lnMu.Unlock()
		p.close()
		return "", ErrClosed
	}
	in.ptys = append(in.ptys, p)
	in.lnMu.Unlock()
	in.b.wg.Add(1)
	go in.servePort(p)
	return p.path, nil
}

func (in *instrument) servePort(p *ptyPort) {
	defer in.b.wg.Done()
	r := bufio.NewReaderSize(p.master, 64<<10)
	for {
		msg, tooLong, err := readMessage(r)
		if err != nil {
			if errors.Is(err, io.EOF) || errors.Is(err, os.ErrClosed) || in.b.ctx.Err() != nil {
				return
			}
			// EIO while no client has the slave open: keep serving.
			select {
			case <-time.After(5 * time.Millisecond):
			case <-in.b.ctx.Done():
				return
			}
			continue
		}
		p.mu.Lock()
		lose := p.lose
		p.lose = false
		p.mu.Unlock()
		if lose || in.isGone() {
			continue
		}
		if tooLong {
			in.dev.Push(scpiserver.Errorf(scpiserver.TooMuchData, "message longer than %d bytes", maxMessage))
			continue
		}
		in.process(msg, p)
	}
}
