package sched

import (
	"context"
	"errors"
	"fmt"
	"math"

	"rolloff/driver"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
)

// Range and level guarding.

// switchRange selects range i remotely, with the output off.
func (s *sweeper) switchRange(ctx context.Context, i int, why string) error {
	if s.bench.rangeKnown && s.bench.rangeIdx == i {
		return nil
	}
	sw := s.inst.Converter.(driver.RangeSwitcher)
	if err := s.setOutput(ctx, false, 0); err != nil {
		return err
	}
	from := s.rangeName(s.bench.rangeIdx)
	if err := s.r.try(ctx, "converter range", func(ctx context.Context) error { return sw.SwitchRange(ctx, i) }); err != nil {
		return err
	}
	s.noteRange(i)
	if from == "" {
		s.r.logEvent(fmt.Sprintf("range %s (%s)", s.rangeName(i), why))
	} else {
		s.r.logEvent(fmt.Sprintf("range %s → %s (%s)", from, s.rangeName(i), why))
	}
	return nil
}

// noteRange records a range change in the model and the status.
func (s *sweeper) noteRange(i int) {
	if s.bench.rangeKnown && s.bench.rangeIdx != i {
		rs := s.ranges()
		s.conv.rangeChanged(s.r.phys(), s.tau(), rs[i].FullScaleVrms/rs[s.bench.rangeIdx].FullScaleVrms)
	}
	s.bench.rangeIdx, s.bench.rangeKnown = i, true
	s.r.mu.Lock()
	s.r.status.RangeIndex, s.r.status.Range = i, s.rangeName(i)
	s.r.mu.Unlock()
}

// askRange asks the operator to select range i (output off) and waits for
// the answer.
func (s *sweeper) askRange(ctx context.Context, i int, why string, freqHz float64) error {
	r := s.r
	if err := s.setOutput(ctx, false, 0); err != nil {
		return err
	}
	r.mu.Lock()
	r.promptID++
	p := event.Prompt{ID: r.promptID, RangeIndex: i, Range: s.rangeName(i), Reason: why, FreqHz: freqHz}
	if s.bench.rangeKnown {
		p.FromRange = s.rangeName(s.bench.rangeIdx)
	}
	r.prompt = &p
	r.answer = make(chan int, 1)
	ans := r.answer
	r.mu.Unlock()
	if err := r.transition(event.WaitingOperator, fmt.Sprintf("select range %s: %s", p.Range, why)); err != nil {
		return err
	}
	r.emit(event.Event{Type: event.TypePrompt, Prompt: &p, Message: why})
	octx, ocancel := context.WithCancel(ctx)
	defer ocancel()
	opErr := make(chan error, 1)
	if op := r.opts.Operator; op != nil {
		go func() {
			idx, err := op(octx, p)
			if err != nil {
				opErr <- err
				return
			}
			if cerr := r.Confirm(p.ID, idx); cerr != nil && !errors.Is(cerr, ErrNoPrompt) {
				opErr <- cerr
			}
		}()
	}
	var got int
	select {
	case got = <-ans:
	case err := <-opErr:
		return fmt.Errorf("sched: operator prompt %d: %w", p.ID, err)
	case <-ctx.Done():
		return ctx.Err()
	}
	r.mu.Lock()
	r.prompt = nil
	r.mu.Unlock()
	s.noteRange(got)
	msg := fmt.Sprintf("operator selected range %s (prompt %d)", s.rangeName(got), p.ID)
	if got != i {
		msg += fmt.Sprintf(", not the %s asked for", p.Range)
	}
	r.logEvent(msg)
	return nil
}

// pickRange returns the range on which vrms lands in the in-spec window
// with margin, preferring the most sensitive; failing that, the most
// sensitive range on which it is not over-range; failing that, the
// highest range.
func (s *sweeper) pickRange(vrms float64) int {
	rs, w := s.ranges(), s.inst.Converter.Window()
	for _, i := range s.ranks {
		f := vrms / rs[i].FullScaleVrms
		if f >= w.UnderFraction*(1+marginLow) && f <= w.OverFraction*(1-marginHigh) {
			return i
		}
	}
	for _, i := range s.ranks {
		if vrms/rs[i].FullScaleVrms <= w.OverFraction*(1-marginHigh) {
			return i
		}
	}
	return s.ranks[len(s.ranks)-1]
}

// inWindow reports whether vrms lands inside the window on range i with
// the margins.
func (s *sweeper) inWindow(vrms float64, i int) bool {
	rs, w := s.ranges(), s.inst.Converter.Window()
	f := vrms / rs[i].FullScaleVrms
	return f >= w.UnderFraction*(1+marginLow) && f <= w.OverFraction*(1-marginHigh)
}

// levelFor returns the amplitude putting a DUT of gain g in the window on
// the current range (aiming at 70 % of the over threshold), clamped.
func (s *sweeper) levelFor(g float64) float64 {
	w := s.inst.Converter.Window()
	fs := s.ranges()[s.bench.rangeIdx].FullScaleVrms
	target := math.Max(w.UnderFraction*(1+2*marginLow), 0.7*w.OverFraction) * fs
	lo, hi := s.ampBounds()
	return math.Max(lo, math.Min(hi, target/g))
}

// guard acts on a predicted or measured output level vrms before (or
// instead of) accepting a point: it changes the range or the amplitude
// when vrms is outside the window on the current range and the strategy
// allows. It reports whether anything changed.
func (s *sweeper) guard(ctx context.Context, vrms, gainEst, freqHz float64, why string) (bool, error) {
	if s.inst.Converter == nil || !s.bench.rangeKnown || s.inWindow(vrms, s.bench.rangeIdx) {
		return false, nil
	}
	switch s.plan.Ranging.Strategy {
	case plan.RangeRemote:
		i := s.pickRange(vrms)
		if i == s.bench.rangeIdx {
			return false, nil
		}
		return true, s.switchRange(ctx, i, why)
	case plan.RangeOperator:
		i := s.pickRange(vrms)
		if i == s.bench.rangeIdx {
			return false, nil
		}
		return true, s.askRange(ctx, i, why, freqHz)
	case plan.RangeLevel:
		if !(gainEst > 0) {
			return false, nil
		}
		a := s.levelFor(gainEst)
		if math.Abs(a-s.bench.ampVrms) <= 1e-9*a {
			return false, nil
		}
		old := s.bench.ampVrms
		if err := s.setAmplitude(ctx, a); err != nil {
			return false, err
		}
		if s.bench.outputOn {
			s.conv.step(s.r.phys(), s.tau(), gainEst*gainEst*a*a)
		}
		s.r.logEvent(fmt.Sprintf("level %.4g → %.4g Vrms (%s)", old, a, why))
		return true, nil
	}
	return false, nil
}
