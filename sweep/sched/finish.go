package sched

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"

	"rolloff/sweep/analysis"
	"rolloff/sweep/event"
	"rolloff/sweep/point"
)

// finish ends a completed sweep: output off, the analysis and exports
// into the run directory, the result event, the done state.
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
	switch {
	case r.opts.Finish != nil:
		js, err = r.opts.Finish(ctx, pts)
		if err != nil {
			r.logEvent("analysis: " + err.Error())
		}
	case !r.opts.NoAnalysis:
		js, err = s.analyze(pts)
		if err != nil {
			r.logEvent("analysis: " + err.Error())
		}
	}
	if js != nil {
		r.emit(event.Event{Type: event.TypeResult, Result: json.RawMessage(js)})
	}
	return r.transition(event.Done, fmt.Sprintf("%d points", len(pts)))
}

// analyze runs the analysis with the plan's corner level and reference and
// writes the exports beside the run's files.
func (s *sweeper) analyze(pts []point.Point) ([]byte, error) {
	res, err := analysis.Analyze(pts, analysis.Options{LevelDB: s.plan.Refine.LevelDB, RefHz: s.plan.ReferenceHz, Through: s.r.opts.Through, Mask: s.planMask()})
	defer s.writeReport(pts, res, err)
	if err != nil {
		// The points are still exported, without figures.
		if xerr := s.export(pts, nil); xerr != nil {
			return nil, errors.Join(err, xerr)
		}
		return nil, err
	}
	if err := s.export(pts, res); err != nil {
		return nil, err
	}
	return json.Marshal(res)
}
