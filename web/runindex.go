package web

import (
	"context"
	"encoding/json"
	"time"

	"rolloff/sweep/plan"
	"rolloff/sweep/queue"
	"rolloff/sweep/store"
)

// indexSaveEvery is how often, at most, the daemon writes the store's
// run index while runs change; it is written on shutdown too, and a run
// changed after the last write is found again from its directory.
const indexSaveEvery = 5 * time.Minute

// openIndex opens the store's run index; without one (it cannot be
// read or made) the store is listed whole, as before.
func (g *bridge) openIndex() {
	x, err := g.st.OpenIndex()
	if err != nil {
		g.log.Warn().Err(err).Msg("no run index; the run store is listed whole")
		return
	}
	g.idx, g.idxSaved = x, time.Now()
	// What the opening repaired is written meanwhile, so that the next
	// start finds it.
	go func() {
		if err := x.Save(); err != nil {
			g.log.Warn().Err(err).Msg("run index not saved")
		}
	}()
}

var _ queue.ChangeLister = (*bridge)(nil)

// ListChanged implements queue.ChangeLister with the store's index: the
// runs whose summary changed since the last call.
func (g *bridge) ListChanged(ctx context.Context) ([]queue.Stored, error) {
	if g.idx == nil {
		return g.List(ctx)
	}
	sums, err := g.idx.Refresh()
	if err != nil {
		return nil, err
	}
	g.mu.Lock()
	for id := range g.unseen {
		if s, ok := g.idx.Get(id); ok {
			sums = append(sums, s)
		}
	}
	g.unseen = nil
	g.mu.Unlock()
	g.saveIndex(false)
	return g.stored(sums), nil
}

// Unseen asks for run id in the next ListChanged again: the queue could
// not take it this time.
func (g *bridge) Unseen(id string) {
	g.mu.Lock()
	if g.unseen == nil {
		g.unseen = map[string]bool{}
	}
	g.unseen[id] = true
	g.mu.Unlock()
}

// saveIndex writes the index when it changed, at most every
// indexSaveEvery unless now is set.
func (g *bridge) saveIndex(now bool) {
	if g.idx == nil {
		return
	}
	g.mu.Lock()
	due := now || time.Since(g.idxSaved) >= indexSaveEvery
	if due {
		g.idxSaved = time.Now()
	}
	g.mu.Unlock()
	if due {
		if err := g.idx.Save(); err != nil {
			g.log.Warn().Err(err).Msg("run index not saved")
		}
	}
}

// storedOf is a run of the store as the queue lists it: the plan as far
// as the summary tells it, the result as far as the figures do.
func storedOf(s store.Summary) queue.Stored {
	st := queue.Stored{ID: s.ID, Name: s.Name, State: s.State, Created: s.Created, Points: s.Points}
	st.Plan = &plan.Plan{Name: s.Name, ReferenceHz: s.Plan.ReferenceHz, Unit: s.Plan.Unit, Batch: s.Plan.Batch,
		Frequencies: plan.Frequencies{Spacing: s.Plan.Spacing, StartHz: s.Plan.StartHz, StopHz: s.Plan.StopHz},
		Level:       plan.Level{Vrms: s.Plan.Vrms}, Ranging: plan.Ranging{Strategy: s.Plan.Strategy},
		Refine: plan.Refine{Enabled: s.Plan.Refine}}
	switch {
	case s.Figures != nil:
		st.Result, _ = json.Marshal(s.Figures)
	case s.LowHz != nil || s.HighHz != nil:
		st.Result, _ = json.Marshal(map[string]*float64{"low_hz": s.LowHz, "high_hz": s.HighHz})
	}
	return st
}
