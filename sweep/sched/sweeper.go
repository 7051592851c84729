package sched

import (
	"math"

	"rolloff/driver"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/settle"
)

// sweeper is the loop's private state; only the run goroutine touches it.
type sweeper struct {
	r     *Run
	inst  Instruments
	plan  *plan.Plan
	ranks []int // range indices by ascending full scale

	bench benchState   // the instruments' settings
	conv  convModel    // the converter's averaged state
	hold  holdSchedule // the converter's output hold as seen so far
	pred  predictor    // the gain predictor and its error history
	taus  tauBook      // the converter's time constants as its approaches show them
	prog  progress     // the points measured and their timing
}

// benchState is what the scheduler knows of the instruments' settings:
// the converter's range, the generator's amplitude, output and frequency,
// and the voltmeter's configuration.
type benchState struct {
	rangeIdx   int
	rangeKnown bool
	ampVrms    float64
	ampSet     bool
	outputOn   bool
	freqHz     float64
	freqSet    bool
	reading    settle.Reading // the aperture and averaging of a reading
	dcCfg      driver.DCConfig
	acCfg      driver.ACConfig
	cfgOK      bool
	latencyS   float64 // a single reading's round trip less its aperture, measured at the start (0: not)
	acExpect   float64 // the AC meter's expected reading at the point, Vrms (0: unknown)
	acFloor    int     // the smallest AC range index an overload left
}

// holdSchedule is what the scheduler has seen of the converter's
// periodic output hold (see holdGuard and learnHold).
type holdSchedule struct {
	// Since tOK (physical s) the output has stayed within the tolerance
	// of vRef (Vrms).
	tOK, vRef float64
	// A hold began in [lo, hi] (physical s), when known.
	lo, hi float64
	known  bool
}

// predictor is the gain prediction from the points so far and the
// history of its errors and of the readings' scatter.
type predictor struct {
	gain      settle.Predictor // gain vs frequency
	scoutGain float64          // the first point's gain from its first reading
	refining  bool             // the point's prediction is the refinement's interpolation
	// errs are the last points' relative prediction errors, of the slope
	// prediction [0] and of the refinement's interpolation [1].
	errs [2][]float64
	// noise is the readings' relative scatter (per reading), from the
	// last points' Type A deviations.
	noise []float64
	// fitNoise is the readings' scatter as the last predicted approaches
	// on each converter range showed it in their residuals, a fraction
	// of the range's full scale (the noise of a converter and of its
	// voltmeter is in volts, not relative): readings taken while the
	// converter still moves spread by the motion, which their deviation
	// counts as noise and a fit does not.
	fitNoise map[int][]float64
}

// predHistory is the number of points the error and noise histories keep.
const predHistory = 3

// err returns the largest relative prediction error of the last points,
// of the refinement's interpolation or of the slope prediction.
func (p *predictor) err(interp bool) float64 {
	h := p.errs[0]
	if interp {
		h = p.errs[1]
	}
	var e float64
	for _, x := range h {
		e = math.Max(e, x)
	}
	return e
}

// noteError records a point's relative prediction error.
func (p *predictor) noteError(interp bool, rel float64) {
	h := &p.errs[0]
	if interp {
		h = &p.errs[1]
	}
	*h = keepLast(append(*h, rel))
}

// noteNoise records a point's relative scatter per reading.
func (p *predictor) noteNoise(rel float64) { p.noise = keepLast(append(p.noise, rel)) }

// trendNoise returns the offset from the final value that the readings'
// noise can fake in the converge test's trend check on a window spanning
// spanS with time constant tauS: τ·σ·√2 over the span (∞ while the noise
// is not known yet).
func (p *predictor) trendNoise(tauS, spanS float64) float64 {
	if len(p.noise) == 0 {
		return math.Inf(1)
	}
	var sig float64
	for _, x := range p.noise {
		sig = math.Max(sig, x)
	}
	if spanS <= 0 {
		return math.Inf(1)
	}
	return tauS * sig * math.Sqrt2 / spanS
}

func keepLast(h []float64) []float64 {
	if len(h) > predHistory {
		return h[1:]
	}
	return h
}

// progress is the run's points and their timing.
type progress struct {
	seq      int // the next point's sequence number
	pts      []point.Point
	nPlan    int // the plan's points
	freqs    []plan.Freq
	modelSum float64 // model estimate of the points measured so far, physical s
	actSum   float64 // their actual duration, physical s
	drift    bool    // the point being measured is a drift check
}
