package sched

import (
	"context"
	"fmt"
	"math"
	"sort"

	"rolloff/driver"
	"rolloff/sweep/analysis"
	"rolloff/sweep/point"
	"rolloff/sweep/settle"
)

// Prediction of a point's settled value from the converter's approach
// (plan key settle.predict): instead of waiting for the converter to
// settle, the point reads it while it approaches and fits the first-order
// approach on the mean square, m(t) = m∞ + b·e^(−t/τ) (settle.FitApproach;
// τ with the prior the run's tauBook gives). It ends on the predicted m∞
// once
//
//   - the fit's expanded uncertainty of the value (k = 2) is inside
//     predictTolFrac of the tolerance,
//   - the last reading agrees with the trajectory the readings before it
//     predicted (within three standard deviations of both),
//   - the residuals are what the readings' noise explains
//     (ApproachFit.Exponential), the fitted τ agrees with a confident
//     learnt one, and the trajectory starts where the converter model put
//     the state at the step (a hold freezes the readings: a flat
//     "approach" from somewhere else),
//   - and the value is inside the converter's window.
//
// Readings outside the window (a transient passing through over-range on
// a more sensitive range), clipped ones and those overlapping a learnt
// hold are not used. When the approach is not one exponential (a second
// pole, a hold, drift), or the readings leave the trajectory twice, or
// the point reaches the time waiting would have read at, the prediction
// is given up and the point waits as without it; its record says why.

// predictTolFrac is the share of the settle tolerance the prediction's
// expanded uncertainty (k = 2) must be within.
const predictTolFrac = 0.25

// deadlineTolFrac is the share of the settle tolerance the prediction's
// expanded uncertainty may take when waiting would end the point anyway
// (on a reading only known to within the tolerance).
const deadlineTolFrac = 0.5

// approachRun is one point's prediction.
type approachRun struct {
	tS, mMS, sig []float64 // the usable readings: s after the step, Vrms², σ of each (Vrms²)
	sigT         []float64 // and the standard uncertainty of each one's time, s
	misses       int       // readings that left the predicted trajectory
	fit          settle.ApproachFit
	ok           bool   // the prediction is accepted
	why          string // why it was given up ("" while on)
	opts         settle.ApproachOpts
	deadlineS    float64 // s after the step: the prediction is given up by then
	// good is set while the last fit (fit) passed every check but
	// perhaps the uncertainty's.
	good bool
}

// active reports whether the prediction is still being tried.
func (a *approachRun) active() bool { return a != nil && !a.ok && a.why == "" }

// accepted reports whether the point ends on the prediction.
func (a *approachRun) accepted() bool { return a != nil && a.ok }

// canPredict reports whether the point may try a prediction: the plan
// allows it, the converter's DC output is read, its time constant is
// known, the effect of a range change on its state is, the point has a
// converter model to check against, and readings are quick enough to
// follow the approach.
func (p *pointRun) canPredict() bool {
	s := p.s
	return s.plan.Settle.Predicting() && s.inst.Converter != nil && s.inst.DCVoltmeter != nil &&
		p.tau > 0 && !p.alt && !p.scout && !p.discriminate && p.predicted &&
		s.bench.reading.TimeS(s.meter()) <= p.tau/predictReadsPerTau
}

// predictReadsPerTau is the fewest readings per time constant the
// prediction needs: slower readings (a meter's fixed long aperture, a
// slow query, whole ripple periods at low frequencies) sample too little
// of the approach to fit it before waiting would have ended.
const predictReadsPerTau = 4

// startApproach starts the prediction when the point may try one: it
// returns the time (s after the step) to start reading at, the settle
// dwell's minimum or, where the hold guard makes the point wait beyond
// the dwell (holdWait), the guard's end.
func (p *pointRun) startApproach(wake float64, holdWait bool) float64 {
	if !p.canPredict() {
		return wake
	}
	s := p.s
	readS := s.bench.reading.TimeS(s.meter())
	start := s.plan.Settle.MinDwellS
	if holdWait {
		// No reading is trusted before the hold guard's end; the
		// approach goes on behind a held output, so the readings after
		// it still lie on it.
		start = math.Max(start, p.crit.NotBeforeS)
	}
	rng := s.bench.rangeIdx
	prior, u := s.taus.priorFor(rng, s.ranges()[rng].TimeConstantS)
	a := &approachRun{opts: settle.ApproachOpts{TauS: prior, UTauS: u, NoiseFromResiduals: len(s.pred.fitNoise[rng]) == 0}}
	if p.rippleFitted() {
		a.opts.RippleHz, a.opts.Harmonics = 2*p.freqHz, settle.FitHarmonics
	}
	// Where waiting would read at once (a step inside the tolerance),
	// the prediction still corrects what the converter has left of
	// earlier approaches, given a few readings' time.
	a.deadlineS = math.Max(p.crit.NotBeforeS, start+float64(predictMinReadings+2)*readS)
	p.ap = a
	return start
}

// predictMinReadings is the fewest readings a prediction ends on, and
// noiseReadings the fewest when it must estimate the readings' noise from
// its own residuals (the first prediction on a range).
const (
	predictMinReadings = 4
	noiseReadings      = 10
)

// rippleFitted reports whether the prediction fits the converter's 2f
// ripple alongside the approach: where one reading's aperture leaves more
// than a tenth of the tolerance of it.
func (p *pointRun) rippleFitted() bool {
	return p.freqHz > 0 && p.s.bench.reading.ResidualRel > p.tol/10
}

// readingSigma returns the standard deviation of one reading's mean
// square (Vrms², the reading vrms): the readings' scatter the last
// predictions on the range showed, the ripple the aperture leaves (an
// arcsine of that amplitude) and a floor for what neither shows. Where no
// prediction on the range has shown the scatter yet, the prediction
// estimates it from its own residuals (see noiseKnown).
func (p *pointRun) readingSigma(vrms float64) float64 {
	s := p.s
	rel := 1e-5
	fs := s.ranges()[s.bench.rangeIdx].FullScaleVrms
	for _, x := range s.pred.fitNoise[s.bench.rangeIdx] {
		rel = math.Max(rel, x*fs/vrms)
	}
	if !p.rippleFitted() {
		rel = math.Hypot(rel, s.bench.reading.ResidualRel/math.Sqrt2)
	}
	return 2 * vrms * vrms * rel
}

// approachReading uses the reading p.last (v the raw value), taken ts
// after the step, its exchange spanning spanS and ending at t1 (physical
// s), for the prediction.
func (p *pointRun) approachReading(ctx context.Context, ts, spanS, v, t1 float64) (reaction, error) {
	s, a := p.s, p.ap
	rd := p.last
	readS := s.bench.reading.TimeS(s.meter())
	held := s.inst.HoldS > 0 && s.holdAhead(p.tStep+ts-readS, p.tStep+ts) > 0
	if rd.Status == driver.InSpec && rd.Vrms > 0 && !p.clipped && !held {
		p.dcOf[ts] = v
		a.tS = append(a.tS, ts)
		a.mMS = append(a.mMS, rd.Vrms*rd.Vrms)
		a.sig = append(a.sig, p.readingSigma(rd.Vrms))
		// The reading is timed by the middle of its exchange: the time
		// the exchange took beyond what a reading takes (aperture,
		// spacing and the exchange's usual overhead) is when it might
		// have been, uniformly.
		a.sigT = append(a.sigT, math.Max(0, spanS-readS)/math.Sqrt(12))
	}
	p.clipped = false
	if next, done := p.judgeApproach(); done {
		return next, nil
	}
	if a.why != "" {
		return p.giveUp(ctx, "")
	}
	if ts+readS >= a.deadlineS || t1-p.tStep > p.timeout {
		// Waiting would end now on a reading within the tolerance; a
		// prediction that passed every check and is known to a fraction
		// of it is the better value.
		if a.good && 2*a.fit.URel() <= deadlineTolFrac*p.tol {
			a.ok = true
			return stopRead, nil
		}
		why := "waiting reads as soon as the prediction could end"
		if f := a.fit; f.MInf > 0 {
			why = fmt.Sprintf("%s (its expanded uncertainty was %.2g %% with %d readings)", why, 200*f.URel(), len(a.tS))
		}
		return p.giveUp(ctx, why)
	}
	return readMore, nil
}

// judgeApproach fits the readings so far; done reports that the point's
// readings are complete (the prediction accepted) or that it was given
// up (next then says what to do).
func (p *pointRun) judgeApproach() (next reaction, done bool) {
	a := p.ap
	a.good = false
	n := len(a.tS)
	if n < 3 || (a.opts.NoiseFromResiduals && n < noiseReadings) {
		return readMore, false
	}
	o := a.opts
	// The trajectory of all but the last reading, and the last against it.
	f1, err := a.fitTimed(n - 1)
	if err != nil {
		return readMore, false
	}
	lastOK := math.Abs(a.mMS[n-1]-f1.Reading(a.tS[n-1])) <= 3*math.Hypot(f1.SigmaScale*a.effSigma(f1, n-1), f1.UReading(a.tS[n-1]))
	if !lastOK {
		a.misses++
		if a.misses >= 2 {
			a.why = "the readings left the predicted approach"
			return readMore, false
		}
	}
	f, err := a.fitTimed(n)
	if err != nil || !(f.MInf > 0) {
		return readMore, false
	}
	a.fit = f
	if n >= 5 && !f.Exponential() {
		a.why = fmt.Sprintf("the approach is not one exponential (χ² %.3g on %d degrees of freedom)", f.Chi2, f.Dof)
		return readMore, false
	}
	if r := a.misfit(f); r > misfitRatio {
		a.why = fmt.Sprintf("the approach is not one exponential (its residuals are %.3g times the readings' scatter)", r)
		return readMore, false
	}
	if o.UTauS < tauProfileRel*o.TauS && f.UTauS > 0 && math.Abs(f.TauS-o.TauS) > 4*math.Hypot(o.UTauS, f.UTauS) {
		a.why = fmt.Sprintf("the approach's time constant %.3g s is not the range's %.3g s", f.TauS, o.TauS)
		return readMore, false
	}
	// The trajectory must start where the model put the state: a hold
	// (or a drift) makes a flat run from elsewhere. The model's state is
	// ripple-averaged; the transient starts from the instantaneous one,
	// off by up to the 2f ripple on the state, before and after the step
	// (taken at this frequency for both: at most a wider allowance).
	y0 := p.y0
	rip := settle.MeanSquareRipple(p.freqHz, p.tau) * (y0 + f.MInf)
	if d := math.Abs(f.At(0) - y0); n >= 4 && y0 > 0 && d > math.Max(0.25*math.Abs(y0-f.MInf), 3*p.tol*f.MInf)+rip+3*f.UAt(0) {
		a.why = "the readings do not start from the converter's state at the step (output hold or drift)"
		return readMore, false
	}
	// Readings that do not move where the step should: an output hold
	// that began before the step freezes the old value, a flat run the
	// checks above cannot tell from a settled one.
	if e := math.Abs(p.v1*p.v1 - y0); n >= 4 && e > 2*p.tol*f.MInf+2*rip && 2*p.s.pred.err(p.predGain > 0)*f.MInf < e/2 && math.Abs(f.B) < e/2-rip {
		a.why = "the readings do not move as the step needs (output hold)"
		return readMore, false
	}
	if !lastOK || n < predictMinReadings {
		return readMore, false
	}
	w := p.s.inst.Converter.Window()
	fs := p.s.ranges()[p.s.bench.rangeIdx].FullScaleVrms
	if frac := math.Sqrt(f.MInf) / fs; frac < w.UnderFraction || frac > w.OverFraction {
		a.why = "the predicted value is outside the converter's window"
		return readMore, false
	}
	a.good = true
	if 2*f.URel() > predictTolFrac*p.tol {
		return readMore, false
	}
	a.ok = true
	return stopRead, true
}

// misfitRatio bounds misfit: a single-pole converter's approaches on the
// simulated bench stay under 1.5, one behind a second pole of 0.375 τ
// reaches 5 to 140 (sweep/sched's second-pole benchmark).
const misfitRatio = 3

// misfit compares the fit's residual scatter with the readings' own,
// from their second differences (a trend-free estimate: a smooth
// approach leaves little in them, a wrong model all of its misfit in the
// residuals): the ratio of the two, 0 with fewer than misfitReadings
// readings. Noise estimated from the residuals alone (a range's first
// approach) cannot tell a wrong model from noise; this can. The
// second-difference scatter is the median |Δ²m|/(0.6745·√6), robust to
// the few large ones early in a fast approach (0.6745: the normal
// distribution's quartile; √6: the variance of a second difference of
// white noise).
func (a *approachRun) misfit(f settle.ApproachFit) float64 {
	n := len(a.tS)
	if n < misfitReadings || f.Dof <= 0 {
		return 0
	}
	d := make([]float64, 0, n-2)
	for i := 1; i+1 < n; i++ {
		d = append(d, math.Abs(a.mMS[i+1]-2*a.mMS[i]+a.mMS[i-1]))
	}
	sort.Float64s(d)
	sd := d[len(d)/2] / (0.6745 * math.Sqrt(6))
	if !(sd > 0) {
		return 0
	}
	var ss float64
	for i := 0; i < n; i++ {
		r := a.mMS[i] - f.Reading(a.tS[i])
		ss += r * r
	}
	return math.Sqrt(ss/float64(f.Dof)) / sd
}

// misfitReadings is the fewest readings misfit judges.
const misfitReadings = 8

// fitTimed fits the first n readings, their deviations widened by what
// the uncertainty of their times makes of the approach's slope
// (effective variance, common practice for errors in both variables):
// a first fit gives the slope, a second the answer.
func (a *approachRun) fitTimed(n int) (settle.ApproachFit, error) {
	f, err := settle.FitApproach(a.tS[:n], a.mMS[:n], a.sig[:n], a.opts)
	if err != nil {
		return f, err
	}
	sig := make([]float64, n)
	for i := range sig {
		sig[i] = a.effSigma(f, i)
	}
	return settle.FitApproach(a.tS[:n], a.mMS[:n], sig, a.opts)
}

// effSigma returns reading i's deviation with its time's uncertainty
// through the slope of the readings the fit f describes (approach and
// ripple).
func (a *approachRun) effSigma(f settle.ApproachFit, i int) float64 {
	if a.sigT[i] == 0 {
		return a.sig[i]
	}
	h := a.sigT[i]
	slope := (f.Reading(a.tS[i]+h) - f.Reading(a.tS[i]-h)) / (2 * h)
	return math.Hypot(a.sig[i], slope*a.sigT[i])
}

// giveUp ends the prediction: the point waits as without it.
func (p *pointRun) giveUp(ctx context.Context, why string) (reaction, error) {
	if p.ap.why == "" {
		p.ap.why = why
	}
	p.r.log.Debug().Float64("freq_hz", p.freqHz).Str("why", p.ap.why).Msg("prediction given up")
	if p.crit.NotBeforeS > 0 {
		return readMore, p.r.sleepUntil(ctx, p.tStep+p.crit.NotBeforeS)
	}
	return readMore, nil
}

// approachNote returns the point's settle mode and why it waited.
func (p *pointRun) approachNote() (mode, why string) {
	switch {
	case p.ap == nil:
		return "", ""
	case p.ap.ok:
		return point.SettlePredicted, ""
	default:
		return point.SettleWaited, p.ap.why
	}
}

// learnApproach keeps what an accepted prediction showed: the converter
// model follows the fitted trajectory (it has not settled yet), and the
// fitted time constant, where the approach fixed it, joins the range's
// estimate.
func (p *pointRun) learnApproach() {
	s, a := p.s, p.ap
	f := a.fit
	s.conv.avg = settle.Averager{T: p.tStep, Y: f.At(0), U: f.MInf}
	s.conv.altOn = false
	if f.UTauS > 0 && f.UTauS <= tauLearnRel*f.TauS && f.UTauS < 0.7*a.opts.UTauS {
		rng := s.bench.rangeIdx
		s.taus.add(rng, f.TauS, f.UTauS)
		if msg, ok := s.taus.offProfile(rng, s.rangeName(rng), s.ranges()[rng].TimeConstantS); ok {
			p.r.logEvent(msg)
		}
	}
	if f.Dof >= 3 {
		// The readings' noise as the fit's residuals show it: the
		// deviations assumed (less what the readings' timing adds, which
		// the fit accounts for on its own) scaled by √(χ²/ν), in volts
		// as a fraction of full scale (σ_m/(2√m) per reading).
		scale := math.Sqrt(f.Chi2 / float64(f.Dof))
		var sum float64
		for i := range a.tS {
			sum += a.sig[i] / (2 * math.Sqrt(a.mMS[i]))
		}
		rng := s.bench.rangeIdx
		if s.pred.fitNoise == nil {
			s.pred.fitNoise = map[int][]float64{}
		}
		fs := s.ranges()[rng].FullScaleVrms
		s.pred.fitNoise[rng] = keepLast(append(s.pred.fitNoise[rng], scale*sum/float64(len(a.tS))/fs))
	}
	p.r.log.Debug().Float64("freq_hz", p.freqHz).Int("readings", len(a.tS)).Float64("tau_s", f.TauS).
		Float64("u_rel", f.URel()).Msg("predicted " + analysis.FormatHz(p.freqHz, 4))
}
