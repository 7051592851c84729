package event

import "testing"

// TestEnded checks the predicate every layer uses for "no sweep running
// or due": the three final states and interrupted, nothing else.
func TestEnded(t *testing.T) {
	for _, c := range []struct {
		s            State
		final, ended bool
	}{
		{Queued, false, false}, {Preparing, false, false}, {Settling, false, false},
		{Reading, false, false}, {Paused, false, false}, {WaitingOperator, false, false},
		{Done, true, true}, {Aborted, true, true}, {Failed, true, true},
		{Interrupted, false, true}, {State("unknown"), false, false},
	} {
		if c.s.Final() != c.final || c.s.Ended() != c.ended {
			t.Errorf("%s: Final %v Ended %v, want %v %v", c.s, c.s.Final(), c.s.Ended(), c.final, c.ended)
		}
	}
}
