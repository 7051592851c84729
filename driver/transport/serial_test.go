//go:build linux

package transport

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/creack/pty"
	"go.bug.st/serial"

	"rolloff/driver"
)

// fakePort is a pseudo-terminal pair: the test plays the instrument on the
// master; the transport opens the slave path through go.bug.st/serial.
type fakePort struct {
	master *os.File
	slave  *os.File
	path   string
	r      *bufio.Reader
}

func newFakePort(t *testing.T) *fakePort {
	t.Helper()
	m, s, err := pty.Open()
	if err != nil {
		t.Skipf("no pseudo-terminals here: %v", err)
	}
	p := &fakePort{master: m, slave: s, path: s.Name(), r: bufio.NewReader(m)}
	t.Cleanup(func() { m.Close(); s.Close() })
	return p
}

// line returns what the instrument received up to and including '\n'.
func (p *fakePort) line(t *testing.T) string {
	t.Helper()
	type res struct {
		s   string
		err error
	}
	ch := make(chan res, 1)
	go func() { s, err := p.r.ReadString('\n'); ch <- res{s, err} }()
	select {
	case r := <-ch:
		if r.err != nil {
			t.Fatalf("instrument read: %q, %v", r.s, r.err)
		}
		return r.s
	case <-time.After(3 * time.Second):
		t.Fatal("the instrument received nothing")
	}
	return ""
}

func openSerialFake(t *testing.T, path string, o Opts) Conn {
	t.Helper()
	c, err := Open(t.Context(), "serial://"+path+"?baud=115200&bits=8&parity=none&stop=1&flow=none", o)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close() })
	return c
}

func TestSerialQuery(t *testing.T) {
	p := newFakePort(t)
	c := openSerialFake(t, p.path, Opts{})
	ctx := t.Context()
	if err := c.Write(ctx, []byte("*IDN?")); err != nil {
		t.Fatal(err)
	}
	// IEEE 488.2 §7.5: the message ends with NL.
	if got := p.line(t); got != "*IDN?\n" {
		t.Fatalf("instrument received %q", got)
	}
	io.WriteString(p.master, "rolloff,SIM-GEN,0001,1.0\n")
	got, err := c.Read(ctx)
	if err != nil || string(got) != "rolloff,SIM-GEN,0001,1.0" {
		t.Fatalf("Read = %q, %v", got, err)
	}
}

func TestSerialReadCancelAndTimeout(t *testing.T) {
	p := newFakePort(t)
	c := openSerialFake(t, p.path, Opts{Timeout: 150 * time.Millisecond})
	// A cancel ends a Read long before its deadline.
	ctx, cancel := context.WithTimeout(t.Context(), time.Minute)
	go func() { time.Sleep(60 * time.Millisecond); cancel() }()
	start := time.Now()
	_, err := c.Read(ctx)
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("cancelled Read = %v, want context.Canceled", err)
	}
	// The read polls every serialPoll, so a cancel ends it soon after.
	if d := time.Since(start); d > 2*time.Second {
		t.Errorf("cancel took %v", d)
	}
	start = time.Now()
	if _, err := c.Read(t.Context()); !errors.Is(err, driver.ErrTimeout) {
		t.Fatalf("Read with no answer = %v, want ErrTimeout", err)
	}
	if d := time.Since(start); d < 140*time.Millisecond || d > 3*time.Second {
		t.Errorf("time-out after %v, want about 150 ms", d)
	}
	// A late answer is discarded before the next command.
	io.WriteString(p.master, "stale\n")
	time.Sleep(30 * time.Millisecond)
	if err := c.Write(t.Context(), []byte("FREQ?")); err != nil {
		t.Fatal(err)
	}
	if got := p.line(t); got != "FREQ?\n" {
		t.Fatalf("instrument received %q", got)
	}
	io.WriteString(p.master, "1000\n")
	if got, err := c.Read(t.Context()); err != nil || string(got) != "1000" {
		t.Fatalf("Read after a time-out = %q, %v; want the fresh answer", got, err)
	}
}

func TestSerialCloseWakesRead(t *testing.T) {
	p := newFakePort(t)
	c, err := Open(t.Context(), "serial://"+p.path, Opts{Timeout: 10 * time.Second})
	if err != nil {
		t.Fatal(err)
	}
	go func() { time.Sleep(50 * time.Millisecond); c.Close() }()
	if _, err := c.Read(t.Context()); !errors.Is(err, driver.ErrClosed) {
		t.Fatalf("Read woken by Close = %v, want ErrClosed", err)
	}
}

func TestSerialDeviceGone(t *testing.T) {
	p := newFakePort(t)
	c := openSerialFake(t, p.path, Opts{Timeout: 2 * time.Second})
	p.slave.Close() // only the transport holds the device now
	ctx := t.Context()
	if err := c.Write(ctx, []byte("READ?")); err != nil {
		t.Fatal(err)
	}
	p.line(t)
	// The instrument is unplugged while the read is pending.
	go func() { time.Sleep(50 * time.Millisecond); p.master.Close() }()
	_, err := c.Read(ctx)
	if !errors.Is(err, driver.ErrDisconnected) {
		t.Fatalf("Read with the device gone = %v, want ErrDisconnected", err)
	}
	// go.bug.st/serial reports the hang-up as a PortError; it stays
	// reachable through the wrapping.
	var pe *serial.PortError
	if !errors.As(err, &pe) {
		t.Errorf("error %v does not wrap the serial.PortError cause", err)
	}
	if _, err := c.Read(ctx); !errors.Is(err, driver.ErrDisconnected) {
		t.Fatalf("second Read = %v, want ErrDisconnected", err)
	}
	wctx, cancel := context.WithTimeout(ctx, 300*time.Millisecond)
	defer cancel()
	if err := c.Write(wctx, []byte("*IDN?")); !errors.Is(err, driver.ErrDisconnected) {
		t.Fatalf("Write with the device still gone = %v, want ErrDisconnected", err)
	}
}

func TestSerialReopenWhenDeviceReturns(t *testing.T) {
	// The address names a stable link (as udev's /dev/serial/by-id does);
	// the device behind it goes away and comes back as a new terminal.
	link := filepath.Join(t.TempDir(), "ttyBENCH")
	p1 := newFakePort(t)
	if err := os.Symlink(p1.path, link); err != nil {
		t.Fatal(err)
	}
	c := openSerialFake(t, link, Opts{Timeout: 2 * time.Second})
	p1.slave.Close()
	ctx := t.Context()
	if err := c.Write(ctx, []byte("*IDN?")); err != nil {
		t.Fatal(err)
	}
	p1.line(t)
	p1.master.Close()
	if _, err := c.Read(ctx); !errors.Is(err, driver.ErrDisconnected) {
		t.Fatalf("Read with the device gone = %v, want ErrDisconnected", err)
	}
	p2 := newFakePort(t)
	os.Remove(link)
	if err := os.Symlink(p2.path, link); err != nil {
		t.Fatal(err)
	}
	if err := c.Write(ctx, []byte("*IDN?")); err != nil {
		t.Fatalf("Write after the device came back: %v", err)
	}
	if got := p2.line(t); got != "*IDN?\n" {
		t.Fatalf("new device received %q, want only the new command", got)
	}
	io.WriteString(p2.master, "rolloff,SIM-GEN,0001,1.0\n")
	if got, err := c.Read(ctx); err != nil || string(got) != "rolloff,SIM-GEN,0001,1.0" {
		t.Fatalf("Read on the new device = %q, %v", got, err)
	}
	if n := c.(ReconnectCounter).Reconnects(); n != 1 {
		t.Errorf("Reconnects = %d, want 1", n)
	}
}

func TestSerialOpenMissingDevice(t *testing.T) {
	path := filepath.Join(t.TempDir(), "ttyNONE")
	c, err := Open(t.Context(), "serial://"+path, Opts{})
	if c != nil || err == nil || !strings.Contains(err.Error(), path) {
		t.Fatalf("Open of a missing device = %v, %v; want a nil Conn and an error naming the path", c, err)
	}
	// A pty takes any line setting, so the mapping of the address's
	// settings onto the driver's mode is checked directly.
	for _, tc := range []struct {
		p    SerialParams
		want serial.Mode
	}{
		{SerialParams{Baud: 9600, DataBits: 8, Parity: "none", StopBits: 1}, serial.Mode{BaudRate: 9600, DataBits: 8, Parity: serial.NoParity, StopBits: serial.OneStopBit}},
		{SerialParams{Baud: 19200, DataBits: 7, Parity: "even", StopBits: 2}, serial.Mode{BaudRate: 19200, DataBits: 7, Parity: serial.EvenParity, StopBits: serial.TwoStopBits}},
		{SerialParams{Baud: 300, DataBits: 5, Parity: "odd", StopBits: 1}, serial.Mode{BaudRate: 300, DataBits: 5, Parity: serial.OddParity, StopBits: serial.OneStopBit}},
		{SerialParams{Baud: 1200, DataBits: 8, Parity: "mark", StopBits: 1}, serial.Mode{BaudRate: 1200, DataBits: 8, Parity: serial.MarkParity, StopBits: serial.OneStopBit}},
		{SerialParams{Baud: 1200, DataBits: 8, Parity: "space", StopBits: 1}, serial.Mode{BaudRate: 1200, DataBits: 8, Parity: serial.SpaceParity, StopBits: serial.OneStopBit}},
	} {
		if got := serialMode(tc.p); fmt.Sprint(got) != fmt.Sprint(tc.want) {
			t.Errorf("serialMode(%+v) = %+v, want %+v", tc.p, got, tc.want)
		}
	}
}
