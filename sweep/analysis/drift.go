package analysis

import (
	"fmt"
	"math"
	"slices"
	"sort"
	"strings"

	"rolloff/sweep/point"
)

// Drift is the drift check of a run: the reference frequency measured
// again (points flagged drift-check) against the sweep's gain there.
type Drift struct {
	// Checks are the re-measurements in the order taken.
	Checks []DriftCheck `json:"checks"`
	// ChangeDB is the largest change in magnitude, UDB its expanded
	// uncertainty (k = CoverageFactor), at Seq.
	ChangeDB float64 `json:"change_db"`
	UDB      float64 `json:"u_db"`
	Seq      int     `json:"seq"`
	// Flagged is set when any change exceeds its expanded uncertainty:
	// the bench drifted during the run by more than the measurement can
	// explain, and its figures are in doubt.
	Flagged bool `json:"flagged"`
}

// DriftCheck is one re-measurement of the reference: its gain, the
// sweep's gain at that frequency (interpolated between the points around
// it), the change and its expanded uncertainty. Unusable says why a
// re-measurement flagged for other reasons (under-range, unsettled…) was
// not compared.
type DriftCheck struct {
	Seq        int      `json:"seq"`
	FreqHz     float64  `json:"freq_hz"`
	GainDB     float64  `json:"gain_db"`
	SweepDB    float64  `json:"sweep_db"`
	ChangeDB   float64  `json:"change_db"`
	UDB        float64  `json:"u_db"`
	Unusable   []string `json:"unusable,omitempty"`
	rangeIndex int
}

// Line sums the drift check up in one sentence ("" for none).
func (d *Drift) Line() string {
	if d == nil || len(d.Checks) == 0 {
		return ""
	}
	used := 0
	for _, c := range d.Checks {
		if len(c.Unusable) == 0 {
			used++
		}
	}
	n := fmt.Sprintf("reference re-measured %d time%s", len(d.Checks), plural(len(d.Checks)))
	if used == 0 {
		return n + ", none usable (" + strings.Join(d.Checks[0].Unusable, ", ") + ")"
	}
	verdict := "within its uncertainty"
	if d.Flagged {
		verdict = "DRIFT: larger than its uncertainty, the figures are in doubt"
	}
	return fmt.Sprintf("%s at %s; largest change %+.4f dB ± %.4f dB (k = %g), %s", n, FormatHz(d.Checks[0].FreqHz, 4), d.ChangeDB, d.UDB, CoverageFactor, verdict)
}

func plural(n int) string {
	if n == 1 {
		return ""
	}
	return "s"
}

// isDriftCheck reports whether a sample is a drift check (whatever else
// it is flagged for: drift compares it or says why not).
func isDriftCheck(s Sample) bool { return slices.Contains(s.Reasons, point.FlagDriftCheck) }

// drift compares the drift checks with the response a describes (its
// included samples and interpolant it). The uncertainty of a change
// combines, as independent inputs (JCGM 100:2008 §5.1.2), the Type A
// scatter of the check and of the sweep's points around it (the larger of
// the two neighbours'), the settle residual of each (rectangular, ± the
// settling tolerance) and, where the check was read on another converter
// range than the sweep's nearest point, both ranges' gain errors
// (rectangular). The errors common to the two readings — flatness,
// generator, linearity at the same fraction of scale — cancel.
func (a *analysis) drift(checks []Sample, pts []point.Point, it *Interpolant) *Drift {
	if len(checks) == 0 {
		return nil
	}
	sort.SliceStable(checks, func(i, j int) bool { return checks[i].Seq < checks[j].Seq })
	d := &Drift{Checks: []DriftCheck{}}
	rangeOf := func(pos int) int {
		if pos >= 0 && pos < len(pts) {
			return pts[pos].RangeIndex
		}
		return -1
	}
	tol, rangeGain := 0.0, 0.0
	if sp := a.o.Spec; sp != nil {
		tol, rangeGain = sp.SettleTolRel, sp.ConverterRangeGainRel
	}
	worst := -1.0
	for _, s := range checks {
		c := DriftCheck{Seq: s.Seq, FreqHz: s.FreqHz, GainDB: s.GainDB, rangeIndex: rangeOf(s.Pos)}
		for _, r := range s.Reasons {
			if r != point.FlagDriftCheck {
				c.Unusable = append(c.Unusable, r)
			}
		}
		x := log10(s.FreqHz)
		if x < a.x0 || x > a.x1 {
			c.Unusable = append(c.Unusable, "outside the swept span")
		}
		if len(c.Unusable) > 0 || math.IsNaN(s.GainDB) {
			d.Checks = append(d.Checks, c)
			continue
		}
		c.SweepDB = it.atLog(x)
		c.ChangeDB = c.GainDB - c.SweepDB
		i := sort.SearchFloat64s(a.xs, x)
		lo, hi := max(0, i-1), min(len(a.xs)-1, i)
		nearest := lo
		if math.Abs(a.xs[hi]-x) < math.Abs(a.xs[lo]-x) {
			nearest = hi
		}
		uSweep := math.Max(math.Hypot(a.inc[lo].UADB, a.noiseDB), math.Hypot(a.inc[hi].UADB, a.noiseDB))
		uCheck := math.Hypot(s.UADB, a.noiseDB)
		uSettle := dbPerRel * tol / math.Sqrt(3)
		u2 := uSweep*uSweep + uCheck*uCheck + 2*uSettle*uSettle
		if r := rangeOf(a.inc[nearest].Pos); r != c.rangeIndex {
			ug := dbPerRel * rangeGain / math.Sqrt(3)
			if a.o.Spec == nil && c.rangeIndex >= 0 && s.Pos < len(pts) {
				ug = dbPerRel * pts[s.Pos].ConvAccRel / math.Sqrt(3)
			}
			u2 += 2 * ug * ug
		}
		c.UDB = CoverageFactor * math.Sqrt(u2)
		d.Checks = append(d.Checks, c)
		if m := math.Abs(c.ChangeDB); m > worst {
			worst = m
			d.ChangeDB, d.UDB, d.Seq = c.ChangeDB, c.UDB, c.Seq
		}
		if math.Abs(c.ChangeDB) > c.UDB {
			d.Flagged = true
		}
	}
	return d
}
