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
	// haltTimeout bounds the generator's Halt during shutdown.
	haltTimeout = 3 * time.Second
	// haltRetryFor bounds the retries of a failed halt.
	haltRetryFor = 10 * time.Minute
	// vinReadings bounds the readings of the Vin channel per point.
	vinReadings = 6
)

// What a range change does to the converter's averaged state.
const (
	rangeUnknown    = iota
	rangeByInput    // the state is the input's mean square: continuous in volts
	rangeByFraction // the state is a fraction of full scale: it jumps by the range ratio
)

// sweeper is the loop's private state; only the run goroutine touches it.
type sweeper struct {
	r     *Run
	inst  Instruments
	plan  *plan.Plan
	ranks []int // range indices by ascending full scale

	rangeIdx   int
	rangeKnown bool
	ampVrms    float64
	ampSet     bool
	outputOn   bool
	freqHz     float64
	freqSet    bool

	// The converter model: the input mean square convMS (Vrms²) reached
	// at convT (physical seconds) towards convTarget.
	convMS     float64
	convTarget float64
	convT      float64
	convKnown  bool
	// convFS is the input mean square expressed on the previous range
	// before a range change; the worse of the two assumptions about the
	// state's continuity is taken.
	convAltMS float64
	convAlt   bool
	// rangeModel is what a range change does to the converter's state,
	// learnt from the first reading after the first change.
	rangeModel int
	// noise is the readings' relative scatter (per reading), from the
	// last points' Type A deviations.
	noise []float64

	// The hold guard: since tOK (physical s) the output has stayed within
	// the tolerance of vRef (Vrms).
	tOK, vRef float64
	// A hold began in [holdLo, holdHi] (physical s), when holdKnown.
	holdLo, holdHi float64
	holdKnown      bool
	refining       bool // the point's prediction is the refinement's interpolation

	gain      settle.Predictor // gain vs frequency
	scoutGain float64          // the first point's gain from its first reading
	// predErrs are the last points' relative prediction errors, of the
	// slope prediction [0] and of the refinement's interpolation [1].
	predErrs [2][]float64
	reading  settle.Reading
	dcCfg    driver.DCConfig
	acCfg    driver.ACConfig
	cfgOK    bool

	seq      int
	pts      []point.Point
	nPlan    int
	freqs    []plan.Freq
	modelSum float64 // model estimate of the points measured so far, physical s
	actSum   float64 // their actual duration, physical s
}

func (r *Run) main(ctx context.Context) {
	s := &sweeper{r: r, inst: r.inst, plan: r.plan}
	err := s.run(ctx)
	r.halt()
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

// halt puts the generator in its inert state with its own time-out. When
// that fails (the generator is unreachable), a goroutine keeps trying with
// backoff until the output is off, the generator is closed, or
// haltRetryFor has passed: a generator that comes back after an outage
// must not go on driving the DUT.
func (r *Run) halt() {
	err := r.haltOnce()
	if err == nil {
		return
	}
	r.log.Error().Err(err).Msg("generator halt")
	r.emit(event.Event{Type: event.TypeLog, Message: "generator halt failed: " + err.Error() + "; retrying until the output is off"})
	go r.haltRetry()
}

// haltOnce tries Halt once, bounded by haltTimeout.
func (r *Run) haltOnce() error {
	done := make(chan error, 1)
	go func() { done <- r.inst.Generator.Halt() }()
	select {
	case err := <-done:
		return err
	case <-time.After(haltTimeout):
		return fmt.Errorf("sched: generator halt timed out after %v: %w", haltTimeout, driver.ErrTimeout)
	}
}

// haltRetry retries a failed halt with backoff (wall time).
func (r *Run) haltRetry() {
	deadline := time.Now().Add(haltRetryFor)
	wait := 250 * time.Millisecond
	for tries := 2; time.Now().Before(deadline); tries++ {
		time.Sleep(wait)
		err := r.haltOnce()
		if err == nil {
			r.log.Warn().Int("tries", tries).Msg("generator output off after a failed halt")
			return
		}
		if errors.Is(err, driver.ErrClosed) {
			r.log.Warn().Err(err).Msg("generator closed before its output could be switched off")
			return
		}
		wait = min(2*wait, 2*time.Second)
	}
	r.log.Error().Dur("for", haltRetryFor).Msg("gave up switching the generator output off: check it by hand")
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

func (s *sweeper) ranges() []driver.Range { return s.inst.Converter.Ranges() }

func (s *sweeper) tau() float64 {
	if s.inst.Converter == nil || !s.rangeKnown {
		return 0
	}
	return s.ranges()[s.rangeIdx].TimeConstantS
}

func (s *sweeper) rangeName(i int) string {
	if s.inst.Converter == nil || i < 0 || i >= len(s.ranges()) {
		return ""
	}
	return s.ranges()[i].Name
}

// ampBounds returns the amplitude window of the level strategy.
func (s *sweeper) ampBounds() (lo, hi float64) {
	lv := s.plan.Level
	lo, hi = lv.MinVrms, lv.MaxVrms
	if hi <= 0 {
		hi = lv.Vrms
	}
	if lo <= 0 {
		lo = lv.Vrms
	}
	lim := s.inst.Limits
	if lim.MaxVrms > 0 {
		hi = math.Min(hi, lim.MaxVrms)
	}
	if lim.MinVrms > 0 {
		lo = math.Max(lo, lim.MinVrms)
	}
	return lo, hi
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
	s.freqs, s.nPlan = freqs, len(freqs)
	measured := map[int]bool{}
	if r.opts.Resume {
		pts, err := r.rec.Points()
		if err != nil {
			return fmt.Errorf("sched: resume: %w", err)
		}
		for _, p := range pts {
			if p.Index < s.nPlan && math.Abs(p.FreqHz-freqs[p.Index].Hz) > 1e-9*freqs[p.Index].Hz {
				return fmt.Errorf("sched: resume: stored point %d at %g Hz is not plan point %d (%g Hz): not the same plan", p.Seq, p.FreqHz, p.Index, freqs[p.Index].Hz)
			}
			measured[p.Index] = true
			s.seq = max(s.seq, p.Seq+1)
		}
		s.pts = pts
		if len(pts) > 0 {
			r.logEvent(fmt.Sprintf("resuming after %d stored points", len(pts)))
		}
	}
	r.mu.Lock()
	r.status.Total = s.nPlan + s.refinedCount()
	r.status.Done = len(s.pts)
	r.mu.Unlock()
	for _, p := range s.sortedPoints() {
		s.gain.Add(p.FreqHz, p.VoutVrms/p.VinVrms)
	}
	if err := s.prepare(ctx); err != nil {
		return err
	}
	for i, f := range freqs {
		if measured[i] {
			continue
		}
		if err := s.measure(ctx, i, f.Hz, false, 0); err != nil {
			return err
		}
	}
	if err := s.refine(ctx); err != nil {
		return err
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
	s.outputOn = false
	s.convKnown, s.convMS, s.convTarget, s.convT = true, 0, 0, r.phys()
	if err := s.setAmplitude(ctx, s.plan.Level.Vrms); err != nil {
		return fmt.Errorf("sched: prepare: %w", err)
	}
	if s.inst.Converter == nil || s.inst.DCVoltmeter == nil {
		return nil
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
			s.rangeIdx, s.rangeKnown = start, true
		case start < 0 && r.opts.RangeKnown:
			s.rangeIdx, s.rangeKnown = r.opts.CurrentRange, true
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
			s.rangeIdx = start
		case r.opts.RangeKnown:
			s.rangeIdx = r.opts.CurrentRange
		case last != nil:
			s.rangeIdx = last.RangeIndex
		default:
			return fmt.Errorf("sched: plan ranging.start is empty and the converter's range is unknown: name the range for strategy %q", s.plan.Ranging.Strategy)
		}
		if s.rangeIdx < 0 || s.rangeIdx >= len(s.ranges()) {
			return fmt.Errorf("sched: converter range %d: want 0..%d", s.rangeIdx, len(s.ranges())-1)
		}
		s.rangeKnown = true
	}
	r.mu.Lock()
	r.status.RangeIndex, r.status.Range = s.rangeIdx, s.rangeName(s.rangeIdx)
	r.mu.Unlock()
	return nil
}

func (s *sweeper) lastPoint() *point.Point {
	if len(s.pts) == 0 {
		return nil
	}
	return &s.pts[len(s.pts)-1]
}

// convAt returns the converter model's input mean square at physical time t.
func (s *sweeper) convAt(t float64) float64 {
	tau := s.tau()
	if tau <= 0 {
		return s.convTarget
	}
	return s.convTarget + (s.convMS-s.convTarget)*math.Exp(-(t-s.convT)/tau)
}

// convStep records that the converter's input steps to targetMS at t.
func (s *sweeper) convStep(t, targetMS float64) {
	if s.convAlt {
		if tau := s.tau(); tau > 0 {
			s.convAltMS = s.convTarget + (s.convAltMS-s.convTarget)*math.Exp(-(t-s.convT)/tau)
		}
	}
	s.convMS = s.convAt(t)
	s.convTarget = targetMS
	s.convT = t
}

// setOutput switches the generator output, keeping the converter model.
func (s *sweeper) setOutput(ctx context.Context, on bool, expectVrms float64) error {
	if s.outputOn == on {
		return nil
	}
	g := s.inst.Generator
	if on && !s.ampSet {
		return errors.New("sched: output on with the amplitude unset")
	}
	what := "generator output off"
	if on {
		what = "generator output on"
	}
	if err := s.r.try(ctx, what, func(ctx context.Context) error { return g.SetOutput(ctx, on) }); err != nil {
		return err
	}
	s.outputOn = on
	if on {
		s.convStep(s.r.phys(), expectVrms*expectVrms)
	} else {
		s.convStep(s.r.phys(), 0)
	}
	return nil
}

func (s *sweeper) setAmplitude(ctx context.Context, vrms float64) error {
	if s.ampSet && s.ampVrms == vrms {
		return nil
	}
	if lim := s.inst.Limits; lim.MaxVrms > 0 && vrms > lim.MaxVrms*(1+1e-12) {
		return fmt.Errorf("sched: amplitude %g V above the bench limit %g V", vrms, lim.MaxVrms)
	}
	g := s.inst.Generator
	if err := s.r.try(ctx, "generator amplitude", func(ctx context.Context) error { return g.SetAmplitude(ctx, vrms) }); err != nil {
		return err
	}
	s.ampVrms, s.ampSet = vrms, true
	s.r.mu.Lock()
	s.r.status.VinVrms = vrms
	s.r.mu.Unlock()
	return nil
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

// readOnce takes one (possibly burst-averaged) reading: the DC output
// volts (converter) or Vrms (AC voltmeter).
func (s *sweeper) readOnce(ctx context.Context) (float64, error) {
	n := max(1, s.reading.Average)
	r := s.r
	if s.inst.Converter == nil || s.inst.DCVoltmeter == nil {
		ac := s.inst.ACVoltmeter
		var sum float64
		for k := 0; k < n; k++ {
			var v float64
			err := r.try(ctx, "AC reading", func(ctx context.Context) (err error) { v, err = ac.ReadAC(ctx); return })
			if err != nil {
				return 0, err
			}
			sum += v
		}
		return sum / float64(n), nil
	}
	dvm := s.inst.DCVoltmeter
	if br, ok := dvm.(driver.BurstReader); ok && n > 1 {
		var vs []float64
		err := r.try(ctx, "DC burst", func(ctx context.Context) (err error) { vs, err = br.ReadBurst(ctx, n); return })
		if err != nil {
			return 0, err
		}
		if len(vs) == 0 {
			return 0, fmt.Errorf("sched: empty burst: %w", driver.ErrMalformed)
		}
		var sum float64
		for _, v := range vs {
			sum += v
		}
		return sum / float64(len(vs)), nil
	}
	var sum float64
	for k := 0; k < n; k++ {
		var v float64
		err := r.try(ctx, "DC reading", func(ctx context.Context) (err error) { v, err = dvm.ReadDC(ctx); return })
		if err != nil {
			return 0, err
		}
		sum += v
	}
	return sum / float64(n), nil
}

func (s *sweeper) meter() settle.Meter {
	m := s.inst.Meter
	if m.Validate() != nil {
		line := s.inst.LineHz
		if line <= 0 {
			line = 50
		}
		m = settle.NPLCMeter([]float64{1, 10}, line, 0)
	}
	return m
}

// configure chooses the aperture for freqHz and configures the voltmeter
// when it changes.
func (s *sweeper) configure(ctx context.Context, freqHz float64) error {
	m := s.meter()
	tau := s.tau()
	rd, err := settle.ChooseAperture(freqHz, tau, rippleShare*s.plan.Settle.Tolerance, m)
	if err != nil && !errors.Is(err, settle.ErrNoAperture) {
		return err
	}
	ap := driver.Aperture{Seconds: rd.ApertureS}
	if m.LineHz > 0 {
		ap = driver.Aperture{NPLC: math.Round(rd.ApertureS*m.LineHz*1e9) / 1e9}
	}
	s.reading = rd
	if s.inst.Converter != nil && s.inst.DCVoltmeter != nil {
		rangeV := s.inst.DCRangeV
		if rangeV <= 0 {
			w := s.inst.Converter.Window()
			rangeV = w.DCFullScaleV * math.Max(1, w.OverFraction)
		}
		cfg := driver.DCConfig{RangeV: rangeV, Aperture: ap}
		if s.cfgOK && cfg == s.dcCfg {
			return nil
		}
		dvm := s.inst.DCVoltmeter
		if err := s.r.try(ctx, "voltmeter configure", func(ctx context.Context) error { return dvm.ConfigureDC(ctx, cfg) }); err != nil {
			return err
		}
		s.dcCfg, s.cfgOK = cfg, true
		return nil
	}
	cfg := driver.ACConfig{Aperture: ap}
	if s.cfgOK && cfg == s.acCfg {
		return nil
	}
	ac := s.inst.ACVoltmeter
	if err := s.r.try(ctx, "voltmeter configure", func(ctx context.Context) error { return ac.ConfigureAC(ctx, cfg) }); err != nil {
		return err
	}
	s.acCfg, s.cfgOK = cfg, true
	return nil
}

// scale turns a reading into Vrms and a window status on the current range.
func (s *sweeper) scaleReading(v float64) (driver.ConverterReading, error) {
	if s.inst.Converter == nil || s.inst.DCVoltmeter == nil {
		return driver.ConverterReading{Vrms: v, Status: driver.InSpec}, nil
	}
	return s.inst.Converter.Scale(s.rangeIdx, v)
}

// dwellFor returns the model dwell, physical seconds, for the converter to
// settle from its present state to v1 Vrms (both continuity assumptions
// after a range change), plus the plan's minimum dwell.
func (s *sweeper) dwellFor(t, v1 float64) float64 {
	tol := s.plan.Settle.Tolerance
	tau := s.tau()
	d := 0.0
	if tau > 0 && v1 > 0 {
		y0 := s.convAt(t)
		d = settle.DwellS(tau, math.Sqrt(y0), v1, tol)
		if s.convAlt {
			d = math.Max(d, settle.DwellS(tau, math.Sqrt(math.Max(0, s.convAltMS)), v1, tol))
		}
	}
	return d + s.plan.Settle.MinDwellS
}

// trendNoise returns the offset from the final value that the readings'
// noise can fake in the converge test's trend check: τ·σ·√2 over the
// window's span (∞ while the noise is not known yet).
func (s *sweeper) trendNoise() float64 {
	if len(s.noise) == 0 {
		return math.Inf(1)
	}
	var sig float64
	for _, x := range s.noise {
		sig = math.Max(sig, x)
	}
	n := max(2, s.plan.Settle.Readings)
	span := float64(n-1) * s.reading.TimeS(s.meter())
	if span <= 0 {
		return math.Inf(1)
	}
	return s.tau() * sig * math.Sqrt2 / span
}

// predErr returns the largest relative prediction error of the last
// points, of the refinement's interpolation or of the slope prediction.
func (s *sweeper) predErr(interp bool) float64 {
	h := s.predErrs[0]
	if interp {
		h = s.predErrs[1]
	}
	var e float64
	for _, x := range h {
		e = math.Max(e, x)
	}
	return e
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
			if err == errPaused {
				if err := s.pause(ctx); err != nil {
					return err
				}
				continue
			}
			return err
		}
		pt, again, err := s.attempt(ctx, idx, freqHz, refined, predGain, attempt)
		if err == errPaused {
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
		pt.Seq = s.seq
		r.j.point(pt)
		s.seq++
		s.pts = append(s.pts, pt)
		s.actSum += r.phys() - tStart
		s.modelSum += s.modelPointS(freqHz)
		if len(pt.Flags) > 0 && !(len(pt.Flags) == 1 && pt.Has(point.FlagRefined)) {
			r.logEvent(fmt.Sprintf("point %d at %s flagged %v", pt.Seq, analysis.FormatHz(freqHz, 4), pt.Flags))
		}
		s.progress()
		return nil
	}
}

// attempt is one try at a point. again reports that the range or level
// changed and the point must be measured again.
func (s *sweeper) attempt(ctx context.Context, idx int, freqHz float64, refined bool, predGain float64, attempt int) (pt point.Point, again bool, err error) {
	r := s.r
	tol := s.plan.Settle.Tolerance
	g := s.inst.Generator
	// The prediction, and a pre-selection of the range or level.
	gEst, ok := predGain, predGain > 0
	if !ok {
		gEst, ok = s.gain.Predict(freqHz)
	}
	if !ok && s.scoutGain > 0 {
		gEst, ok = s.scoutGain, true // from this point's first reading
	}
	// An operator is asked for a more sensitive range only on a measured
	// reading, never on a prediction alone: a prediction that overshoots
	// (entering a roll-off) would make them turn the switch twice at one
	// frequency. A less sensitive range is asked for on the prediction,
	// so that the converter is never driven over range.
	downOnPrediction := ok && s.rangeKnown && s.inst.Converter != nil &&
		s.plan.Ranging.Strategy == plan.RangeOperator && s.pickRange(gEst*s.ampVrms) < s.rangeIdx
	if ok && attempt == 0 && s.rangeKnown && !downOnPrediction {
		changed, err := s.guard(ctx, gEst*s.ampVrms, gEst, freqHz, fmt.Sprintf("predicted %.4g Vrms at %s", gEst*s.ampVrms, analysis.FormatHz(freqHz, 4)))
		if err != nil {
			return pt, false, err
		}
		_ = changed
	}
	if !s.freqSet || s.freqHz != freqHz {
		if err := r.try(ctx, "generator frequency", func(ctx context.Context) error { return g.SetFrequency(ctx, freqHz) }); err != nil {
			return pt, false, err
		}
		s.freqHz, s.freqSet = freqHz, true
	}
	if err := s.configure(ctx, freqHz); err != nil {
		return pt, false, err
	}
	v1 := 0.0
	if ok {
		v1 = gEst * s.ampVrms
	}
	if err := s.setOutput(ctx, true, v1); err != nil {
		return pt, false, err
	}
	tStep := r.phys()
	if ok {
		s.convStep(tStep, v1*v1)
	}
	// The dwell: from the converter's state before the step.
	y0 := s.convMS
	alt := s.convAlt
	y0alt := s.convAltMS
	var dwell float64
	weak := ok && s.gain.Len() < 2 && predGain <= 0
	if ok {
		// The prediction's recent error widens the step assumed: were
		// the step at either end of the band, the dwell would be longer;
		// waiting up to τ/2 of it is enough, since from there on the
		// model check sees the step and extends the dwell.
		u := math.Min(0.5, 1.5*s.predErr(predGain > 0))
		if s.trendNoise() < tol/3 {
			// The converge test's trend check sees a step the
			// prediction missed, to a third of the tolerance.
			u = 0
		}
		dwell = s.dwellFor(tStep, v1)
		wide := math.Max(s.dwellFor(tStep, v1*(1+u)), s.dwellFor(tStep, v1*(1-u)))
		dwell = math.Max(dwell, math.Min(wide, s.tau()/2))
		if weak {
			// One point of history says nothing of the slope: wait long
			// enough for the model check to see the step.
			dwell = math.Max(dwell, s.tau())
		}
	} else if tau := s.tau(); tau > 0 {
		// Unknown target: the worst case, from zero or from the state.
		d0 := tau * math.Log(1/(2*tol-tol*tol))
		dwell = d0 + s.plan.Settle.MinDwellS
	} else {
		dwell = s.plan.Settle.MinDwellS
	}
	if err := r.transition(event.Settling, fmt.Sprintf("%s: dwell %.3g s", analysis.FormatHz(freqHz, 4), dwell)); err != nil {
		return pt, false, err
	}
	tau := s.tau()
	s.refining = predGain > 0
	nb, probe := s.holdGuard(tStep, dwell, v1, ok && !weak)
	winS := float64(max(2, s.plan.Settle.Readings)) * s.reading.TimeS(s.meter())
	if end := s.holdAhead(tStep+nb, tStep+nb+winS); end > 0 {
		// A hold of the learnt schedule would cover the window.
		nb = end - tStep
	}
	crit := settle.Criterion{Tol: tol, N: max(2, s.plan.Settle.Readings), NotBeforeS: nb, TauS: tau}
	wake := nb
	if probe > 0 {
		wake = probe - s.reading.TimeS(s.meter())
	}
	discriminate := alt && ok && tau > 0
	if discriminate {
		// The first reading after the first range change tells which
		// way the converter's state went: read it at τ/2.
		probe = -1
		wake = math.Min(wake, math.Max(0, tau/2-s.reading.TimeS(s.meter())))
	}
	st := s.plan.Ranging.Strategy
	scout := !ok && tau > 0 && s.inst.Converter != nil && attempt == 0 &&
		(st == plan.RangeRemote || st == plan.RangeOperator || st == plan.RangeLevel)
	if scout {
		// No prediction (the first point): a reading at τ/2 already
		// tells the range or level the point needs, a full dwell sooner.
		probe = -1
		wake = math.Min(wake, math.Max(0, tau/2-s.reading.TimeS(s.meter())))
	}
	if err := s.observeDwell(ctx, tStep, tStep+wake, y0, v1, ok); err != nil {
		return pt, false, err
	}
	if err := r.sleepUntil(ctx, tStep+wake); err != nil {
		return pt, false, err
	}
	if err := r.transition(event.Reading, ""); err != nil {
		return pt, false, err
	}
	cv := settle.NewConverge(crit)
	timeout := s.plan.Settle.TimeoutS
	if timeout <= 0 {
		timeout = plan.DefaultTimeoutS
	}
	dcOf := map[float64]float64{} // sample time → DC volts
	recheck := 0
	var probeV, probeTS, vModel float64
	holdChecked := false
	var clipped, over bool
	var last driver.ConverterReading
	// model checks the reading against the first-order model from the
	// known state before the step: the target it is heading for, and the
	// time it needs to come within the tolerance of it. It reports
	// whether the point must wait longer (and has set the new dwell).
	model := func(ts, vrms float64) (bool, float64) {
		if tau <= 0 || alt || recheck >= 4 || !(vrms > 0) || !(ts > 0) {
			return false, 0
		}
		e := math.Exp(-ts / tau)
		yr := vrms * vrms
		y1 := (yr - y0*e) / (1 - e)
		if !(y1 > 0) || math.Abs(yr-y1) <= 2*tol*y1 {
			return false, 0
		}
		need := settle.DwellS(tau, math.Sqrt(y0), math.Sqrt(y1), tol) + s.plan.Settle.MinDwellS
		// Only ever a longer wait: a reading frozen by a hold makes the
		// step look smaller than it is.
		if need <= ts || need <= crit.NotBeforeS || need >= timeout {
			return false, 0
		}
		recheck++
		vModel = math.Sqrt(y1)
		return true, need
	}
	// extend moves the window to need after a model check, with a new
	// probe for the hold check when there is time for one.
	extend := func(ts, vrms, need float64) error {
		crit.NotBeforeS, _ = s.holdGuard(tStep, need, v1, true)
		cv = settle.NewConverge(crit)
		wakeAt := crit.NotBeforeS
		if s.inst.HoldS > 0 {
			readS := s.reading.TimeS(s.meter())
			if p := need - tau*math.Log(1.5); p-readS > ts {
				probe, probeV = p, 0
				wakeAt = p - readS
			} else if probeV == 0 {
				probe, probeV, probeTS = ts, vrms, ts
			}
		}
		return r.sleepUntil(ctx, tStep+wakeAt)
	}
	for {
		if err := r.pausedErr(ctx); err != nil {
			return pt, false, err
		}
		t0 := r.phys()
		v, err := s.readOnce(ctx)
		t1 := r.phys()
		if err != nil && (errors.Is(err, driver.ErrOverload) || errors.Is(err, driver.ErrNegativeOverload)) {
			clipped = true
			last = driver.ConverterReading{Vrms: math.NaN(), FractionFS: math.NaN(), Status: driver.OverRange}
		} else if err != nil {
			return pt, false, err
		} else {
			last, err = s.scaleReading(v)
			if err != nil {
				return pt, false, err
			}
		}
		ts := (t0+t1)/2 - tStep
		if last.Status == driver.OverRange {
			over = true
			// Never leave the converter overloaded.
			vEst := last.Vrms
			if !(vEst > 0) {
				vEst = s.ranges()[s.rangeIdx].FullScaleVrms * s.inst.Converter.Window().OverFraction * 3.2
			}
			if s.inst.Converter != nil && s.plan.Ranging.Strategy != plan.RangeFixed {
				changed, err := s.guard(ctx, vEst, vEst/s.ampVrms, freqHz, fmt.Sprintf("over-range at %s", analysis.FormatHz(freqHz, 4)))
				if err != nil {
					return pt, false, err
				}
				if changed {
					return pt, true, nil
				}
			}
			// Fixed strategy, or nothing left to change: output off,
			// flag, move on.
			if err := s.setOutput(ctx, false, 0); err != nil {
				return pt, false, err
			}
			if !clipped {
				cv.Add(settle.Sample{TS: ts, V: last.Vrms})
				dcOf[ts] = v
			}
			break
		}
		dcOf[ts] = v
		if scout && last.Vrms > 0 {
			scout = false
			// The final value, by the first-order response from the
			// state before the step.
			e := math.Exp(-ts / tau)
			if y1 := (last.Vrms*last.Vrms - y0*e) / (1 - e); y1 > 0 {
				vEst := math.Sqrt(y1)
				s.scoutGain = vEst / s.ampVrms
				changed, err := s.guard(ctx, vEst, vEst/s.ampVrms, freqHz, fmt.Sprintf("first reading %.4g Vrms at %s", vEst, analysis.FormatHz(freqHz, 4)))
				if err != nil {
					return pt, false, err
				}
				if changed {
					return pt, true, nil
				}
			}
			if ts < crit.NotBeforeS {
				if err := r.sleepUntil(ctx, tStep+crit.NotBeforeS); err != nil {
					return pt, false, err
				}
				continue
			}
		}
		if discriminate && last.Vrms > 0 {
			discriminate = false
			e := math.Exp(-ts / tau)
			y1 := v1 * v1
			rA := math.Sqrt(math.Max(0, y1+(y0-y1)*e))
			rB := math.Sqrt(math.Max(0, y1+(y0alt-y1)*e))
			dA, dB := math.Abs(last.Vrms-rA), math.Abs(last.Vrms-rB)
			switch {
			case dA < dB/4:
				s.rangeModel = rangeByInput
				r.logEvent("range changes keep the converter's mean square in volts")
			case dB < dA/4:
				s.rangeModel = rangeByFraction
				r.logEvent("range changes keep the converter's state as a fraction of full scale")
				y0 = y0alt
			}
			if s.rangeModel != rangeUnknown {
				alt, s.convAlt = false, false
				if need := settle.DwellS(tau, math.Sqrt(y0), v1, tol) + s.plan.Settle.MinDwellS; need > ts {
					crit.NotBeforeS = need
				} else {
					crit.NotBeforeS = ts
				}
				cv = settle.NewConverge(crit)
				if err := r.sleepUntil(ctx, tStep+crit.NotBeforeS); err != nil {
					return pt, false, err
				}
				continue
			}
		}
		isProbe := probe > 0 && probeV == 0
		if isProbe {
			probeV, probeTS = last.Vrms, ts
		}
		// Long enough after the step, the model check is robust; before
		// that it is used once the readings are seen to move.
		if ts >= tau/2 {
			if wait, need := model(ts, last.Vrms); wait {
				if err := extend(ts, last.Vrms, need); err != nil {
					return pt, false, err
				}
				continue
			}
		}
		if isProbe && ts < crit.NotBeforeS {
			// The probe is kept for the hold check; on to the window.
			if err := r.sleepUntil(ctx, tStep+crit.NotBeforeS); err != nil {
				return pt, false, err
			}
			continue
		}
		if cv.Add(settle.Sample{TS: ts, V: last.Vrms}) {
			w := cv.Window()
			wMean, _ := settle.Stats(w)
			// The motion expected between the probe and the window, by
			// the prediction and by the model check's estimate: a probe
			// frozen by a hold fools the estimate, not the prediction.
			vm := []float64{v1, vModel}
			if !ok {
				vm[0] = wMean
			}
			suspect := false
			for _, v := range vm {
				suspect = suspect || holdSuspect(tau, y0, v, probeTS, probeV, w[0].TS, wMean, tol)
			}
			if probeV > 0 && !holdChecked && suspect {
				holdChecked = true
				r.logEvent(fmt.Sprintf("%s: readings unchanged since the probe: converter output hold; reading again after it", analysis.FormatHz(freqHz, 4)))
				crit.NotBeforeS = probeTS + s.inst.HoldS + s.reading.TimeS(s.meter())
				cv = settle.NewConverge(crit)
				if err := r.sleepUntil(ctx, tStep+crit.NotBeforeS); err != nil {
					return pt, false, err
				}
				continue
			}
			if end := s.holdAhead(tStep+w[0].TS-s.reading.TimeS(s.meter()), tStep+ts); end > 0 && !holdChecked {
				// The window slipped into a hold of the learnt schedule.
				holdChecked = true
				crit.NotBeforeS = end - tStep
				cv = settle.NewConverge(crit)
				if err := r.sleepUntil(ctx, end); err != nil {
					return pt, false, err
				}
				continue
			}
			break
		}
		if cv.Moving() && ts < tau/2 {
			if wait, need := model(ts, last.Vrms); wait {
				if err := extend(ts, last.Vrms, need); err != nil {
					return pt, false, err
				}
				continue
			}
		}
		if t1-tStep > timeout {
			break
		}
	}
	r.log.Debug().Float64("freq_hz", freqHz).Float64("dwell_s", dwell).Float64("not_before_s", crit.NotBeforeS).
		Int("samples", len(cv.Samples())).Int("rechecks", recheck).Bool("converged", cv.Converged()).
		Float64("t_s", r.phys()-tStep).Float64("aperture_s", s.reading.ApertureS).Int("average", s.reading.Average).
		Bool("predicted", ok).Float64("tau_s", tau).Msg("point timing")
	win := cv.Window()
	var mean, stdRel, dcMean, settleS float64
	if len(win) > 0 {
		mean, stdRel = settle.Stats(win)
		for _, smp := range win {
			dcMean += dcOf[smp.TS]
		}
		dcMean /= float64(len(win))
		settleS = win[len(win)-1].TS
	} else {
		// Only overloaded readings: the output is at least the over-range
		// threshold; record that bound, flagged.
		w := s.inst.Converter.Window()
		dcMean = w.DCFullScaleV * w.OverFraction
		mean = s.ranges()[s.rangeIdx].FullScaleVrms * w.OverFraction
		settleS = r.phys() - tStep
	}
	vin := s.ampVrms
	if s.inst.VinMeter != nil && !over && s.outputOn {
		v, err := s.readVin(ctx)
		if err != nil {
			return pt, false, err
		}
		vin = v
	}
	pt = point.Point{
		Index:    idx,
		FreqHz:   freqHz,
		VinVrms:  vin,
		VoutVrms: mean,
		GainDB:   20 * math.Log10(mean/vin),
		DCVolts:  dcMean,
		Readings: len(win),
		StdRel:   stdRel,
		SettleS:  settleS,
		Time:     r.clock.Now(),
	}
	if refined {
		pt.Flags = append(pt.Flags, point.FlagRefined)
	}
	if clipped {
		pt.Flags = append(pt.Flags, point.FlagClipped)
	}
	if s.inst.Converter != nil && s.inst.DCVoltmeter != nil {
		rg := s.ranges()[s.rangeIdx]
		pt.RangeIndex, pt.Range, pt.RangeFSVrms = s.rangeIdx, rg.Name, rg.FullScaleVrms
		status := driver.OverRange
		if !over {
			cr, err := s.inst.Converter.Scale(s.rangeIdx, dcMean)
			if err != nil {
				return pt, false, err
			}
			pt.FractionFS = cr.FractionFS
			status = cr.Status
		} else {
			pt.FractionFS = dcMean / s.inst.Converter.Window().DCFullScaleV
		}
		switch status {
		case driver.UnderRange:
			if cv.Converged() && mean > 0 {
				changed, err := s.guard(ctx, mean, mean/s.ampVrms, freqHz, fmt.Sprintf("under-range at %s", analysis.FormatHz(freqHz, 4)))
				if err != nil {
					return pt, false, err
				}
				if changed {
					s.convMS, s.convT, s.convTarget = mean*mean, r.phys(), mean*mean
					return pt, true, nil
				}
			}
			pt.Flags = append(pt.Flags, point.FlagUnderRange)
		case driver.OverRange:
			pt.Flags = append(pt.Flags, point.FlagOverRange)
		}
		if w := s.inst.Converter.Window(); w.MaxFreqHz > 0 && freqHz > w.MaxFreqHz {
			pt.Flags = append(pt.Flags, point.FlagBeyondBand)
		}
		if as, ok := s.inst.Converter.(driver.AccuracySpec); ok {
			if rel, ok := as.AccuracyRel(s.rangeIdx, freqHz); ok {
				pt.ConvAccRel = rel
			}
		}
		if ds, ok := s.inst.DCVoltmeter.(driver.DCAccuracySpec); ok {
			pt.DCAccV = ds.DCAccuracyV(dcMean, s.dcCfg.RangeV)
		}
	}
	if !cv.Converged() && !over {
		pt.Flags = append(pt.Flags, point.FlagUnsettled)
	}
	// The converter model now starts from what was measured.
	if mean > 0 && s.outputOn {
		s.convMS, s.convTarget, s.convT = mean*mean, mean*mean, r.phys()
		s.convAlt = false
		if !pt.Excluded() {
			if ok && v1 > 0 {
				h := &s.predErrs[0]
				if predGain > 0 {
					h = &s.predErrs[1]
				}
				*h = append(*h, math.Abs(mean/v1-1))
				if len(*h) > 3 {
					*h = (*h)[1:]
				}
			}
			s.gain.Add(freqHz, mean/s.ampVrms)
			s.scoutGain = 0
			if pt.Readings >= 2 {
				s.noise = append(s.noise, pt.StdRel*math.Sqrt(float64(pt.Readings)))
				if len(s.noise) > 3 {
					s.noise = s.noise[1:]
				}
			}
		}
	}
	return pt, false, nil
}

// modelPointS is the model's estimate of a passband point's time: the
// readings alone (used to scale the ETA).
func (s *sweeper) modelPointS(freqHz float64) float64 {
	m := s.meter()
	rd, _ := settle.ChooseAperture(freqHz, s.tau(), rippleShare*s.plan.Settle.Tolerance, m)
	n := max(2, s.plan.Settle.Readings)
	return float64(n)*rd.TimeS(m) + s.plan.Settle.MinDwellS
}

// progress publishes the run's progress.
func (s *sweeper) progress() {
	r := s.r
	done := len(s.pts)
	total := s.nPlan + s.refinedCount()
	remaining := 0.0
	measured := map[int]bool{}
	for _, p := range s.pts {
		measured[p.Index] = true
	}
	for i, f := range s.freqs {
		if !measured[i] {
			remaining += s.modelPointS(f.Hz)
		}
	}
	ratio := 1.0
	if s.modelSum > 0 {
		ratio = s.actSum / s.modelSum
	}
	remaining *= ratio
	if n := s.refineExpected() - s.refinedCount(); n > 0 && len(s.pts) > 0 {
		// The refinement still to come, at the mean measured point time
		// (its points sit on the skirts, where the dwells are).
		remaining += float64(n) * s.actSum / float64(len(s.pts))
	}
	eta := remaining / r.scale()
	r.mu.Lock()
	r.status.Done, r.status.Total, r.status.ETASec = done, total, eta
	elapsed := r.clock.Now().Sub(r.t0).Seconds()
	freq := r.status.FreqHz
	r.mu.Unlock()
	r.emit(event.Event{Type: event.TypeProgress, Progress: &event.Progress{Done: done, Total: total, FreqHz: freq, ETASec: eta, Elapsed: elapsed}})
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
		if math.Abs(v-prev) <= tol*v {
			break
		}
		prev = v
	}
	return v, nil
}
