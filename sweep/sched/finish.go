package sched

import (
	"context"
	"encoding/json"
	"fmt"

	"rolloff/sweep/event"
)

// finish ends a completed sweep: output off, the caller's finish step
// (Opts.Finish), the result event, the done state.
func (s *sweeper) finish(ctx context.Context) error {
	r := s.r
	if err := s.setOutput(ctx, false, 0); err != nil {
		return err
	}
	if err := r.j.flush(); err != nil {
		return err
	}
	pts, err := r.rec.Points()
	if err != nil {
		return fmt.Errorf("sched: read back points: %w", err)
	}
	var js []byte
	if r.opts.Finish != nil && !r.opts.NoAnalysis {
		js, err = r.opts.Finish(ctx, pts)
		if err != nil {
			r.logEvent("analysis: " + err.Error())
		}
	}
	if js != nil {
		r.emit(event.Event{Type: event.TypeResult, Result: json.RawMessage(js)})
	}
	return r.transition(event.Done, fmt.Sprintf("%d points", len(pts)))
}
