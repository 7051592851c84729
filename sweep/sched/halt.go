package sched

import (
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

// haltOnce tries Halt once, bounded by haltTimeout.
func (r *Run) haltOnce() error {
	done := make(chan error, 1)
	go func() { done <- r.inst.Generator.Halt() }()
	select {
	case err := <-done:
		return err
	case <-time.After(haltTimeout):
		return fmt.Errorf("sched: generator halt timed out after %v: %w", haltTimeout, driver.ErrTimeout)
	}
}

// haltRetry retries a failed halt with backoff (wall time).
func (r *Run) haltRetry() {
	deadline := time.Now().Add(haltRetryFor)
	wait := 250 * time.Millisecond
	for tries := 2; time.Now().Before(deadline); tries++ {
		time.Sleep(wait)
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
