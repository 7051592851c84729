//go:build linux

package transport

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"rolloff/driver"
)

// fakeTMC is a file-backed stand-in for /dev/usbtmcN: two FIFOs, one
// carrying commands to the instrument, one carrying its responses back.
// The transport opens them with the same openDevice it uses for the real
// device node; the test plays the instrument on the other ends.
type fakeTMC struct {
	cmdPath, respPath string
	cmd, resp         *os.File // the instrument's ends
	opens             int
}

func newFakeTMC(t *testing.T) *fakeTMC {
	t.Helper()
	dir := t.TempDir()
	f := &fakeTMC{cmdPath: filepath.Join(dir, "cmd"), respPath: filepath.Join(dir, "resp")}
	for _, p := range []string{f.cmdPath, f.respPath} {
		if err := syscall.Mkfifo(p, 0o600); err != nil {
			t.Skipf("no FIFOs here: %v", err)
		}
	}
	var err error
	if f.cmd, err = os.OpenFile(f.cmdPath, os.O_RDWR, 0); err != nil {
		t.Fatal(err)
	}
	if f.resp, err = os.OpenFile(f.respPath, os.O_RDWR, 0); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { f.cmd.Close(); f.resp.Close() })
	return f
}

// open is the device opener: reads come from the response FIFO (read-only,
// so that the instrument closing its end looks like the device vanishing),
// writes go to the command FIFO.
func (f *fakeTMC) open(string) (r, w *os.File, err error) {
	f.opens++
	r, err = os.OpenFile(f.respPath, os.O_RDONLY|syscall.O_NONBLOCK, 0)
	if err != nil {
		return nil, nil, err
	}
	_, w, err = openDevice(f.cmdPath)
	if err != nil {
		r.Close()
		return nil, nil, err
	}
	return r, w, nil
}

// received returns the next command written, as one read of the FIFO.
func (f *fakeTMC) received(t *testing.T) string {
	t.Helper()
	f.cmd.SetReadDeadline(time.Now().Add(3 * time.Second))
	buf := make([]byte, 4096)
	n, err := f.cmd.Read(buf)
	if err != nil {
		t.Fatalf("instrument read: %v", err)
	}
	return string(buf[:n])
}

func (f *fakeTMC) reply(t *testing.T, msg string) {
	t.Helper()
	if _, err := f.resp.WriteString(msg); err != nil {
		t.Fatal(err)
	}
}

func openFakeTMC(t *testing.T, f *fakeTMC, o Opts) *usbtmcConn {
	t.Helper()
	c, err := newUSBTMC("usbtmc:///dev/usbtmc-fake", "/dev/usbtmc-fake", o.WithDefaults(), f.open)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close() })
	return c
}

func TestUSBTMCQuery(t *testing.T) {
	f := newFakeTMC(t)
	c := openFakeTMC(t, f, Opts{})
	ctx := t.Context()
	if err := c.Write(ctx, []byte("*IDN?")); err != nil {
		t.Fatal(err)
	}
	if got := f.received(t); got != "*IDN?\n" {
		t.Fatalf("instrument received %q", got)
	}
	f.reply(t, "rolloff,SIM-DMM,0002,1.0\n")
	if got, err := c.Read(ctx); err != nil || string(got) != "rolloff,SIM-DMM,0002,1.0" {
		t.Fatalf("Read = %q, %v", got, err)
	}
	// USBTMC marks the end of a message itself: a response without the
	// terminator is whole too.
	if err := c.Write(ctx, []byte("READ?")); err != nil {
		t.Fatal(err)
	}
	f.received(t)
	f.reply(t, "+1.234E-01")
	if got, err := c.Read(ctx); err != nil || string(got) != "+1.234E-01" {
		t.Fatalf("Read = %q, %v", got, err)
	}
}

func TestUSBTMCTimeoutCancelAndStale(t *testing.T) {
	f := newFakeTMC(t)
	c := openFakeTMC(t, f, Opts{Timeout: 100 * time.Millisecond})
	ctx := t.Context()
	if err := c.Write(ctx, []byte("READ?")); err != nil {
		t.Fatal(err)
	}
	f.received(t)
	start := time.Now()
	if _, err := c.Read(ctx); !errors.Is(err, driver.ErrTimeout) {
		t.Fatalf("Read with no answer = %v, want ErrTimeout", err)
	}
	if d := time.Since(start); d < 90*time.Millisecond || d > 3*time.Second {
		t.Errorf("time-out after %v", d)
	}
	// A cancelled context ends a Read too (its deadline is far off).
	cctx, cancel := context.WithTimeout(ctx, time.Minute)
	go func() { time.Sleep(40 * time.Millisecond); cancel() }()
	if _, err := c.Read(cctx); !errors.Is(err, context.Canceled) {
		t.Fatalf("cancelled Read = %v, want context.Canceled", err)
	}
	// The late answer to READ? is discarded before the next command.
	f.reply(t, "late\n")
	time.Sleep(20 * time.Millisecond)
	if err := c.Write(ctx, []byte("FREQ?")); err != nil {
		t.Fatal(err)
	}
	if got := f.received(t); got != "FREQ?\n" {
		t.Fatalf("instrument received %q", got)
	}
	f.reply(t, "1000\n")
	if got, err := c.Read(ctx); err != nil || string(got) != "1000" {
		t.Fatalf("Read after a time-out = %q, %v; want the fresh answer", got, err)
	}
	// An abandoned read that never got an answer is cut short by the next
	// Write as well.
	if err := c.Write(ctx, []byte("READ?")); err != nil {
		t.Fatal(err)
	}
	f.received(t)
	if _, err := c.Read(ctx); !errors.Is(err, driver.ErrTimeout) {
		t.Fatalf("Read = %v, want ErrTimeout", err)
	}
	if err := c.Write(ctx, []byte("*CLS")); err != nil {
		t.Fatalf("Write after an unanswered read: %v", err)
	}
	if got := f.received(t); got != "*CLS\n" {
		t.Fatalf("instrument received %q", got)
	}
}

func TestUSBTMCCloseWakesRead(t *testing.T) {
	f := newFakeTMC(t)
	c := openFakeTMC(t, f, Opts{Timeout: 10 * time.Second})
	go func() { time.Sleep(50 * time.Millisecond); c.Close() }()
	if _, err := c.Read(t.Context()); !errors.Is(err, driver.ErrClosed) {
		t.Fatalf("Read woken by Close = %v, want ErrClosed", err)
	}
	if err := c.Write(t.Context(), []byte("*RST")); !errors.Is(err, driver.ErrClosed) {
		t.Fatalf("Write after Close = %v, want ErrClosed", err)
	}
}

func TestUSBTMCDeviceGoneAndBack(t *testing.T) {
	f := newFakeTMC(t)
	c := openFakeTMC(t, f, Opts{Timeout: 2 * time.Second})
	ctx := t.Context()
	if err := c.Write(ctx, []byte("READ?")); err != nil {
		t.Fatal(err)
	}
	f.received(t)
	// The device vanishes: its end of the response channel closes.
	f.resp.Close()
	if _, err := c.Read(ctx); !errors.Is(err, driver.ErrDisconnected) {
		t.Fatalf("Read with the device gone = %v, want ErrDisconnected", err)
	}
	if _, err := c.Read(ctx); !errors.Is(err, driver.ErrDisconnected) {
		t.Fatalf("second Read = %v, want ErrDisconnected", err)
	}
	// It comes back; the next Write opens it again and sends.
	var err error
	if f.resp, err = os.OpenFile(f.respPath, os.O_RDWR, 0); err != nil {
		t.Fatal(err)
	}
	if err := c.Write(ctx, []byte("*IDN?")); err != nil {
		t.Fatalf("Write after the device came back: %v", err)
	}
	if got := f.received(t); got != "*IDN?\n" {
		t.Fatalf("instrument received %q", got)
	}
	f.reply(t, "rolloff,SIM-DMM,0002,1.0\n")
	if got, err := c.Read(ctx); err != nil || string(got) != "rolloff,SIM-DMM,0002,1.0" {
		t.Fatalf("Read = %q, %v", got, err)
	}
	if c.Reconnects() != 1 || f.opens != 2 {
		t.Errorf("Reconnects = %d, opens = %d; want 1 and 2", c.Reconnects(), f.opens)
	}
}

func TestUSBTMCOpenMissingDevice(t *testing.T) {
	path := filepath.Join(t.TempDir(), "usbtmc9")
	c, err := Open(t.Context(), "usbtmc://"+path, Opts{})
	if c != nil || err == nil || !strings.Contains(err.Error(), path) || !errors.Is(err, os.ErrNotExist) {
		t.Fatalf("Open of a missing device = %v, %v; want a nil Conn and an error naming the path", c, err)
	}
}
