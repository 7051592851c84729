package sched

import (
	"errors"
	"fmt"

	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/store"
)

// LoadThrough returns the points of the plan's normalization ("through")
// run from st, or nil when the plan names none. The run must exist, be
// done and hold points; otherwise the error is a *plan.FieldError naming
// normalize.through_run, so that a plan is refused before anything is
// switched on.
func LoadThrough(st *store.Store, p *plan.Plan) ([]point.Point, error) {
	id := p.Normalize.ThroughRun
	if id == "" {
		return nil, nil
	}
	bad := func(why string) error {
		return &plan.FieldError{Field: "normalize.through_run", Value: fmt.Sprintf("%q", id), Allowed: why}
	}
	if err := store.ValidID(id); err != nil {
		return nil, bad("not a run id: " + err.Error())
	}
	r, err := st.OpenRun(id)
	if err != nil {
		if errors.Is(err, store.ErrNotFound) {
			return nil, bad("no such run in the run store")
		}
		return nil, bad(err.Error())
	}
	defer r.Close()
	if s := r.Meta().State; s != event.Done {
		return nil, bad(fmt.Sprintf("the through run is %s; only a done run can normalize", s))
	}
	pts, err := r.Points()
	if err != nil {
		return nil, bad(err.Error())
	}
	if len(pts) < 2 {
		return nil, bad("the through run has fewer than 2 points")
	}
	return pts, nil
}
