package sched

import (
	"fmt"
	"math"
)

// tauEstimate is what the approaches seen on one converter range say of
// its time constant: the weighted mean of the fitted time constants,
// physical seconds, its standard uncertainty and how many approaches it
// rests on.
type tauEstimate struct {
	TauS  float64
	UTauS float64
	N     int
}

// Confident reports whether the estimate is good enough to replace the
// profile's time constant: two approaches at least, known to 5 %.
func (e tauEstimate) Confident() bool {
	return e.N >= 2 && e.TauS > 0 && e.UTauS <= tauConfidentRel*e.TauS
}

const (
	tauConfidentRel = 0.05 // an estimate known to this is used in place of the profile's
	tauProfileRel   = 0.20 // the profile's time constant is taken as known to this (standard uncertainty)
	tauReportRel    = 0.20 // a profile this far off is reported
	tauLearnRel     = 0.05 // an approach is learnt from when it fixes τ to this
	tauBookMax      = 32   // approaches kept per range
)

// tauBook learns the converter's time constant per range from the
// approaches fitted during the run (see settle.FitApproach).
type tauBook struct {
	fits     map[int][]tauFit
	reported map[int]bool
}

type tauFit struct{ tauS, uS float64 }

// add records an approach on range rng that fitted the time constant
// tauS with standard uncertainty uS.
func (b *tauBook) add(rng int, tauS, uS float64) {
	if !(tauS > 0) || !(uS > 0) {
		return
	}
	if b.fits == nil {
		b.fits = map[int][]tauFit{}
	}
	h := append(b.fits[rng], tauFit{tauS, uS})
	if len(h) > tauBookMax {
		h = h[1:]
	}
	b.fits[rng] = h
}

// estimate returns what is known of range rng's time constant: the
// weighted mean of this run's fits, its uncertainty widened by the fits' scatter when that exceeds what
// their uncertainties explain (the Birge ratio, common practice); ok is
// false when nothing is known.
func (b *tauBook) estimate(rng int) (tauEstimate, bool) {
	fits := b.fits[rng]
	if len(fits) == 0 {
		return tauEstimate{}, false
	}
	var sw, swx float64
	for _, f := range fits {
		w := 1 / (f.uS * f.uS)
		sw += w
		swx += w * f.tauS
	}
	m := swx / sw
	u := 1 / math.Sqrt(sw)
	if len(fits) > 1 {
		var chi2 float64
		for _, f := range fits {
			chi2 += (f.tauS - m) * (f.tauS - m) / (f.uS * f.uS)
		}
		if r := chi2 / float64(len(fits)-1); r > 1 {
			u *= math.Sqrt(r)
		}
	}
	return tauEstimate{TauS: m, UTauS: u, N: len(fits)}, true
}

// priorFor returns the time constant an approach fit on range rng starts
// from and its standard uncertainty: the learnt estimate when confident,
// else the profile's tauS taken as known to tauProfileRel.
func (b *tauBook) priorFor(rng int, profileS float64) (tauS, uS float64) {
	if e, ok := b.estimate(rng); ok && e.Confident() {
		return e.TauS, e.UTauS
	}
	return profileS, tauProfileRel * profileS
}

// offProfile returns a report, once per range, when the learnt time
// constant of range rng (named name) is confidently more than
// tauReportRel from the profile's profileS.
func (b *tauBook) offProfile(rng int, name string, profileS float64) (string, bool) {
	e, ok := b.estimate(rng)
	if !ok || !e.Confident() || b.reported[rng] || !(profileS > 0) {
		return "", false
	}
	d := e.TauS/profileS - 1
	if math.Abs(d) <= tauReportRel || math.Abs(e.TauS-profileS) <= tauReportRel*profileS+2*e.UTauS {
		return "", false
	}
	if b.reported == nil {
		b.reported = map[int]bool{}
	}
	b.reported[rng] = true
	return fmt.Sprintf("converter range %s: time constant measured %.3g s ± %.2g s over %d approaches, the profile says %.3g s (%+.0f %%); the measured one is used",
		name, e.TauS, e.UTauS, e.N, profileS, 100*d), true
}
