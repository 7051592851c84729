package analysis

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"sort"
)

// ErrNoBudget is returned by MonteCarlo for a result without a corner
// budget (no corner found).
var ErrNoBudget = errors.New("analysis: no corner budget to draw from")

// MaxMonteCarloTrials bounds MonteCarlo's trials.
const MaxMonteCarloTrials = 10_000_000

// MonteCarloInterval is the probabilistically symmetric 95 % coverage
// interval of one corner from the Monte Carlo draws (JCGM 101:2008 §7.7):
// the 2.5 % and 97.5 % quantiles of the corners recomputed, and the
// draws' mean and standard deviation. Lost counts the trials in which the
// perturbed response did not cross the level near the corner.
type MonteCarloInterval struct {
	Low95Hz  float64 `json:"low_95_hz"`
	High95Hz float64 `json:"high_95_hz"`
	MeanHz   float64 `json:"mean_hz"`
	StdHz    float64 `json:"std_hz"`
	Trials   int     `json:"trials"`
	Lost     int     `json:"lost"`
	// GUM is the JCGM 101:2008 §8 validation of the GUM framework's
	// interval against this one, when Analyze made the check
	// (Options.MonteCarloCheck).
	GUM *GUMCheck `json:"gum,omitempty"`
}

// GUMCheck is the outcome of the validation of one corner's GUM-framework
// interval by Monte Carlo: the expanded uncertainty the budget gave, the
// comparison, and whether the reported uncertainty is the Monte Carlo
// interval's (Adopted) because the validation failed.
type GUMCheck struct {
	UHz        float64    `json:"u_hz"`
	K          float64    `json:"k"`
	Validation Validation `json:"validation"`
	Adopted    bool       `json:"adopted"`
}

// checkByMonteCarlo validates each corner's GUM-framework interval with n
// seeded Monte Carlo trials (JCGM 101:2008 §8, u(y) stated to two
// significant digits) and, where the validation fails, reports the Monte
// Carlo 95 % interval instead (JCGM 101:2008 §8.4): as the half-width
// about the corner that encloses it, to keep the report's y ± U form.
// This matters where one rectangular input dominates: y ± 2u then covers
// all of its distribution, the Monte Carlo interval 95 % of it (JCGM
// 101:2008 §9.2). The outcome is kept in r.MonteCarlo.
func (r *Result) checkByMonteCarlo(n int) error {
	mc, err := r.RunMonteCarlo(n, checkSeed)
	if err != nil {
		return err
	}
	// Where the interval is adopted, its ends come from the tails of the
	// draws: they are drawn again with five times the trials, so that
	// each end rests on about 2 500 draws beyond it (JCGM 101:2008 §7.9:
	// the interval's numerical accuracy grows with the trials).
	fails := func(y, U *float64, iv *MonteCarloInterval) bool {
		return y != nil && U != nil && iv != nil && !Validate(*y, *U, CoverageFactor, *iv, 2).Pass
	}
	if fails(r.LowHz, r.LowUHz, mc.Low) || fails(r.HighHz, r.HighUHz, mc.High) {
		big, err := r.RunMonteCarlo(min(5*n, MaxMonteCarloTrials), checkSeed+1)
		if err != nil {
			return err
		}
		mc = big
	}
	for _, side := range []struct {
		y, U **float64
		iv   *MonteCarloInterval
	}{{&r.LowHz, &r.LowUHz, mc.Low}, {&r.HighHz, &r.HighUHz, mc.High}} {
		if *side.y == nil || *side.U == nil || side.iv == nil {
			continue
		}
		y, U := **side.y, **side.U
		ck := &GUMCheck{UHz: U, K: CoverageFactor, Validation: Validate(y, U, CoverageFactor, *side.iv, 2)}
		if !ck.Validation.Pass {
			if enc := math.Max(y-side.iv.Low95Hz, side.iv.High95Hz-y); enc > 0 {
				*side.U = ptr(enc)
				ck.Adopted = true
			}
		}
		side.iv.GUM = ck
	}
	r.MonteCarlo = mc
	return nil
}

// checkSeed seeds the draws of the check that Analyze makes.
const checkSeed = 0x726f6c6c6f6666

// MonteCarlo is the outcome of Result.RunMonteCarlo: one interval per corner
// found (nil for a side without one).
type MonteCarlo struct {
	Low  *MonteCarloInterval `json:"low"`
	High *MonteCarloInterval `json:"high"`
	Seed uint64              `json:"seed"`
}

// RunMonteCarlo propagates the distributions of the corners' budget inputs
// by drawing (JCGM 101:2008 §7): in each of n trials every input is drawn
// once with its distribution — so that an error common to a range or a
// band shifts every reading it belongs to — the drawn errors shift the
// response (linearly between the points), and the corners are found
// again at the level taken from the shifted reference; through a fitted
// model, the shifted data move the model's parameters by the fit's
// linear response. A direct input
// on ln fc (the fit's Type A part, the interpolation's method error) is
// drawn as a normal shift of the corner. The draws are seeded.
func (r *Result) RunMonteCarlo(n int, seed uint64) (*MonteCarlo, error) {
	if n < 1 || n > MaxMonteCarloTrials {
		return nil, fmt.Errorf("%w: Monte Carlo trials %d: want 1 to %d", ErrOptions, n, MaxMonteCarloTrials)
	}
	b := r.budget
	if b == nil {
		return nil, ErrNoBudget
	}
	rng := rand.New(rand.NewPCG(seed, 0x6d6f6e7465636172))
	var draws [2][]float64
	lost := [2]int{}
	d := make([]float64, len(b.xs))
	// Through a fitted model the corners move linearly with the drawn
	// errors: each group's coefficient once, per corner.
	var lin [][][2]float64
	if b.shift != nil {
		for _, c := range b.comps {
			var cl [][2]float64
			for _, g := range c.groups {
				var co [2]float64
				for side := 0; side < 2; side++ {
					if b.corners[side] != nil {
						co[side] = b.groupShift(side, g, d)
					}
				}
				cl = append(cl, co)
			}
			lin = append(lin, cl)
		}
	}
	for t := 0; t < n; t++ {
		clear(d)
		// acc is the drawn shift of ln fc: the direct inputs, and through
		// a fitted model every input.
		var acc [2]float64
		for ci, c := range b.comps {
			for gi, g := range c.groups {
				e := draw(rng, g.dist, g.a)
				if lin != nil {
					acc[0] += lin[ci][gi][0] * e
					acc[1] += lin[ci][gi][1] * e
					continue
				}
				for k, i := range g.idx {
					d[i] += g.val[k] * e
				}
			}
			for side := 0; side < 2; side++ {
				if c.direct[side] > 0 {
					acc[side] += rng.NormFloat64() * c.direct[side]
				}
			}
		}
		for side := 0; side < 2; side++ {
			if b.corners[side] == nil {
				continue
			}
			x, ok := *b.corners[side], !math.IsNaN(acc[side])
			if lin == nil {
				x, ok = b.perturbed(x, d)
			}
			if !ok {
				lost[side]++
				continue
			}
			draws[side] = append(draws[side], math.Pow(10, x)*math.Exp(acc[side]))
		}
	}
	mc := &MonteCarlo{Seed: seed}
	for side := 0; side < 2; side++ {
		if b.corners[side] == nil || len(draws[side]) == 0 {
			continue
		}
		iv := interval95(draws[side])
		iv.Trials, iv.Lost = n, lost[side]
		if side == 0 {
			mc.Low = &iv
		} else {
			mc.High = &iv
		}
	}
	return mc, nil
}

func draw(rng *rand.Rand, dist string, a float64) float64 {
	switch dist {
	case DistRectangular:
		return a * (2*rng.Float64() - 1)
	case DistArcsine:
		// a·sin φ, φ uniform (JCGM 101:2008 §6.4.6).
		return a * math.Sin(2*math.Pi*rng.Float64())
	}
	return a * rng.NormFloat64()
}

// interval95 returns the probabilistically symmetric 95 % interval of
// the draws: the values at ranks q·M and (1−q)·M of the sorted M draws,
// q = 0.025 (JCGM 101:2008 §7.7.2), and their mean and standard deviation.
func interval95(v []float64) MonteCarloInterval {
	sort.Float64s(v)
	m := len(v)
	at := func(p float64) float64 {
		k := int(math.Round(p * float64(m)))
		return v[max(0, min(m-1, k-1))]
	}
	var mean, ss float64
	for _, x := range v {
		mean += x
	}
	mean /= float64(m)
	for _, x := range v {
		ss += (x - mean) * (x - mean)
	}
	sd := 0.0
	if m > 1 {
		sd = math.Sqrt(ss / float64(m-1))
	}
	return MonteCarloInterval{Low95Hz: at(0.025), High95Hz: at(0.975), MeanHz: mean, StdHz: sd}
}

// Validation is the comparison of the GUM framework's coverage interval
// y ± U with the Monte Carlo one (JCGM 101:2008 §8): the distances of the
// two ends, the numerical tolerance δ, and whether both distances are
// within it.
type Validation struct {
	DLowHz  float64 `json:"d_low_hz"`
	DHighHz float64 `json:"d_high_hz"`
	DeltaHz float64 `json:"delta_hz"`
	Pass    bool    `json:"pass"`
}

// Validate compares y ± uExpanded with the Monte Carlo interval mc, the
// standard uncertainty uExpanded/k stated to nDig significant digits:
// written c·10^l with c an nDig-digit integer, δ = 10^l/2 (JCGM 101:2008
// §7.9.2 and §8.2); d_low = |y − U − y_low|, d_high = |y + U − y_high|
// (§8.3).
func Validate(y, uExpanded, k float64, mc MonteCarloInterval, nDig int) Validation {
	u := uExpanded / k
	l := math.Floor(math.Log10(math.Abs(u))) - float64(nDig-1)
	delta := math.Pow(10, l) / 2
	v := Validation{DLowHz: math.Abs(y - uExpanded - mc.Low95Hz), DHighHz: math.Abs(y + uExpanded - mc.High95Hz), DeltaHz: delta}
	v.Pass = v.DLowHz <= delta && v.DHighHz <= delta
	return v
}
