package scpi

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"net"
	"strings"
	"sync"
	"testing"
	"time"

	"rolloff/driver"
	"rolloff/driver/transport"
	"rolloff/driver/transport/replay"
	"rolloff/internal/scpitest"
)

func playback(t *testing.T, path string) (*Session, *replay.Playback) {
	t.Helper()
	p, err := replay.LoadPlayback(path)
	if err != nil {
		t.Fatal(err)
	}
	return New(p, nil), p
}

func TestSessionIdentifyAndDrain(t *testing.T) {
	s, p := playback(t, "testdata/identify_drain.txt")
	ctx := t.Context()
	id, err := s.Identify(ctx)
	if err != nil || id != (driver.Identity{Manufacturer: "rolloff", Model: "SIM-GEN", Serial: "0001", Firmware: "1.0"}) {
		t.Fatalf("Identify = %+v, %v", id, err)
	}
	if err := s.Clear(ctx); err != nil {
		t.Fatal(err)
	}
	if err := s.Write(ctx, "SOUR:FREQ 1E+99"); err != nil {
		t.Fatal(err)
	}
	errs, err := s.DrainErrors(ctx)
	if err != nil {
		t.Fatal(err)
	}
	want := []Error{{-113, "Undefined header"}, {-222, "Data out of range;SOUR:FREQ"}}
	if fmt.Sprint(errs) != fmt.Sprint(want) {
		t.Fatalf("DrainErrors = %v, want %v", errs, want)
	}
	for _, e := range errs {
		if !errors.Is(e, driver.ErrInstrument) {
			t.Errorf("%v does not match ErrInstrument", e)
		}
	}
	// Every recorded exchange was used, byte for byte.
	if err := p.Close(); err != nil {
		t.Fatal(err)
	}
}

func TestSessionReadings(t *testing.T) {
	s, p := playback(t, "testdata/readings.txt")
	ctx := t.Context()
	if err := s.Reset(ctx); err != nil {
		t.Fatal(err)
	}
	if err := s.OperationComplete(ctx); err != nil {
		t.Fatal(err)
	}
	if v, err := s.QueryFloat(ctx, "READ?"); err != nil || v != 0.456789 {
		t.Fatalf("QueryFloat = %v, %v", v, err)
	}
	for _, want := range []error{driver.ErrOverload, driver.ErrNegativeOverload, driver.ErrNotANumber, driver.ErrMalformed} {
		_, err := s.QueryFloat(ctx, "READ?")
		if !errors.Is(err, want) || !strings.Contains(err.Error(), "READ?") {
			t.Errorf("QueryFloat = %v, want %v naming the command", err, want)
		}
	}
	burst, err := s.QueryFloats(ctx, "READ:BURST? 4")
	if err != nil || fmt.Sprint(burst) != "[0.1 0.11 0.12 0.13]" {
		t.Fatalf("QueryFloats = %v, %v", burst, err)
	}
	// After a time-out the error queue is read and its entry named.
	if _, err := s.QueryFloat(ctx, "READ?"); !errors.Is(err, driver.ErrTimeout) || !strings.Contains(err.Error(), "-230") {
		t.Fatalf("QueryFloat with no answer = %v, want ErrTimeout naming the instrument's -230", err)
	}
	// IEEE 488.2 §10.19: *OPC? answers 1; anything else is refused.
	if err := s.OperationComplete(ctx); !errors.Is(err, driver.ErrMalformed) {
		t.Fatalf("OperationComplete on answer 0 = %v, want ErrMalformed", err)
	}
	if err := p.Close(); err != nil {
		t.Fatal(err)
	}
}

func TestSessionRefusesTerminators(t *testing.T) {
	p := replay.NewPlayback(&replay.Transcript{Name: "empty"})
	s := New(p, nil)
	ctx := t.Context()
	for _, cmd := range []string{"*RST\n", "*RST\r", "SOUR:FREQ 1000\n*RST", "", "  ", "DISP \x00", "FRÉQ 1"} {
		if err := s.Write(ctx, cmd); !errors.Is(err, ErrInvalidCommand) {
			t.Errorf("Write(%q) = %v, want ErrInvalidCommand", cmd, err)
		}
		if _, err := s.Query(ctx, cmd); !errors.Is(err, ErrInvalidCommand) {
			t.Errorf("Query(%q) = %v, want ErrInvalidCommand", cmd, err)
		}
	}
	// Nothing reached the connection: the empty transcript is satisfied.
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	if err := s.Write(ctx, "*RST"); !errors.Is(err, driver.ErrClosed) {
		t.Fatalf("Write after Close = %v, want ErrClosed", err)
	}
}

func TestDrainErrorsBounded(t *testing.T) {
	var b strings.Builder
	for range 3 {
		b.WriteString("> SYST:ERR?\n< -350,\"Queue overflow\"\n")
	}
	tr, err := replay.ParseString("overflow", b.String())
	if err != nil {
		t.Fatal(err)
	}
	p := replay.NewPlayback(tr)
	s := New(p, &Opts{MaxErrors: 3})
	errs, err := s.DrainErrors(t.Context())
	if !errors.Is(err, driver.ErrInstrument) || len(errs) != 3 || !strings.Contains(err.Error(), "after 3 reads") {
		t.Fatalf("DrainErrors of an endless queue = %v, %v", errs, err)
	}
	if err := p.Close(); err != nil {
		t.Fatal(err)
	}
	if DefaultOpts.MaxErrors != 64 || s.Opts().QueryTimeout != DefaultOpts.QueryTimeout {
		t.Errorf("defaults: %+v / %+v", DefaultOpts, s.Opts())
	}
}

// stamped records when each write reached the connection.
type stamped struct {
	transport.Conn
	mu     sync.Mutex
	writes []time.Time
}

func (c *stamped) Write(ctx context.Context, msg []byte) error {
	c.mu.Lock()
	c.writes = append(c.writes, time.Now())
	c.mu.Unlock()
	return c.Conn.Write(ctx, msg)
}

func TestInterCommandDelay(t *testing.T) {
	tr, _ := replay.ParseString("delay", "> *CLS\n> *RST\n> *OPC?\n< 1\n> *CLS\n")
	c := &stamped{Conn: replay.NewPlayback(tr)}
	const delay = 40 * time.Millisecond
	s := New(c, &Opts{InterCommandDelay: delay})
	ctx := t.Context()
	s.Clear(ctx)
	s.Reset(ctx)
	if err := s.OperationComplete(ctx); err != nil {
		t.Fatal(err)
	}
	s.Clear(ctx)
	for i := 1; i < len(c.writes); i++ {
		if gap := c.writes[i].Sub(c.writes[i-1]); gap < delay {
			t.Errorf("write %d came %v after the previous one; the delay is %v", i, gap, delay)
		}
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	// A cancelled context ends the wait.
	tr, _ = replay.ParseString("delay", "> *CLS\n")
	s = New(replay.NewPlayback(tr), &Opts{InterCommandDelay: time.Hour})
	s.Clear(ctx)
	cctx, cancel := context.WithTimeout(ctx, 30*time.Millisecond)
	defer cancel()
	if err := s.Clear(cctx); !errors.Is(err, context.DeadlineExceeded) {
		t.Fatalf("Write waiting out the delay = %v", err)
	}
}

// TestSessionConcurrentQueries checks that exchanges from several
// goroutines are serialised over a real TCP connection: each query gets
// its own answer.
func TestSessionConcurrentQueries(t *testing.T) {
	// "ECHO? n" answers n; the pause widens any race window.
	addr := scpitest.Listen(t, &scpitest.Instrument{Delay: time.Millisecond, Handle: func(cmd string) (string, bool) {
		n, ok := strings.CutPrefix(cmd, "ECHO?")
		return strings.TrimSpace(n), ok
	}})
	conn, err := transport.Open(t.Context(), addr, transport.Opts{})
	if err != nil {
		t.Fatal(err)
	}
	s := New(conn, nil)
	defer s.Close()
	var wg sync.WaitGroup
	errs := make(chan error, 80)
	for g := range 8 {
		wg.Go(func() {
			for i := range 10 {
				n := g*100 + i
				v, err := s.QueryFloat(t.Context(), fmt.Sprintf("ECHO? %d", n))
				if err != nil || v != float64(n) {
					errs <- fmt.Errorf("ECHO? %d = %v, %v", n, v, err)
				}
			}
		})
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Error(err)
	}
}

func TestSessionQueryTimeoutApplies(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	go func() {
		c, err := ln.Accept()
		if err == nil {
			defer c.Close()
			bufio.NewReader(c).ReadString('\n')
			time.Sleep(2 * time.Second)
		}
	}()
	// The transport would wait 10 s; the session's QueryTimeout is shorter.
	conn, err := transport.Open(t.Context(), "tcp://"+ln.Addr().String(), transport.Opts{Timeout: 10 * time.Second})
	if err != nil {
		t.Fatal(err)
	}
	s := New(conn, &Opts{QueryTimeout: 100 * time.Millisecond})
	defer s.Close()
	start := time.Now()
	_, err = s.Identify(t.Context())
	if !errors.Is(err, driver.ErrTimeout) || !strings.Contains(err.Error(), "*IDN?") {
		t.Fatalf("Identify with no answer = %v, want ErrTimeout naming *IDN?", err)
	}
	if d := time.Since(start); d < 90*time.Millisecond || d > 3*time.Second {
		t.Errorf("gave up after %v, want about 100 ms", d)
	}
}
