package sched

import (
	"errors"
	"sync"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"rolloff/driver"
)

// haltGen is a generator whose Halt blocks until release is closed (when
// set), then fails the first fails calls.
type haltGen struct {
	*chain
	mu      sync.Mutex
	calls   int
	fails   int
	release chan struct{}
}

func (g *haltGen) Halt() error {
	g.mu.Lock()
	g.calls++
	n, rel := g.calls, g.release
	g.mu.Unlock()
	if rel != nil {
		<-rel
	}
	if n <= g.fails {
		return driver.ErrDisconnected
	}
	return nil
}

func (g *haltGen) count() int {
	g.mu.Lock()
	defer g.mu.Unlock()
	return g.calls
}

func TestHaltHangingHoldsOneGoroutine(t *testing.T) {
	defer func(d time.Duration) { haltTimeout = d }(haltTimeout)
	haltTimeout = 20 * time.Millisecond
	clk := newFakeClock()
	g := &haltGen{chain: newChain(clk), release: make(chan struct{})}
	r := &Run{inst: Instruments{Generator: g}, clock: clk, log: zerolog.Nop()}
	for i := 0; i < 4; i++ {
		if err := r.haltOnce(); !errors.Is(err, driver.ErrTimeout) {
			t.Fatalf("try %d of a hanging halt: %v, want a time-out", i+1, err)
		}
	}
	if n := g.count(); n != 1 {
		t.Fatalf("%d Halt calls in flight for 4 tries, want 1", n)
	}
	close(g.release)
	if err := r.haltOnce(); err != nil {
		t.Fatalf("the halt in flight returned %v", err)
	}
	if n := g.count(); n != 1 {
		t.Fatalf("%d Halt calls, want the one in flight to be waited for", n)
	}
	if err := r.haltOnce(); err != nil || g.count() != 2 {
		t.Fatalf("a new try after the first ended: %v, %d calls", err, g.count())
	}
}

func TestHaltRetryOnTheRunClock(t *testing.T) {
	// Three failed retries, the fourth succeeds: the backoffs 0.25, 0.5,
	// 1 and 2 s pass on the run's (virtual) clock.
	clk := newFakeClock()
	g := &haltGen{chain: newChain(clk), fails: 3}
	r := &Run{inst: Instruments{Generator: g}, clock: clk, log: zerolog.Nop()}
	t0 := clk.Now()
	r.haltRetry()
	if g.count() != 4 {
		t.Fatalf("%d Halt calls, want 4", g.count())
	}
	if d := clk.Now().Sub(t0); d != 3750*time.Millisecond {
		t.Fatalf("the run's clock advanced %v, want 3.75 s of backoff", d)
	}
}
