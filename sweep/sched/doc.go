// Package sched runs a sweep: it steps the generator through a plan,
// waits for the true-RMS converter to settle (the model in sweep/settle),
// reads and scales the DC output, guards the converter's ranges, refines
// the corners, stores every point crash-safely before anyone hears of it,
// and streams the run's events to subscribers.
//
// # States
//
// A run is an explicit state machine over event.State: preparing,
// settling, reading, paused, waiting-for-operator, and the ends done,
// aborted, failed and interrupted (a run stopped by its context, e.g.
// SIGINT, which can be resumed). Every transition is a timestamped event;
// an illegal one is refused with ErrIllegalTransition.
//
// # Safety
//
// The amplitude is set before the generator output is first switched on
// (the output is switched off first, so an unknown earlier amplitude is
// never driven). The output goes off before any range change, while
// paused or waiting for the operator, when a reading is over range on the
// fixed strategy, and whenever the run ends, however it ends (Halt, with
// its own time-out, also on a cancelled context).
//
// # One point
//
//  1. Predict the DUT's output from the previous points (settle.Predictor)
//     and, if it would fall outside the converter's in-spec window,
//     change the range or the level first (strategy permitting).
//  2. Set the frequency; choose the aperture that keeps the 2f ripple
//     under a quarter of the tolerance (settle.ChooseAperture).
//  3. Dwell the model time for the first-order average to come within the
//     tolerance of the predicted value from its present state
//     (settle.DwellS), widened by the recent prediction errors when the
//     readings' noise would hide a missed step from the trend check.
//  4. Read until the readings converge (settle.Converge: spread and trend
//     within the tolerance) or the point times out (flagged unsettled).
//     From τ/2 after the step a model check inverts the first-order
//     response from the known state before the step: if a reading says
//     the step is larger than predicted, the dwell is extended.
//  5. Store the point (the journal fsyncs it), then tell the subscribers.
//
// In the code one attempt at a point is a pointRun, one method per phase
// (predict, step, planDwell, read with its reactions to each reading,
// assemble, learn); the converter model it plans with is convModel on
// settle.Averager.
//
// # The end
//
// A done run ends with the caller's finish step, Opts.Finish (package
// sweep/sched/finish: the analysis and the exports into the run
// directory), whose result JSON becomes the run's result event. The
// scheduler itself links neither the analysis's renderers nor the
// exports.
//
// # The converter's output hold
//
// A converter that freezes its output for HoldS every HoldIntervalS could
// fake convergence with readings taken in one hold. Three defences:
// a probe reading is taken when the model puts the output within 1.5·Tol
// of the new value, and a window that did not move from the probe while
// the model says it must have was frozen: it is read again after the hold
// (holdSuspect). After a small step (no dwell) the readings wait out a
// hold only if the value drifted from the one held since the last settle.
// And the readings taken during dwells (the voltmeter is idle then) learn
// the hold schedule from a frozen stretch; windows are then kept out of
// the later holds altogether (observeDwell, holdAhead). A frozen value
// can still slip through when a hold covers a point whose step the
// prediction missed before the schedule is learnt: the error is then at
// most that point's step.
//
// # Ranges
//
// fixed keeps the range and flags under- and over-range points; an
// over-range reading switches the output off and the point is recorded
// flagged (the converter is never left overloaded; the next point drives
// it again, at the planned level). operator asks (Opts.Operator or
// Confirm) for the range where the reading lands in the window with a
// margin, with the output off; remote switches it (driver.RangeSwitcher);
// level moves the generator amplitude within the plan's bounds and the
// bench's MaxVrms, the gain taken from the actual amplitude. Over-range
// acts at once; under-range after the readings converge; both are
// foreseen from the predicted output where possible. A reading under the
// converter's floor only bounds the output from above, a saturated one
// only from below: the range chosen then is the one on which the output
// is known next (hunt.go), at most two changes from any starting range.
//
// # Meters
//
// A voltmeter without bursts (MaxBurster saying 1) reads single values;
// where the ripple needs an average they are spaced on whole fractions of
// its period (settle.Reading.SpacingS), at least settle.MinFitReadings of
// them, and the ripple is fitted out at the times they were actually taken
// (settle.FitMean), which a loaded host makes late; their query round trip, timed
// when the run starts, is part of every reading's cost. A meter that
// cannot set its integration time (settle.Meter.Fixed) is sent none. An
// AC-reading DMM (no converter) is paced by its own RMS filter
// (ACSettler) and, without autorange, ranged from the expected level
// (ACRanger).
//
// # Faults and resume
//
// Transient instrument errors (driver.Transient) are retried with
// backoff, Opts.Retries times (default 3); the transport reconnects on the
// next write. Every operation retried is idempotent, and a point is
// stored once or not at all. Past the budget the run fails with the cause
// in its events. With Opts.Resume the run continues after the points
// stored, skipping the plan indices measured, Seq continuing.
//
// # Time
//
// Durations are physical seconds (float64, named with an S suffix);
// Instruments.TimeScale (model seconds per wall second on a simulated
// bench) converts them to wall time, which is a time.Duration (the
// clock, Status.ETA and Status.Elapsed). Disk
// writes happen in the journal's goroutine so that an fsync never delays
// the sweep.
//
// # Subscribers
//
// Subscribe returns a channel with a bounded buffer, sent to without
// blocking: a subscriber that falls a whole buffer behind is dropped (its
// channel closed) and may subscribe again and read what it missed from
// the run store. A slow subscriber can never slow the sweep.
package sched
