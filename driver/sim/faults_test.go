package sim

import (
	"errors"
	"io"
	"net"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"
)

func TestFaultDropNow(t *testing.T) {
	b := startBench(t, quietConfig())
	c := dial(t, b.Addr(RoleGenerator))
	c.query("*IDN?")
	f := b.Faults(RoleGenerator)
	f.DropNow()
	if _, err := c.readLine(2 * time.Second); !errors.Is(err, io.EOF) {
		t.Errorf("after DropNow read: %v, want EOF", err)
	}
	if f.Count(FaultDrop) != 1 || f.Injected() != 1 {
		t.Errorf("counts %d %d", f.Count(FaultDrop), f.Injected())
	}
	// The instrument is still there for a new connection.
	if got := dial(t, b.Addr(RoleGenerator)).query("*IDN?"); got == "" {
		t.Errorf("no answer after reconnecting")
	}
}

// The command is executed, the answer never comes: a client must not
// assume a dropped write did nothing.
func TestFaultDropMidQuery(t *testing.T) {
	b := startBench(t, quietConfig())
	c := dial(t, b.Addr(RoleGenerator))
	f := b.Faults(RoleGenerator)
	f.DropMidQuery()
	if f.Injected() != 0 {
		t.Errorf("armed fault counted before it happened")
	}
	c.send("FREQ 1234;FREQ?")
	if s, err := c.readLine(2 * time.Second); !errors.Is(err, io.EOF) || s != "" {
		t.Errorf("read %q, %v; want EOF and nothing", s, err)
	}
	if b.FreqHz() != 1234 {
		t.Errorf("the command did not take effect: %g Hz", b.FreqHz())
	}
	if f.Count(FaultDropMidQuery) != 1 {
		t.Errorf("count %d", f.Count(FaultDropMidQuery))
	}
	c2 := dial(t, b.Addr(RoleGenerator))
	if got := c2.float("FREQ?"); got != 1234 {
		t.Errorf("after reconnect FREQ? = %g", got)
	}
}

func TestFaultDelayNext(t *testing.T) {
	b := startBench(t, quietConfig())
	c := dial(t, b.Addr(RoleSwitch))
	b.Faults(RoleSwitch).DelayNext(400 * time.Millisecond)
	start := time.Now()
	c.query("*IDN?")
	if el := time.Since(start); el < 400*time.Millisecond {
		t.Errorf("delayed answer came after %v", el)
	}
	start = time.Now()
	c.query("*IDN?")
	if el := time.Since(start); el > 300*time.Millisecond {
		t.Errorf("second answer also delayed: %v", el)
	}
	if b.Faults(RoleSwitch).Count(FaultDelay) != 1 {
		t.Errorf("delay not counted once")
	}
}

func TestFaultCorruptNext(t *testing.T) {
	b := startBench(t, quietConfig())
	c := dial(t, b.Addr(RoleGenerator))
	f := b.Faults(RoleGenerator)
	f.CorruptNext()
	if got := c.query("*IDN?"); got != b.Config().Generator.IDN {
		t.Errorf("non-numeric answer corrupted: %q", got)
	}
	s := c.query("FREQ?")
	if _, err := strconv.ParseFloat(s, 64); err == nil || !strings.Contains(s, "#") {
		t.Errorf("corrupted answer %q still parses", s)
	}
	if got := c.float("FREQ?"); got != 1000 {
		t.Errorf("next answer %g", got)
	}
	if f.Count(FaultCorrupt) != 1 {
		t.Errorf("count %d", f.Count(FaultCorrupt))
	}
}

func TestFaultTruncateNext(t *testing.T) {
	b := startBench(t, quietConfig())
	c := dial(t, b.Addr(RoleGenerator))
	b.Faults(RoleGenerator).TruncateNext()
	c.send("FREQ?")
	s, err := c.readLine(2 * time.Second)
	// "+1.00000000E+03" cut to its first 8 bytes, then the hang-up: no
	// terminator ever comes.
	if !errors.Is(err, io.EOF) || s != "+1.00000" {
		t.Errorf("truncated answer %q, %v; want the first half and EOF", s, err)
	}
}

func TestFaultPushError(t *testing.T) {
	b := startBench(t, quietConfig())
	c := dial(t, b.Addr(RoleVoltmeter))
	f := b.Faults(RoleVoltmeter)
	f.PushError(-310, "")
	f.PushError(-241, "Hardware missing")
	if got := c.query("SYST:ERR?;:SYST:ERR?;:SYST:ERR?"); got != `-310,"System error";-241,"Hardware missing";0,"No error"` {
		t.Errorf("queue %q", got)
	}
	if f.Count(FaultError) != 2 {
		t.Errorf("count %d", f.Count(FaultError))
	}
}

func TestFaultGone(t *testing.T) {
	b := startBench(t, quietConfig())
	addr := b.Addr(RoleGenerator)
	c := dial(t, addr)
	b.Faults(RoleGenerator).Gone(time.Second)
	// Closed by the bench: an orderly EOF, or a reset when the close
	// races the kernel's delivery (seen under load).
	if _, err := c.readLine(2 * time.Second); !errors.Is(err, io.EOF) && !errors.Is(err, syscall.ECONNRESET) {
		t.Errorf("open connection not closed: %v", err)
	}
	hostport := strings.TrimPrefix(addr, "tcp://")
	if conn, err := net.DialTimeout("tcp", hostport, time.Second); err == nil {
		conn.Close()
		t.Errorf("connection accepted while gone")
	}
	deadline := time.Now().Add(3 * time.Second)
	for {
		conn, err := net.DialTimeout("tcp", hostport, time.Second)
		if err == nil {
			conn.Close()
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("instrument did not come back: %v", err)
		}
		time.Sleep(20 * time.Millisecond)
	}
	if b.Addr(RoleGenerator) != addr {
		t.Errorf("address changed")
	}
	if got := dial(t, addr).query("*IDN?"); got == "" {
		t.Errorf("no answer after coming back")
	}
}

func TestFaultForceOverflow(t *testing.T) {
	b := startBench(t, quietConfig())
	v := dial(t, b.Addr(RoleVoltmeter))
	f := b.Faults(RoleVoltmeter)
	f.ForceOverflow(2)
	got := v.query("VOLT:NPLC 1;:SAMP:COUN 3;:READ?")
	parts := strings.Split(got, ",")
	if len(parts) != 3 || parts[0] != "+9.90000000E+37" || parts[1] != "+9.90000000E+37" || parts[2] == "+9.90000000E+37" {
		t.Errorf("readings %q, want two overflows then a reading", got)
	}
	if f.Count(FaultOverflow) != 2 {
		t.Errorf("count %d", f.Count(FaultOverflow))
	}
}

func TestFaultOverloadConverter(t *testing.T) {
	b := startBench(t, quietConfig())
	v := dial(t, b.Addr(RoleVoltmeter))
	if b.Overloaded() {
		t.Fatal("overloaded at rest")
	}
	b.Faults(RoleVoltmeter).OverloadConverter(time.Second)
	if !b.Overloaded() {
		t.Errorf("not overloaded")
	}
	if got := v.float("VOLT:NPLC 1;:READ?"); got != 1.2 {
		t.Errorf("overloaded converter reads %g, want the 1.2 V saturation", got)
	}
	time.Sleep(1100 * time.Millisecond)
	if b.Overloaded() {
		t.Errorf("overload did not end")
	}
	if got := v.float("READ?"); got > 0.01 {
		t.Errorf("after the overload %g", got)
	}
}
