package sched

import (
	"context"
	"errors"
	"fmt"
	"math"

	"rolloff/driver"
	"rolloff/sweep/analysis"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/settle"
)

// pointRun is one attempt at one point: the prediction it starts from,
// the dwell it plans and what its readings have shown so far. Its
// methods are the attempt's phases, in order: predict (and pre-select the
// range or level), step (the output on at the point's frequency),
// planDwell, read (whose reactions to a reading are overRange,
// scoutReading, discriminateReading, modelCheck with extend, and
// converged), assemble and learn. Only the run goroutine touches it.
type pointRun struct {
	s *sweeper
	r *Run

	idx      int
	freqHz   float64
	refined  bool
	predGain float64 // the refinement's interpolated gain, or 0
	attempt  int     // the tries of this point before this one
	tol      float64

	// The prediction: the gain gEst when predicted; the output v1 (Vrms)
	// it puts on the converter (0: unknown); weak when one point of
	// history is all it rests on.
	gEst      float64
	predicted bool
	weak      bool
	v1        float64

	// The step: at tStep (physical s) from the converter's mean square y0
	// (Vrms²), or y0alt when alt (the range change's effect unknown), on
	// a range of time constant tau.
	tStep        float64
	y0, y0alt    float64
	alt          bool
	tau          float64
	dwell        float64
	crit         settle.Criterion
	timeout      float64
	probe        float64 // the hold check's probe, s after the step (≤ 0: none)
	discriminate bool    // the first reading tells what a range change does
	scout        bool    // the first reading tells the range or level needed

	// The readings.
	cv          *settle.Converge
	dcOf        map[float64]float64 // sample time → DC volts
	last        driver.ConverterReading
	recheck     int     // model checks that extended the dwell
	vModel      float64 // the model check's final value, Vrms
	probeV      float64 // the probe's reading, Vrms (0: not taken)
	probeTS     float64
	holdChecked bool
	clipped     bool // a reading overloaded the voltmeter
	over        bool // a reading was over range

	ap *approachRun // the prediction of the settled value (nil: none tried)
}

// reaction is what the read loop does after a reading.
type reaction int

const (
	carryOn   reaction = iota // on to the next check of this reading
	readMore                  // take the next reading
	stopRead                  // the readings are complete
	remeasure                 // the range or level changed: measure again
)

// attempt is one try at a point. again reports that the range or level
// changed and the point must be measured again.
func (s *sweeper) attempt(ctx context.Context, idx int, freqHz float64, refined bool, predGain float64, attempt int) (pt point.Point, again bool, err error) {
	p := &pointRun{s: s, r: s.r, idx: idx, freqHz: freqHz, refined: refined, predGain: predGain, attempt: attempt, tol: s.plan.Settle.Tolerance}
	if err := p.predict(ctx); err != nil {
		return pt, false, err
	}
	if err := p.step(ctx); err != nil {
		return pt, false, err
	}
	if err := p.planDwell(ctx); err != nil {
		return pt, false, err
	}
	if again, err := p.read(ctx); err != nil || again {
		return pt, again, err
	}
	if pt, again, err = p.assemble(ctx); err != nil || again {
		return pt, again, err
	}
	if s.prog.drift {
		pt.Flags = append(pt.Flags, point.FlagDriftCheck)
	}
	p.learn(pt)
	return pt, false, nil
}

// predict predicts the point's gain (the refinement's interpolation, the
// slope of the points so far, or the scout reading of the first point)
// and pre-selects the range or level for it.
func (p *pointRun) predict(ctx context.Context) error {
	s := p.s
	p.gEst, p.predicted = p.predGain, p.predGain > 0
	if !p.predicted {
		p.gEst, p.predicted = s.pred.gain.Predict(p.freqHz)
	}
	if !p.predicted && s.pred.scoutGain > 0 {
		p.gEst, p.predicted = s.pred.scoutGain, true // from this point's first reading
	}
	// An operator is asked for a more sensitive range only on a measured
	// reading, never on a prediction alone: a prediction that overshoots
	// (entering a roll-off) would make them turn the switch twice at one
	// frequency. A less sensitive range is asked for on the prediction,
	// so that the converter is never driven over range.
	downOnPrediction := p.predicted && s.bench.rangeKnown && s.inst.Converter != nil &&
		s.plan.Ranging.Strategy == plan.RangeOperator && s.pickRange(p.gEst*s.bench.ampVrms) < s.bench.rangeIdx
	if p.predicted && p.attempt == 0 && s.bench.rangeKnown && !downOnPrediction {
		v := p.gEst * s.bench.ampVrms
		if _, err := s.guard(ctx, v, p.gEst, p.freqHz, fmt.Sprintf("predicted %.4g Vrms at %s", v, analysis.FormatHz(p.freqHz, 4))); err != nil {
			return err
		}
	}
	return nil
}

// step sets the point's frequency and aperture and switches the output
// on: the converter's input steps at tStep.
func (p *pointRun) step(ctx context.Context) error {
	s, r := p.s, p.r
	if !s.bench.freqSet || s.bench.freqHz != p.freqHz {
		g := s.inst.Generator
		t0 := r.phys()
		if err := r.try(ctx, "generator frequency", func(ctx context.Context) error { return g.SetFrequency(ctx, p.freqHz) }); err != nil {
			return err
		}
		s.bench.freqHz, s.bench.freqSet = p.freqHz, true
		if so, ok := g.(driver.SettlingOutput); ok && so.WaitsAfterSettings() && s.bench.outputOn {
			// The output may have been interrupted until the setting
			// completed: the converter counts it as absent from the
			// command on, so that the dwell covers the recovery.
			s.conv.step(t0, s.tau(), 0)
		}
	}
	if p.predicted {
		p.v1 = p.gEst * s.bench.ampVrms
	}
	s.bench.acExpect = p.v1
	if err := s.configure(ctx, p.freqHz); err != nil {
		return err
	}
	if err := s.setOutput(ctx, true, p.v1); err != nil {
		return err
	}
	p.tStep = r.phys()
	if p.predicted {
		s.conv.step(p.tStep, s.tau(), p.v1*p.v1)
	}
	// The dwell is planned from the converter's state before the step.
	p.y0, p.alt, p.y0alt = s.conv.avg.Y, s.conv.altOn, s.conv.alt
	return nil
}

// dwellS returns the dwell after the step, physical seconds.
func (p *pointRun) dwellS() float64 {
	s, tol := p.s, p.tol
	p.weak = p.predicted && s.pred.gain.Len() < 2 && p.predGain <= 0
	if !p.predicted {
		if tau := s.tau(); tau > 0 {
			// Unknown target: the worst case, from zero or from the state.
			return tau*math.Log(1/(2*tol-tol*tol)) + s.plan.Settle.MinDwellS
		}
		return s.plan.Settle.MinDwellS
	}
	// The prediction's recent error widens the step assumed: were the
	// step at either end of the band, the dwell would be longer; waiting
	// up to τ/2 of it is enough, since from there on the model check sees
	// the step and extends the dwell.
	u := math.Min(0.5, 1.5*s.pred.err(p.predGain > 0))
	if s.trendNoise() < tol/3 {
		// The converge test's trend check sees a step the prediction
		// missed, to a third of the tolerance.
		u = 0
	}
	dwell := s.dwellFor(p.tStep, p.v1)
	wide := math.Max(s.dwellFor(p.tStep, p.v1*(1+u)), s.dwellFor(p.tStep, p.v1*(1-u)))
	dwell = math.Max(dwell, math.Min(wide, s.tau()/2))
	if p.weak {
		// One point of history says nothing of the slope: wait long
		// enough for the model check to see the step.
		dwell = math.Max(dwell, s.tau())
	}
	return dwell
}

// planDwell plans the wait after the step (the dwell, the hold guard, a
// scout or discrimination reading at τ/2) and waits, learning the
// converter's hold schedule meanwhile when it can.
func (p *pointRun) planDwell(ctx context.Context) error {
	s, r := p.s, p.r
	p.dwell = p.dwellS()
	if err := r.transition(event.Settling, fmt.Sprintf("%s: dwell %.3g s", analysis.FormatHz(p.freqHz, 4), p.dwell)); err != nil {
		return err
	}
	p.tau = s.tau()
	tau := p.tau
	readS := s.bench.reading.TimeS(s.meter())
	s.pred.refining = p.predGain > 0
	nb, probe := s.holdGuard(p.tStep, p.dwell, p.v1, p.predicted && !p.weak)
	// The hold guard waits beyond the dwell where a hold that began
	// before the step could still freeze the output: no reading before
	// then can be trusted, predicted or not.
	holdWait := nb > p.dwell
	winS := float64(max(2, s.plan.Settle.Readings)) * readS
	if end := s.holdAhead(p.tStep+nb, p.tStep+nb+winS); end > 0 {
		// A hold of the learnt schedule would cover the window.
		nb = end - p.tStep
	}
	p.crit = settle.Criterion{Tol: p.tol, N: max(2, s.plan.Settle.Readings), NotBeforeS: nb, TauS: tau}
	wake := nb
	if probe > 0 {
		wake = probe - readS
	}
	p.discriminate = p.alt && p.predicted && tau > 0
	if p.discriminate {
		// The first reading after the first range change tells which
		// way the converter's state went: read it at τ/2.
		probe = -1
		wake = math.Min(wake, math.Max(0, tau/2-readS))
	}
	st := s.plan.Ranging.Strategy
	p.scout = !p.predicted && tau > 0 && s.inst.Converter != nil && p.attempt == 0 &&
		(st == plan.RangeRemote || st == plan.RangeOperator || st == plan.RangeLevel)
	if p.scout {
		// No prediction (the first point): a reading at τ/2 already
		// tells the range or level the point needs, a full dwell sooner.
		probe = -1
		wake = math.Min(wake, math.Max(0, s.scoutAtS(tau)-s.singleS()))
	}
	p.probe = probe
	if w := p.startApproach(wake, holdWait); p.ap != nil {
		// Reading the approach from the start: no probe, and the hold is
		// caught by the fit's checks instead of a dwell's readings.
		wake, p.probe = w, -1
	} else if err := s.observeDwell(ctx, p.tStep, p.tStep+wake, p.y0, p.v1, p.predicted); err != nil {
		return err
	}
	if err := r.sleepUntil(ctx, p.tStep+wake); err != nil {
		return err
	}
	if err := r.transition(event.Reading, ""); err != nil {
		return err
	}
	p.cv = settle.NewConverge(p.crit)
	p.timeout = s.plan.Settle.TimeoutS
	if p.timeout <= 0 {
		p.timeout = plan.DefaultTimeoutS
	}
	p.dcOf = map[float64]float64{}
	return nil
}

// read takes readings until they converge, time out or show that the
// range or level must change (again).
func (p *pointRun) read(ctx context.Context) (again bool, err error) {
	s, r := p.s, p.r
	for {
		if err := r.pausedErr(ctx); err != nil {
			return false, err
		}
		t0 := r.phys()
		read := s.readOnce
		if p.scout {
			read = s.readSingle // its time must be known to invert the response
		}
		v, err := read(ctx)
		t1 := r.phys()
		if err != nil && (errors.Is(err, driver.ErrOverload) || errors.Is(err, driver.ErrNegativeOverload)) {
			p.clipped = true
			p.last = driver.ConverterReading{Vrms: math.NaN(), FractionFS: math.NaN(), Status: driver.OverRange}
		} else if err != nil {
			return false, err
		} else if p.last, err = s.scaleReading(v); err != nil {
			return false, err
		}
		ts := (t0+t1)/2 - p.tStep
		var next reaction
		if p.ap.active() {
			next, err = p.approachReading(ctx, ts, t1-t0, v, t1)
		} else if p.last.Status == driver.OverRange {
			next, err = p.overRange(ctx, ts, v)
		} else {
			p.dcOf[ts] = v
			next, err = p.react(ctx, ts, t1)
		}
		switch {
		case err != nil:
			return false, err
		case next == remeasure:
			return true, nil
		case next == stopRead:
			return false, nil
		}
	}
}

// react runs the checks of an in-range reading taken ts after the step
// (ending at t1, physical s).
func (p *pointRun) react(ctx context.Context, ts, t1 float64) (reaction, error) {
	if p.scout && p.last.Vrms > 0 {
		if next, err := p.scoutReading(ctx, ts); err != nil || next != carryOn {
			return next, err
		}
	}
	if p.discriminate && p.last.Vrms > 0 {
		if next, err := p.discriminateReading(ctx, ts); err != nil || next != carryOn {
			return next, err
		}
	}
	isProbe := p.probe > 0 && p.probeV == 0
	if isProbe {
		p.probeV, p.probeTS = p.last.Vrms, ts
	}
	// Long enough after the step, the model check is robust; before that
	// it is used once the readings are seen to move.
	if ts >= p.tau/2 {
		if need, wait := p.modelCheck(ts, p.last.Vrms); wait {
			return readMore, p.extend(ctx, ts, p.last.Vrms, need)
		}
	}
	if isProbe && ts < p.crit.NotBeforeS {
		// The probe is kept for the hold check; on to the window.
		return readMore, p.r.sleepUntil(ctx, p.tStep+p.crit.NotBeforeS)
	}
	if p.cv.Add(settle.Sample{TS: ts, V: p.last.Vrms}) {
		return p.converged(ctx, ts)
	}
	if p.cv.Moving() && ts < p.tau/2 {
		if need, wait := p.modelCheck(ts, p.last.Vrms); wait {
			return readMore, p.extend(ctx, ts, p.last.Vrms, need)
		}
	}
	if t1-p.tStep > p.timeout {
		return stopRead, nil
	}
	return readMore, nil
}

// overRange reacts to an over-range reading (v, taken ts after the step):
// never leave the converter overloaded.
func (p *pointRun) overRange(ctx context.Context, ts, v float64) (reaction, error) {
	s := p.s
	p.over = true
	vEst := p.last.Vrms
	sat := false
	if s.inst.Converter == nil {
		if up, err := s.acOverload(ctx, p.freqHz); err != nil || up {
			return remeasure, err
		}
	} else if sat = s.saturated(p.last, p.clipped); sat {
		vEst = p.satBound(ts)
	}
	if s.inst.Converter != nil && s.plan.Ranging.Strategy != plan.RangeFixed {
		var changed bool
		var err error
		if sat {
			cause := ""
			if p.clipped {
				cause = "voltmeter overload"
			}
			changed, err = s.guardBound(ctx, vEst, false, p.freqHz, cause)
		} else {
			changed, err = s.guard(ctx, vEst, vEst/s.bench.ampVrms, p.freqHz, fmt.Sprintf("over-range at %s", analysis.FormatHz(p.freqHz, 4)))
		}
		if err != nil {
			return stopRead, err
		}
		if changed {
			return remeasure, nil
		}
	}
	// Fixed strategy, or nothing left to change: output off, flag, move
	// on.
	if err := s.setOutput(ctx, false, 0); err != nil {
		return stopRead, err
	}
	if !p.clipped {
		p.cv.Add(settle.Sample{TS: ts, V: p.last.Vrms})
		p.dcOf[ts] = v
	}
	return stopRead, nil
}

// scoutReading uses the first point's first reading: the final value, by
// the first-order response from the state before the step, tells the
// range or level the point needs.
func (p *pointRun) scoutReading(ctx context.Context, ts float64) (reaction, error) {
	s := p.s
	p.scout = false
	if y1 := settle.StepTarget(p.tau, p.y0, ts, p.last.Vrms*p.last.Vrms); y1 > 0 {
		vEst := math.Sqrt(y1)
		s.pred.scoutGain = vEst / s.bench.ampVrms
		var changed bool
		var err error
		if underFloor(p.last.FractionFS) {
			changed, err = s.guardBound(ctx, vEst, true, p.freqHz, "")
		} else {
			changed, err = s.guard(ctx, vEst, vEst/s.bench.ampVrms, p.freqHz, fmt.Sprintf("first reading %.4g Vrms at %s", vEst, analysis.FormatHz(p.freqHz, 4)))
		}
		if err != nil {
			return stopRead, err
		}
		if changed {
			return remeasure, nil
		}
	}
	if ts < p.crit.NotBeforeS {
		return readMore, p.r.sleepUntil(ctx, p.tStep+p.crit.NotBeforeS)
	}
	return carryOn, nil
}

// discriminateReading uses the first reading after the first range
// change: which of the two assumptions about the converter's state (its
// mean square continuous in volts, or in fraction of full scale) it
// follows, by four times less error.
func (p *pointRun) discriminateReading(ctx context.Context, ts float64) (reaction, error) {
	s, r := p.s, p.r
	p.discriminate = false
	y1 := p.v1 * p.v1
	rA := math.Sqrt(math.Max(0, settle.Averager{Y: p.y0, U: y1}.At(ts, p.tau)))
	rB := math.Sqrt(math.Max(0, settle.Averager{Y: p.y0alt, U: y1}.At(ts, p.tau)))
	dA, dB := math.Abs(p.last.Vrms-rA), math.Abs(p.last.Vrms-rB)
	switch {
	case dA < dB/4:
		s.conv.rangeModel = rangeByInput
		r.logEvent("range changes keep the converter's mean square in volts")
	case dB < dA/4:
		s.conv.rangeModel = rangeByFraction
		r.logEvent("range changes keep the converter's state as a fraction of full scale")
		p.y0 = p.y0alt
	}
	if s.conv.rangeModel == rangeUnknown {
		return carryOn, nil
	}
	p.alt, s.conv.altOn = false, false
	if need := settle.DwellS(p.tau, math.Sqrt(p.y0), p.v1, p.tol) + s.plan.Settle.MinDwellS; need > ts {
		p.crit.NotBeforeS = need
	} else {
		p.crit.NotBeforeS = ts
	}
	p.cv = settle.NewConverge(p.crit)
	return readMore, r.sleepUntil(ctx, p.tStep+p.crit.NotBeforeS)
}

// modelCheck checks the reading vrms, ts after the step, against the
// first-order model from the known state before the step: the target it
// is heading for, and the time it needs to come within the tolerance of
// it. It reports whether the point must wait longer, until needS.
func (p *pointRun) modelCheck(ts, vrms float64) (needS float64, wait bool) {
	tau, tol := p.tau, p.tol
	if tau <= 0 || p.alt || p.recheck >= 4 || !(vrms > 0) || !(ts > 0) {
		return 0, false
	}
	yr := vrms * vrms
	y1 := settle.StepTarget(tau, p.y0, ts, yr)
	if !(y1 > 0) || math.Abs(yr-y1) <= 2*tol*y1 {
		return 0, false
	}
	need := settle.DwellS(tau, math.Sqrt(p.y0), math.Sqrt(y1), tol) + p.s.plan.Settle.MinDwellS
	// Only ever a longer wait: a reading frozen by a hold makes the step
	// look smaller than it is.
	if need <= ts || need <= p.crit.NotBeforeS || need >= p.timeout {
		return 0, false
	}
	p.recheck++
	p.vModel = math.Sqrt(y1)
	return need, true
}

// extend moves the window to need after a model check (the reading vrms
// at ts), with a new probe for the hold check when there is time for one,
// and waits.
func (p *pointRun) extend(ctx context.Context, ts, vrms, need float64) error {
	s := p.s
	p.crit.NotBeforeS, _ = s.holdGuard(p.tStep, need, p.v1, true)
	p.cv = settle.NewConverge(p.crit)
	wakeAt := p.crit.NotBeforeS
	if s.inst.HoldS > 0 {
		readS := s.bench.reading.TimeS(s.meter())
		if pr := need - p.tau*math.Log(1.5); pr-readS > ts {
			p.probe, p.probeV = pr, 0
			wakeAt = pr - readS
		} else if p.probeV == 0 {
			p.probe, p.probeV, p.probeTS = ts, vrms, ts
		}
	}
	return p.r.sleepUntil(ctx, p.tStep+wakeAt)
}

// converged checks a converged window (its last reading at ts) against
// the converter's output hold before accepting it.
func (p *pointRun) converged(ctx context.Context, ts float64) (reaction, error) {
	s, r := p.s, p.r
	w := p.cv.Window()
	wMean, _ := settle.Stats(w)
	readS := s.bench.reading.TimeS(s.meter())
	// The motion expected between the probe and the window, by the
	// prediction and by the model check's estimate: a probe frozen by a
	// hold fools the estimate, not the prediction.
	vm := []float64{p.v1, p.vModel}
	if !p.predicted {
		vm[0] = wMean
	}
	suspect := false
	for _, v := range vm {
		suspect = suspect || holdSuspect(p.tau, p.y0, v, p.probeTS, p.probeV, w[0].TS, wMean, p.tol)
	}
	if p.probeV > 0 && !p.holdChecked && suspect {
		p.holdChecked = true
		r.logEvent(fmt.Sprintf("%s: readings unchanged since the probe: converter output hold; reading again after it", analysis.FormatHz(p.freqHz, 4)))
		p.crit.NotBeforeS = p.probeTS + s.inst.HoldS + readS
		p.cv = settle.NewConverge(p.crit)
		return readMore, r.sleepUntil(ctx, p.tStep+p.crit.NotBeforeS)
	}
	if end := s.holdAhead(p.tStep+w[0].TS-readS, p.tStep+ts); end > 0 && !p.holdChecked {
		// The window slipped into a hold of the learnt schedule.
		p.holdChecked = true
		p.crit.NotBeforeS = end - p.tStep
		p.cv = settle.NewConverge(p.crit)
		return readMore, r.sleepUntil(ctx, end)
	}
	return stopRead, nil
}

// assemble makes the point from the accepted window, reads Vin, and flags
// it; again reports that an under-range window changed the range or
// level and the point must be measured again.
func (p *pointRun) assemble(ctx context.Context) (pt point.Point, again bool, err error) {
	s, r := p.s, p.r
	r.log.Debug().Float64("freq_hz", p.freqHz).Float64("dwell_s", p.dwell).Float64("not_before_s", p.crit.NotBeforeS).
		Int("samples", len(p.cv.Samples())).Int("rechecks", p.recheck).Bool("converged", p.cv.Converged()).
		Float64("t_s", r.phys()-p.tStep).Float64("aperture_s", s.bench.reading.ApertureS).Int("average", s.bench.reading.Average).
		Bool("predicted", p.predicted).Float64("tau_s", p.tau).Msg("point timing")
	win := p.cv.Window()
	var mean, stdRel, dcMean, settleS float64
	predicted := p.ap.accepted()
	nReadings := len(win)
	if predicted {
		f := p.ap.fit
		mean, stdRel = math.Sqrt(f.MInf), f.URel()
		w := s.inst.Converter.Window()
		dcMean = mean / s.ranges()[s.bench.rangeIdx].FullScaleVrms * w.DCFullScaleV
		settleS = p.ap.tS[len(p.ap.tS)-1]
		nReadings = len(p.ap.tS)
	} else if len(win) > 0 {
		mean, stdRel = settle.Stats(win)
		for _, smp := range win {
			dcMean += p.dcOf[smp.TS]
		}
		dcMean /= float64(len(win))
		settleS = win[len(win)-1].TS
	} else {
		// Only overloaded readings: the output is at least the over-range
		// threshold; record that bound, flagged.
		w := s.inst.Converter.Window()
		dcMean = w.DCFullScaleV * w.OverFraction
		mean = s.ranges()[s.bench.rangeIdx].FullScaleVrms * w.OverFraction
		settleS = r.phys() - p.tStep
	}
	vin := s.bench.ampVrms
	if s.inst.VinMeter != nil && !p.over && s.bench.outputOn {
		if vin, err = s.readVin(ctx); err != nil {
			return pt, false, err
		}
	}
	pt = point.Point{
		Index:    p.idx,
		FreqHz:   p.freqHz,
		VinVrms:  vin,
		VoutVrms: mean,
		GainDB:   20 * math.Log10(mean/vin),
		DCVolts:  dcMean,
		Readings: nReadings,
		StdRel:   stdRel,
		SettleS:  settleS,
		Time:     r.clock.Now(),
	}
	if s.inst.Converter != nil {
		pt.RippleRel = s.bench.reading.ResidualRel
	}
	if predicted {
		// What the prediction leaves: its expanded uncertainty.
		r := math.Min(p.tol, 2*stdRel)
		pt.SettleResidualRel = &r
		pt.TauS = p.ap.fit.TauS
	} else if r, ok := p.settleResidual(win, mean); ok {
		pt.SettleResidualRel = &r
	}
	pt.Settle, pt.SettleWhy = p.approachNote()
	if p.refined {
		pt.Flags = append(pt.Flags, point.FlagRefined)
	}
	if p.clipped {
		pt.Flags = append(pt.Flags, point.FlagClipped)
	}
	if s.inst.Converter != nil && s.inst.DCVoltmeter != nil {
		if again, err := p.converterFlags(ctx, &pt, dcMean); err != nil || again {
			return pt, again, err
		}
	}
	if !p.cv.Converged() && !p.over && !predicted {
		pt.Flags = append(pt.Flags, point.FlagUnsettled)
	}
	return pt, false, nil
}

// tauMargin is how much longer than stated a converter's time constant
// is taken when bounding what is left of an approach.
const tauMargin = 1.2

// settleResidual bounds the relative offset left in the mean of the
// window win (the readings accepted, mean Vrms) by the converter's
// approach: the first-order approach from the converter's modelled state
// before the step (both states when the range change's effect was
// unknown) to the mean, with the time constant tauMargin times the
// stated one, averaged over the window's readings and capped at the
// settle tolerance. ok is false without a converter model or readings.
func (p *pointRun) settleResidual(win []settle.Sample, mean float64) (float64, bool) {
	if !(p.tau > 0) || len(win) == 0 || !(mean > 0) || !p.cv.Converged() || p.over || p.clipped {
		return 0, false
	}
	starts := []float64{p.y0}
	if p.alt {
		starts = append(starts, p.y0alt)
	}
	worst := 0.0
	for _, y0 := range starts {
		var sum float64
		for _, smp := range win {
			sum += settle.Residual(tauMargin*p.tau, math.Sqrt(math.Max(0, y0)), mean, smp.TS)
		}
		worst = math.Max(worst, sum/float64(len(win)))
	}
	return math.Min(worst, p.tol), true
}

// converterFlags records the range and the converter's window status of
// pt (the mean DC output dcMean), and its accuracy specifications; again
// reports that an under-range window changed the range or level.
func (p *pointRun) converterFlags(ctx context.Context, pt *point.Point, dcMean float64) (again bool, err error) {
	s, r := p.s, p.r
	rg := s.ranges()[s.bench.rangeIdx]
	pt.RangeIndex, pt.Range, pt.RangeFSVrms = s.bench.rangeIdx, rg.Name, rg.FullScaleVrms
	status := driver.OverRange
	if !p.over {
		cr, err := s.inst.Converter.Scale(s.bench.rangeIdx, dcMean)
		if err != nil {
			return false, err
		}
		pt.FractionFS = cr.FractionFS
		status = cr.Status
	} else {
		pt.FractionFS = dcMean / s.inst.Converter.Window().DCFullScaleV
	}
	mean := pt.VoutVrms
	switch status {
	case driver.UnderRange:
		if p.cv.Converged() && mean > 0 {
			why := fmt.Sprintf("under-range at %s", analysis.FormatHz(p.freqHz, 4))
			var changed bool
			if underFloor(pt.FractionFS) {
				changed, err = s.guardBound(ctx, mean, true, p.freqHz, "")
			} else {
				changed, err = s.guard(ctx, mean, mean/s.bench.ampVrms, p.freqHz, why)
			}
			if err != nil {
				return false, err
			}
			if changed {
				s.conv.rest(r.phys(), mean*mean)
				return true, nil
			}
		}
		pt.Flags = append(pt.Flags, point.FlagUnderRange)
	case driver.OverRange:
		pt.Flags = append(pt.Flags, point.FlagOverRange)
	}
	if w := s.inst.Converter.Window(); w.MaxFreqHz > 0 && p.freqHz > w.MaxFreqHz {
		pt.Flags = append(pt.Flags, point.FlagBeyondBand)
	}
	if as, ok := s.inst.Converter.(driver.AccuracySpec); ok {
		if rel, ok := as.AccuracyRel(s.bench.rangeIdx, p.freqHz); ok {
			pt.ConvAccRel = rel
		}
	}
	if ds, ok := s.inst.DCVoltmeter.(driver.DCAccuracySpec); ok {
		pt.DCAccV = ds.DCAccuracyV(dcMean, s.bench.dcCfg.RangeV)
	}
	return false, nil
}

// learn updates the converter model, the gain predictor, its error
// history and the readings' noise from the measured point.
func (p *pointRun) learn(pt point.Point) {
	s := p.s
	mean := pt.VoutVrms
	if !(mean > 0) || !s.bench.outputOn {
		return
	}
	predicted := p.ap.accepted()
	if predicted {
		p.learnApproach()
	} else {
		// The converter model now starts from what was measured.
		s.conv.rest(p.r.phys(), mean*mean)
		s.conv.altOn = false
	}
	if pt.Excluded() {
		return
	}
	if p.predicted && p.v1 > 0 {
		s.pred.noteError(p.predGain > 0, math.Abs(mean/p.v1-1))
	}
	s.pred.gain.Add(p.freqHz, mean/s.bench.ampVrms)
	s.pred.scoutGain = 0
	if pt.Readings >= 2 && !predicted {
		s.pred.noteNoise(pt.StdRel * math.Sqrt(float64(pt.Readings)))
	}
}
