package sched

import (
	"context"

	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/store"
)

// Start begins measuring plan p on the instruments into run, which must be
// owned (locked) by the caller, and returns at once with the run in the
// preparing state. The run ends when the plan is measured (done), on
// Abort (aborted), on a failure past the retry budget (failed), or when
// ctx is cancelled (interrupted, resumable): in every case with the
// generator output off. With opts.Resume it continues after the points
// already stored in run. A done run ends with opts.Finish (the analysis
// and exports: see package sweep/sched/finish).
func Start(ctx context.Context, inst Instruments, p *plan.Plan, run *store.Run, opts Opts) *Run {
	return start(ctx, inst, p, run, run.ID(), opts)
}

// start begins a run recording into rec. The run is in the preparing
// state when start returns.
func start(ctx context.Context, inst Instruments, p *plan.Plan, rec recorder, runID string, opts Opts) *Run {
	if opts.Clock == nil {
		opts.Clock = WallClock
	}
	r := &Run{
		inst:  inst,
		plan:  p,
		rec:   rec,
		opts:  opts,
		clock: opts.Clock,
		log:   inst.Log.With().Str("run", runID).Logger(),
		runID: runID,
		done:  make(chan struct{}),
		subs:  map[int]chan event.Event{},
	}
	r.pauseCtx, r.pauseCancel = context.WithCancel(context.Background())
	r.j = newJournal(r)
	rctx, cancel := context.WithCancelCause(ctx)
	r.cancel = cancel
	r.t0 = r.clock.Now()
	if err := r.transition(event.Preparing, "run started"); err != nil {
		r.log.Error().Err(err).Msg("initial state")
	}
	go r.main(rctx)
	return r
}
