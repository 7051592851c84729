package sched

import (
	"context"
	"errors"
	"fmt"
	"time"

	"rolloff/driver"
	"rolloff/sweep/event"
)

// halt puts the generator in its inert state with its own time-out. When
// that fails (the generator is unreachable), a goroutine keeps trying with
// backoff until the output is off, the generator is closed, or
// haltRetryFor has passed: a generator that comes back after an outage
// must not go on driving the DUT.
func (r *Run) halt() {
	err := r.haltOnce()
	if err == nil {
		return
	}
	r.log.Error().Err(err).Msg("generator halt")
	r.emit(event.Event{Type: event.TypeLog, Message: "generator halt failed: " + err.Error() + "; retrying until the output is off"})
	go r.haltRetry()
}

// haltOnce tries Halt once, bounded by haltTimeout (wall time). A Halt
// of an earlier try that timed out and is still running is waited for
// again instead of starting another, so that a generator whose Halt
// hangs holds one goroutine, not one per try.
func (r *Run) haltOnce() error {
	r.mu.Lock()
	done := r.halting
	if done == nil {
		done = make(chan error, 1)
		r.halting = done
		g := r.inst.Generator
		go func() { done <- g.Halt() }()
	}
	r.mu.Unlock()
	t := time.NewTimer(haltTimeout)
	defer t.Stop()
	select {
	case err := <-done:
		r.mu.Lock()
		r.halting = nil
		r.mu.Unlock()
		return err
	case <-t.C:
		return fmt.Errorf("sched: generator halt timed out after %v: %w", haltTimeout, driver.ErrTimeout)
	}
}

// haltRetry retries a failed halt with backoff, on the run's clock (wall
// time).
func (r *Run) haltRetry() {
	deadline := r.clock.Now().Add(haltRetryFor)
	wait := 250 * time.Millisecond
	for tries := 2; r.clock.Now().Before(deadline); tries++ {
		if err := r.clock.Sleep(context.Background(), wait); err != nil {
			return
		}
		err := r.haltOnce()
		if err == nil {
			r.log.Warn().Int("tries", tries).Msg("generator output off after a failed halt")
			return
		}
		if errors.Is(err, driver.ErrClosed) {
			r.log.Warn().Err(err).Msg("generator closed before its output could be switched off")
			return
		}
		wait = min(2*wait, 2*time.Second)
	}
	r.log.Error().Dur("for", haltRetryFor).Msg("gave up switching the generator output off: check it by hand")
}
