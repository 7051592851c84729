package sched

import (
	"errors"
	"fmt"

	"rolloff/sweep/event"
)

// ErrIllegalTransition is returned for a state change the run's state
// machine does not allow.
var ErrIllegalTransition = errors.New("sched: illegal state transition")

// transitions lists, for each state, the states it may move to. The empty
// state is the machine before its first transition.
//
//	preparing → settling | waiting-for-operator | paused | done | aborted | failed | interrupted
//	settling  → reading | settling | waiting-for-operator | paused | aborted | failed | interrupted
//	reading   → settling | waiting-for-operator | paused | done | aborted | failed | interrupted
//	paused    → settling | preparing | aborted | failed | interrupted
//	waiting-for-operator → settling | paused | aborted | failed | interrupted
//	done, aborted, failed, interrupted: final.
//
// "interrupted" is the end of a run stopped by its context (a signal or a
// daemon shutdown): unlike "aborted" it is meant to be resumed.
var transitions = map[event.State][]event.State{
	"":                    {event.Preparing},
	event.Preparing:       {event.Settling, event.WaitingOperator, event.Paused, event.Done, event.Aborted, event.Failed, event.Interrupted},
	event.Settling:        {event.Reading, event.Settling, event.WaitingOperator, event.Paused, event.Aborted, event.Failed, event.Interrupted},
	event.Reading:         {event.Settling, event.WaitingOperator, event.Paused, event.Done, event.Aborted, event.Failed, event.Interrupted},
	event.Paused:          {event.Settling, event.Preparing, event.Aborted, event.Failed, event.Interrupted},
	event.WaitingOperator: {event.Settling, event.Paused, event.Aborted, event.Failed, event.Interrupted},
}

// Terminal reports whether s ends a run for the scheduler: done, aborted,
// failed or interrupted.
func Terminal(s event.State) bool { return s.Ended() }

// machine is the run's state, changed only through to.
type machine struct {
	state event.State
}

// canMove reports whether from → to is allowed.
func canMove(from, to event.State) bool {
	for _, s := range transitions[from] {
		if s == to {
			return true
		}
	}
	return false
}

// to moves the machine to state s, or refuses with ErrIllegalTransition.
func (m *machine) to(s event.State) error {
	if !canMove(m.state, s) {
		return fmt.Errorf("%w: %q to %q", ErrIllegalTransition, m.state, s)
	}
	m.state = s
	return nil
}
