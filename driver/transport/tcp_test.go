package transport

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"strings"
	"syscall"
	"testing"
	"time"

	"rolloff/driver"
)

// server is a loopback listener that hands each accepted connection to the
// test, which plays the instrument on it.
type server struct {
	ln    net.Listener
	conns chan net.Conn
}

func startServer(t *testing.T) *server {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	s := &server{ln: ln, conns: make(chan net.Conn, 8)}
	go func() {
		for {
			c, err := ln.Accept()
			if err != nil {
				close(s.conns)
				return
			}
			s.conns <- c
		}
	}()
	t.Cleanup(func() {
		ln.Close()
		for c := range s.conns {
			c.Close()
		}
	})
	return s
}

func (s *server) addr() string { return "tcp://" + s.ln.Addr().String() }

// accept returns the next connection the transport made.
func (s *server) accept(t *testing.T) (net.Conn, *bufio.Reader) {
	t.Helper()
	select {
	case c := <-s.conns:
		t.Cleanup(func() { c.Close() })
		return c, bufio.NewReader(c)
	case <-time.After(3 * time.Second):
		t.Fatal("the transport did not connect")
	}
	return nil, nil
}

// readLine returns what the instrument received up to and including '\n'.
func readLine(t *testing.T, c net.Conn, r *bufio.Reader) string {
	t.Helper()
	c.SetReadDeadline(time.Now().Add(3 * time.Second))
	s, err := r.ReadString('\n')
	if err != nil {
		t.Fatalf("instrument read: %q, %v", s, err)
	}
	return s
}

func openTCP(t *testing.T, addr string, o Opts) Conn {
	t.Helper()
	c, err := Open(t.Context(), addr, o)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close() })
	return c
}

func TestTCPQueryExactBytes(t *testing.T) {
	s := startServer(t)
	c := openTCP(t, s.addr(), Opts{WriteTerm: "\r\n", ReadTerm: "\r\n"})
	ic, r := s.accept(t)
	ctx := t.Context()
	if err := c.Write(ctx, []byte("*IDN?")); err != nil {
		t.Fatal(err)
	}
	if got := readLine(t, ic, r); got != "*IDN?\r\n" {
		t.Fatalf("instrument received %q, want %q", got, "*IDN?\r\n")
	}
	// A response split over several segments, and two responses in one.
	io.WriteString(ic, "rolloff,SIM-")
	time.Sleep(20 * time.Millisecond)
	io.WriteString(ic, "GEN,0001,1.0\r\n+1.0E+03\r\n")
	for _, want := range []string{"rolloff,SIM-GEN,0001,1.0", "+1.0E+03"} {
		got, err := c.Read(ctx)
		if err != nil || string(got) != want {
			t.Fatalf("Read = %q, %v; want %q", got, err, want)
		}
	}
}

func TestTCPDefaultPortAndTerminator(t *testing.T) {
	// Without a port the address means 5025 (common practice); dialling
	// it here would need that port free, so only the parse is checked.
	a, err := ParseAddress("tcp://127.0.0.1")
	if err != nil || a.Port != 5025 {
		t.Fatalf("ParseAddress = %+v, %v", a, err)
	}
	s := startServer(t)
	c := openTCP(t, s.addr(), Opts{})
	ic, r := s.accept(t)
	if err := c.Write(t.Context(), []byte("SYST:ERR?")); err != nil {
		t.Fatal(err)
	}
	// IEEE 488.2 §7.5: NL is the default message terminator.
	if got := readLine(t, ic, r); got != "SYST:ERR?\n" {
		t.Fatalf("instrument received %q", got)
	}
}

func TestTCPReconnectAfterDrop(t *testing.T) {
	s := startServer(t)
	c := openTCP(t, s.addr(), Opts{Timeout: 2 * time.Second})
	ctx := t.Context()
	ic, r := s.accept(t)
	if err := c.Write(ctx, []byte("MEAS:VOLT:DC?")); err != nil {
		t.Fatal(err)
	}
	readLine(t, ic, r)
	// The instrument drops the link while the read is pending.
	go func() { time.Sleep(30 * time.Millisecond); ic.Close() }()
	_, err := c.Read(ctx)
	if !errors.Is(err, driver.ErrDisconnected) {
		t.Fatalf("pending Read after the drop = %v, want ErrDisconnected", err)
	}
	// Reading again does not reconnect (nothing was asked on a new link).
	if _, err := c.Read(ctx); !errors.Is(err, driver.ErrDisconnected) {
		t.Fatalf("second Read = %v, want ErrDisconnected", err)
	}
	// The next Write dials again and sends; nothing earlier is resent.
	if err := c.Write(ctx, []byte("*IDN?")); err != nil {
		t.Fatalf("Write after the drop: %v", err)
	}
	ic2, r2 := s.accept(t)
	if got := readLine(t, ic2, r2); got != "*IDN?\n" {
		t.Fatalf("new link first received %q, want only the new command", got)
	}
	io.WriteString(ic2, "rolloff,SIM-DMM,0002,1.0\n")
	got, err := c.Read(ctx)
	if err != nil || string(got) != "rolloff,SIM-DMM,0002,1.0" {
		t.Fatalf("Read on the new link = %q, %v", got, err)
	}
	if n := c.(ReconnectCounter).Reconnects(); n != 1 {
		t.Errorf("Reconnects = %d, want 1", n)
	}
}

func TestTCPIdleDropNoticedBeforeWrite(t *testing.T) {
	s := startServer(t)
	c := openTCP(t, s.addr(), Opts{})
	ic, _ := s.accept(t)
	ic.Close() // e.g. the instrument rebooted while the bench was idle
	time.Sleep(50 * time.Millisecond)
	if err := c.Write(t.Context(), []byte("*CLS")); err != nil {
		t.Fatalf("Write after an idle drop: %v", err)
	}
	ic2, r2 := s.accept(t)
	if got := readLine(t, ic2, r2); got != "*CLS\n" {
		t.Fatalf("new link received %q", got)
	}
	if n := c.(ReconnectCounter).Reconnects(); n != 1 {
		t.Errorf("Reconnects = %d, want 1", n)
	}
}

func TestTCPReconnectGivesUp(t *testing.T) {
	s := startServer(t)
	c := openTCP(t, s.addr(), Opts{})
	ic, _ := s.accept(t)
	s.ln.Close()
	ic.Close()
	time.Sleep(50 * time.Millisecond)
	ctx, cancel := context.WithTimeout(t.Context(), 400*time.Millisecond)
	defer cancel()
	start := time.Now()
	err := c.Write(ctx, []byte("*IDN?"))
	if !errors.Is(err, driver.ErrDisconnected) || !strings.Contains(err.Error(), "reconnect gave up after") {
		t.Fatalf("Write with the instrument gone = %v, want ErrDisconnected after retries", err)
	}
	if d := time.Since(start); d > 3*time.Second {
		t.Errorf("reconnect took %v; the context allowed 400 ms", d)
	}
}

func TestTCPTimeoutThenStaleResponseDiscarded(t *testing.T) {
	s := startServer(t)
	c := openTCP(t, s.addr(), Opts{Timeout: 100 * time.Millisecond})
	ic, r := s.accept(t)
	ctx := t.Context()
	if err := c.Write(ctx, []byte("READ?")); err != nil {
		t.Fatal(err)
	}
	readLine(t, ic, r)
	start := time.Now()
	_, err := c.Read(ctx)
	if !errors.Is(err, driver.ErrTimeout) {
		t.Fatalf("Read with no answer = %v, want ErrTimeout", err)
	}
	if d := time.Since(start); d < 90*time.Millisecond || d > 3*time.Second {
		t.Errorf("time-out after %v, want about 100 ms", d)
	}
	// The late answer to READ? must not be taken for the next one.
	io.WriteString(ic, "+1.5E-01\n")
	time.Sleep(30 * time.Millisecond)
	if err := c.Write(ctx, []byte("FREQ?")); err != nil {
		t.Fatal(err)
	}
	readLine(t, ic, r)
	io.WriteString(ic, "+1.0E+03\n")
	got, err := c.Read(ctx)
	if err != nil || string(got) != "+1.0E+03" {
		t.Fatalf("Read after a time-out = %q, %v; want the fresh answer", got, err)
	}

	// A context deadline is a time-out too, and says so.
	dctx, cancel := context.WithTimeout(ctx, 60*time.Millisecond)
	defer cancel()
	_, err = c.Read(dctx)
	if !errors.Is(err, driver.ErrTimeout) || !errors.Is(err, context.DeadlineExceeded) {
		t.Fatalf("Read past the context deadline = %v", err)
	}
}

func TestTCPReadCancel(t *testing.T) {
	s := startServer(t)
	c := openTCP(t, s.addr(), Opts{Timeout: 10 * time.Second})
	s.accept(t)
	ctx, cancel := context.WithCancel(t.Context())
	go func() { time.Sleep(50 * time.Millisecond); cancel() }()
	start := time.Now()
	_, err := c.Read(ctx)
	if !errors.Is(err, context.Canceled) || errors.Is(err, driver.ErrTimeout) {
		t.Fatalf("cancelled Read = %v, want context.Canceled", err)
	}
	if d := time.Since(start); d > 3*time.Second {
		t.Errorf("cancel took %v", d)
	}
	// The connection survives a cancelled read.
	if err := c.Write(t.Context(), []byte("*CLS")); err != nil {
		t.Fatal(err)
	}
}

func TestTCPCloseWakesRead(t *testing.T) {
	s := startServer(t)
	c, err := Open(t.Context(), s.addr(), Opts{Timeout: 10 * time.Second})
	if err != nil {
		t.Fatal(err)
	}
	s.accept(t)
	go func() { time.Sleep(50 * time.Millisecond); c.Close() }()
	if _, err := c.Read(t.Context()); !errors.Is(err, driver.ErrClosed) {
		t.Fatalf("Read woken by Close = %v, want ErrClosed", err)
	}
	if err := c.Write(t.Context(), []byte("*RST")); !errors.Is(err, driver.ErrClosed) {
		t.Fatalf("Write after Close = %v, want ErrClosed", err)
	}
	if err := c.Close(); !errors.Is(err, driver.ErrClosed) {
		t.Fatalf("second Close = %v, want ErrClosed", err)
	}
}

func TestTCPMaxRead(t *testing.T) {
	s := startServer(t)
	c := openTCP(t, s.addr(), Opts{MaxRead: 64})
	ic, _ := s.accept(t)
	io.WriteString(ic, strings.Repeat("1,", 100))
	if _, err := c.Read(t.Context()); !errors.Is(err, driver.ErrMalformed) {
		t.Fatalf("Read of an endless response = %v, want ErrMalformed", err)
	}
}

func TestTCPDialRefusedGivesNilConn(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := "tcp://" + ln.Addr().String()
	ln.Close()
	c, err := Open(t.Context(), addr, Opts{Timeout: time.Second})
	if c != nil || err == nil {
		t.Fatalf("Open on a dead port = %v, %v", c, err)
	}
	if !strings.Contains(err.Error(), addr) || !errors.Is(err, syscall.ECONNREFUSED) {
		t.Errorf("error %q should name %s and wrap the refusal", err, addr)
	}
}

// fullListener returns the address of a loopback socket that listens but
// never accepts, with its accept queue filled, so that a further connect
// waits (the kernel drops the SYN). ok is false if the kernel accepted
// every connect anyway.
func fullListener(t *testing.T) (addr string, ok bool) {
	fd, err := syscall.Socket(syscall.AF_INET, syscall.SOCK_STREAM, 0)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { syscall.Close(fd) })
	if err := syscall.Bind(fd, &syscall.SockaddrInet4{Addr: [4]byte{127, 0, 0, 1}}); err != nil {
		t.Fatal(err)
	}
	if err := syscall.Listen(fd, 0); err != nil {
		t.Fatal(err)
	}
	sa, err := syscall.Getsockname(fd)
	if err != nil {
		t.Fatal(err)
	}
	addr = fmt.Sprintf("127.0.0.1:%d", sa.(*syscall.SockaddrInet4).Port)
	for range 16 {
		d := net.Dialer{Timeout: 200 * time.Millisecond}
		c, err := d.Dial("tcp", addr)
		if err != nil {
			return "tcp://" + addr, true
		}
		t.Cleanup(func() { c.Close() })
	}
	return "", false
}

func TestTCPDialHonoursContext(t *testing.T) {
	addr, ok := fullListener(t)
	if !ok {
		t.Skip("this kernel completes every loopback connect; cannot make a dial wait")
	}
	ctx, cancel := context.WithCancel(t.Context())
	go func() { time.Sleep(80 * time.Millisecond); cancel() }()
	start := time.Now()
	c, err := Open(ctx, addr, Opts{Timeout: 10 * time.Second})
	if c != nil || !errors.Is(err, context.Canceled) {
		t.Fatalf("Open cancelled while dialling = %v, %v; want context.Canceled", c, err)
	}
	if d := time.Since(start); d > 2*time.Second {
		t.Errorf("cancel took %v", d)
	}

	dctx, dcancel := context.WithTimeout(t.Context(), 100*time.Millisecond)
	defer dcancel()
	c, err = Open(dctx, addr, Opts{})
	if c != nil || !errors.Is(err, driver.ErrTimeout) {
		t.Fatalf("Open past its deadline = %v, %v; want ErrTimeout", c, err)
	}
	// Without a context deadline Opts.Timeout bounds the dial.
	start = time.Now()
	c, err = Open(t.Context(), addr, Opts{Timeout: 150 * time.Millisecond})
	if c != nil || !errors.Is(err, driver.ErrTimeout) || time.Since(start) > 2*time.Second {
		t.Fatalf("Open with Opts.Timeout = %v, %v after %v; want ErrTimeout", c, err, time.Since(start))
	}
}
