package sched

import (
	"context"
	"errors"
	"fmt"
	"math"
	"sort"
	"time"

	"rolloff/driver"
	"rolloff/sweep/analysis"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/settle"
)

// haltTimeout bounds the generator's Halt during shutdown (wall time; a
// variable for the tests).
var haltTimeout = 3 * time.Second

// errPaused interrupts a point when a pause was requested.
var errPaused = errors.New("sched: paused")

// Range-window margins: a predicted or chosen reading should land at least
// this far (relative) inside the converter's in-spec window.
const (
	marginLow  = 0.05
	marginHigh = 0.03
	// rippleShare is the part of the tolerance the 2f ripple may use
	// (amplitude): the spread of readings then stays well within Tol.
	rippleShare = 0.25
	// maxAttempts bounds the re-measurements of one point (range or level
	// changes).
	maxAttempts = 8
	// haltRetryFor bounds the retries of a failed halt.
	haltRetryFor = 10 * time.Minute
	// vinReadings bounds the readings of the Vin channel per point.
	vinReadings = 6
)

// main runs the sweep and ends the run, however it ends: the generator
// halted, the final state recorded, the subscribers closed.
func (r *Run) main(ctx context.Context) {
	s := &sweeper{r: r, inst: r.inst, plan: r.plan}
	err := s.run(ctx)
	if !refused(err) { // a refused plan has sent nothing, not even output off
		r.halt()
	}
	var final event.State
	msg := ""
	switch {
	case err == nil:
		final = event.Done
	case errors.Is(context.Cause(ctx), ErrAborted):
		final, err, msg = event.Aborted, ErrAborted, "aborted by request"
	case ctx.Err() != nil:
		final, err = event.Interrupted, fmt.Errorf("sched: run interrupted: %w", context.Cause(ctx))
		msg = err.Error()
	default:
		final, msg = event.Failed, err.Error()
		r.log.Error().Err(err).Msg("run failed")
	}
	if final != event.Done {
		r.mu.Lock()
		r.status.Err = msg
		r.prompt = nil
		r.mu.Unlock()
		if terr := r.transition(final, msg); terr != nil {
			r.log.Error().Err(terr).Msg("final state")
		}
	}
	r.j.stop()
	if jerr := r.j.EventErr(); jerr != nil && err == nil {
		// The run's end could not be stored: the store will find it
		// unfinished, so it is not reported done.
		err = jerr
	}
	r.mu.Lock()
	r.err = err
	r.closed = true
	for id, ch := range r.subs {
		close(ch)
		delete(r.subs, id)
	}
	r.mu.Unlock()
	r.cancel(nil)
	close(r.done)
}

// phys returns the physical seconds since the run started.
func (r *Run) phys() float64 {
	return r.clock.Now().Sub(r.t0).Seconds() * r.scale()
}

func (r *Run) scale() float64 {
	if r.inst.TimeScale > 0 {
		return r.inst.TimeScale
	}
	return 1
}

// wall converts physical seconds to a wall duration.
func (r *Run) wall(physS float64) time.Duration {
	return time.Duration(physS / r.scale() * float64(time.Second))
}

// sleepUntil waits until the physical time tPhys; a pause request
// interrupts it with errPaused.
func (r *Run) sleepUntil(ctx context.Context, tPhys float64) error {
	rem := tPhys - r.phys()
	if rem <= 0 {
		return r.pausedErr(ctx)
	}
	r.mu.Lock()
	pc := r.pauseCtx
	r.mu.Unlock()
	sctx, cancel := context.WithCancel(ctx)
	defer cancel()
	stop := context.AfterFunc(pc, cancel)
	defer stop()
	err := r.clock.Sleep(sctx, r.wall(rem))
	if ctx.Err() != nil {
		return ctx.Err()
	}
	if err != nil || pc.Err() != nil {
		return errPaused
	}
	return nil
}

func (r *Run) pausedErr(ctx context.Context) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	r.mu.Lock()
	defer r.mu.Unlock()
	if r.pauseReq {
		return errPaused
	}
	return nil
}

// try runs an instrument operation, retrying transient errors with
// backoff. Operations passed here are idempotent (a setting sent again, a
// reading taken again), so a retry after a write that may have reached the
// instrument is harmless.
func (r *Run) try(ctx context.Context, what string, f func(ctx context.Context) error) error {
	return Retry(ctx, what, r.opts.Retries, r.opts.RetryBackoff, r.clock.Sleep, func(i, of int, err error) {
		r.logEvent(fmt.Sprintf("%s: %v; retry %d of %d", what, err, i, of))
	}, f)
}

// run is the whole sweep: prepare, the plan's points, the refinement and
// the finish. It returns nil when the run is done.
func (s *sweeper) run(ctx context.Context) error {
	r := s.r
	if err := s.check(); err != nil {
		return err
	}
	freqs, err := s.plan.Freqs()
	if err != nil {
		return fmt.Errorf("sched: plan frequencies: %w", err)
	}
	s.prog.freqs, s.prog.nPlan = freqs, len(freqs)
	measured := map[int]bool{}
	if r.opts.Resume {
		pts, err := r.rec.Points()
		if err != nil {
			return fmt.Errorf("sched: resume: %w", err)
		}
		for _, p := range pts {
			if p.Index < s.prog.nPlan && math.Abs(p.FreqHz-freqs[p.Index].Hz) > 1e-9*freqs[p.Index].Hz {
				return fmt.Errorf("sched: resume: stored point %d at %g Hz is not plan point %d (%g Hz): not the same plan", p.Seq, p.FreqHz, p.Index, freqs[p.Index].Hz)
			}
			measured[p.Index] = true
			s.prog.seq = max(s.prog.seq, p.Seq+1)
		}
		s.prog.pts = pts
		if len(pts) > 0 {
			r.logEvent(fmt.Sprintf("resuming after %d stored points", len(pts)))
		}
	}
	r.mu.Lock()
	r.status.Total = s.prog.nPlan + s.refinedCount() + s.plan.Drift.DriftChecks(s.prog.nPlan)
	r.status.Done = len(s.prog.pts)
	r.mu.Unlock()
	for _, p := range s.sortedPoints() {
		s.pred.gain.Add(p.FreqHz, p.VoutVrms/p.VinVrms)
	}
	if err := s.prepare(ctx); err != nil {
		return err
	}
	every := s.plan.Drift.EveryPoints
	for i, f := range freqs {
		if measured[i] {
			continue
		}
		if err := s.measure(ctx, i, f.Hz, false, 0); err != nil {
			return err
		}
		if every > 0 && (i+1)%every == 0 && i+1 < len(freqs) {
			if err := s.driftCheck(ctx); err != nil {
				return err
			}
		}
	}
	if err := s.refine(ctx); err != nil {
		return err
	}
	if s.plan.Drift.End == plan.DriftOn {
		if err := s.driftCheck(ctx); err != nil {
			return err
		}
	}
	return s.finish(ctx)
}

func (s *sweeper) check() error {
	in := s.inst
	if in.Generator == nil {
		return errors.New("sched: no generator")
	}
	if (in.DCVoltmeter == nil || in.Converter == nil) && in.ACVoltmeter == nil {
		return errors.New("sched: need a DC voltmeter and a converter, or an AC voltmeter")
	}
	if s.plan == nil {
		return errors.New("sched: no plan")
	}
	if err := s.checkPlanFirst(); err != nil {
		return err
	}
	if !(s.plan.Level.Vrms > 0) {
		return fmt.Errorf("sched: plan level.vrms %g: want a positive amplitude", s.plan.Level.Vrms)
	}
	if lim := s.inst.Limits; lim.MaxVrms > 0 && s.plan.Level.Vrms > lim.MaxVrms {
		return fmt.Errorf("sched: plan level.vrms %g V exceeds the bench limit %g V", s.plan.Level.Vrms, lim.MaxVrms)
	}
	if in.Converter != nil && in.DCVoltmeter != nil {
		rs := in.Converter.Ranges()
		if len(rs) == 0 {
			return errors.New("sched: converter has no ranges")
		}
		s.ranks = make([]int, len(rs))
		for i := range rs {
			s.ranks[i] = i
		}
		sort.SliceStable(s.ranks, func(a, b int) bool { return rs[s.ranks[a]].FullScaleVrms < rs[s.ranks[b]].FullScaleVrms })
		st := s.plan.Ranging.Strategy
		if st == plan.RangeRemote {
			if _, ok := in.Converter.(driver.RangeSwitcher); !ok {
				return errors.New("sched: ranging strategy \"remote\" but the converter has no remote range switch")
			}
		}
	}
	return nil
}

// prepare brings the bench to a known safe state: output off, the
// planned amplitude set, the starting range selected.
func (s *sweeper) prepare(ctx context.Context) error {
	r := s.r
	g := s.inst.Generator
	if err := r.try(ctx, "generator output off", func(ctx context.Context) error { return g.SetOutput(ctx, false) }); err != nil {
		return fmt.Errorf("sched: prepare: %w", err)
	}
	s.bench.outputOn = false
	s.conv.rest(r.phys(), 0)
	if err := s.setAmplitude(ctx, s.plan.Level.Vrms); err != nil {
		return fmt.Errorf("sched: prepare: %w", err)
	}
	if s.inst.Converter == nil || s.inst.DCVoltmeter == nil {
		return s.measureLatency(ctx)
	}
	// The starting range.
	start := -1
	if name := s.plan.Ranging.Start; name != "" {
		for i, rg := range s.ranges() {
			if rg.Name == name {
				start = i
			}
		}
		if start < 0 {
			return fmt.Errorf("sched: plan ranging.start %q: the converter has no such range", name)
		}
	}
	last := s.lastPoint()
	switch s.plan.Ranging.Strategy {
	case plan.RangeRemote:
		if start < 0 {
			if last != nil {
				start = last.RangeIndex
			} else {
				start = s.ranks[len(s.ranks)-1] // the highest: safest
			}
		}
		if err := s.switchRange(ctx, start, "starting range"); err != nil {
			return err
		}
	case plan.RangeOperator:
		switch {
		case start >= 0 && r.opts.RangeKnown && r.opts.CurrentRange == start:
			s.bench.rangeIdx, s.bench.rangeKnown = start, true
		case start < 0 && r.opts.RangeKnown:
			s.bench.rangeIdx, s.bench.rangeKnown = r.opts.CurrentRange, true
		default:
			if start < 0 {
				start = s.ranks[len(s.ranks)-1]
				if last != nil {
					start = last.RangeIndex
				}
			}
			if err := s.askRange(ctx, start, "select the starting range", 0); err != nil {
				return err
			}
		}
	default: // fixed, level: the range the converter is on
		_, remote := s.inst.Converter.(driver.RangeSwitcher)
		switch {
		case start >= 0 && remote:
			// The named range, selected once; the strategy keeps it.
			if err := s.switchRange(ctx, start, "starting range"); err != nil {
				return err
			}
		case start >= 0:
			s.bench.rangeIdx = start
		case r.opts.RangeKnown:
			s.bench.rangeIdx = r.opts.CurrentRange
		case last != nil:
			s.bench.rangeIdx = last.RangeIndex
		case len(s.ranges()) == 1:
			s.bench.rangeIdx = 0 // a single-range converter needs no range named
		default:
			return fmt.Errorf("sched: plan ranging.start is empty and the converter's range is unknown: name the range for strategy %q", s.plan.Ranging.Strategy)
		}
		if s.bench.rangeIdx < 0 || s.bench.rangeIdx >= len(s.ranges()) {
			return fmt.Errorf("sched: converter range %d: want 0..%d", s.bench.rangeIdx, len(s.ranges())-1)
		}
		s.bench.rangeKnown = true
	}
	r.mu.Lock()
	r.status.RangeIndex, r.status.Range = s.bench.rangeIdx, s.rangeName(s.bench.rangeIdx)
	r.mu.Unlock()
	return s.measureLatency(ctx)
}

func (s *sweeper) lastPoint() *point.Point {
	if len(s.prog.pts) == 0 {
		return nil
	}
	return &s.prog.pts[len(s.prog.pts)-1]
}

// pause handles a pause request: output off, wait for Resume.
func (s *sweeper) pause(ctx context.Context) error {
	r := s.r
	if err := s.setOutput(ctx, false, 0); err != nil {
		return err
	}
	if err := r.transition(event.Paused, "paused by request"); err != nil {
		return err
	}
	r.mu.Lock()
	ch := r.resumeCh
	r.mu.Unlock()
	select {
	case <-ch:
	case <-ctx.Done():
		return ctx.Err()
	}
	r.mu.Lock()
	r.pauseCtx, r.pauseCancel = context.WithCancel(context.Background())
	r.mu.Unlock()
	r.logEvent("resumed")
	return nil
}

// dwellFor returns the model dwell, physical seconds, for the converter to
// settle from its present state to v1 Vrms (both continuity assumptions
// after a range change), plus the plan's minimum dwell.
func (s *sweeper) dwellFor(t, v1 float64) float64 {
	tol := s.plan.Settle.Tolerance
	tau := s.tau()
	d := 0.0
	if tau > 0 && v1 > 0 {
		y0 := s.conv.at(t, tau)
		d = settle.DwellS(tau, math.Sqrt(y0), v1, tol)
		if s.conv.altOn {
			d = math.Max(d, settle.DwellS(tau, math.Sqrt(math.Max(0, s.conv.alt)), v1, tol))
		}
	}
	return d + s.plan.Settle.MinDwellS
}

// trendNoise returns the offset from the final value that the readings'
// noise can fake in the converge test's trend check (see
// predictor.trendNoise).
func (s *sweeper) trendNoise() float64 {
	n := max(2, s.plan.Settle.Readings)
	return s.pred.trendNoise(s.tau(), float64(n-1)*s.bench.reading.TimeS(s.meter()))
}

// measure measures one point (plan index idx, or a refined point) and
// stores it. predGain, when positive, overrides the slope prediction.
func (s *sweeper) measure(ctx context.Context, idx int, freqHz float64, refined bool, predGain float64) error {
	r := s.r
	r.mu.Lock()
	r.status.FreqHz = freqHz
	r.mu.Unlock()
	tStart := r.phys()
	for attempt := 0; ; attempt++ {
		if attempt >= maxAttempts {
			return fmt.Errorf("sched: point %d at %g Hz: no stable range or level after %d attempts", idx, freqHz, attempt)
		}
		if err := r.pausedErr(ctx); err != nil {
			if errors.Is(err, errPaused) {
				if err := s.pause(ctx); err != nil {
					return err
				}
				continue
			}
			return err
		}
		pt, again, err := s.attempt(ctx, idx, freqHz, refined, predGain, attempt)
		if errors.Is(err, errPaused) {
			if err := s.pause(ctx); err != nil {
				return err
			}
			continue
		}
		if err != nil {
			return err
		}
		if again {
			continue
		}
		// Stored (fsynced) by the journal, then told.
		if err := r.j.Err(); err != nil {
			return err
		}
		pt.Seq = s.prog.seq
		r.j.point(pt)
		s.prog.seq++
		s.prog.pts = append(s.prog.pts, pt)
		s.prog.actSum += r.phys() - tStart
		s.prog.modelSum += s.modelPointS(freqHz)
		informational := len(pt.Flags) == 1 && (pt.Has(point.FlagRefined) || pt.Has(point.FlagDriftCheck))
		if len(pt.Flags) > 0 && !informational {
			r.logEvent(fmt.Sprintf("point %d at %s flagged %v", pt.Seq, analysis.FormatHz(freqHz, 4), pt.Flags))
		}
		s.publishProgress()
		return nil
	}
}

// readVin reads the DUT input on the bench's second channel until two
// consecutive readings agree within the plan's tolerance (the channel's
// own averaging must settle after an output or amplitude change), at most
// vinReadings readings; the last one is used either way.
func (s *sweeper) readVin(ctx context.Context) (float64, error) {
	tol := s.plan.Settle.Tolerance
	prev := math.NaN()
	var v float64
	for i := 0; i < vinReadings; i++ {
		if err := s.r.try(ctx, "Vin reading", func(ctx context.Context) error {
			var err error
			v, err = s.inst.VinMeter.ReadAC(ctx)
			return err
		}); err != nil {
			return 0, err
		}
		if !(v > 0) || math.IsInf(v, 0) {
			return 0, fmt.Errorf("sched: Vin reading %g Vrms: %w", v, driver.ErrMalformed)
		}
		if err := s.checkVin(v); err != nil {
			return 0, err
		}
		if math.Abs(v-prev) <= tol*v {
			break
		}
		prev = v
	}
	return v, nil
}
