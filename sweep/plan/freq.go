package plan

import (
	"fmt"
	"math"
	"slices"
	"strconv"
)

// Freq is one frequency of a plan, in measurement order.
type Freq struct {
	Hz float64
	// Label is the frequency for people: the ISO 266 nominal mid-band
	// frequency on a bands plan where one exists ("31.5", "1.25k"),
	// else the frequency to 3 (bands) or 4 significant figures.
	Label string
}

// relEps is the relative tolerance within which two frequencies are the
// same (rounding of a computed grid point against a value typed in a file).
const relEps = 1e-9

// Freqs returns the plan's frequencies in the order they are measured:
// ascending, or descending when frequencies.descending is set. A point's
// plan index is its position in this slice. (It is not called Frequencies:
// that name is taken by the field and its type.)
//
//   - log with points_per_decade n: the grid 10^(k/n) Hz for integer k,
//     anchored on the decades (so 10 Hz, 100 Hz, 1 kHz, 10 kHz are exact
//     grid points when in range), between start_hz and stop_hz, plus
//     start_hz and stop_hz themselves when they are not grid points;
//   - log with points N: N points from start_hz to stop_hz inclusive,
//     equally spaced in log f;
//   - linear with points N: N points from start_hz to stop_hz inclusive;
//     with step_hz: start_hz + i·step_hz up to stop_hz, plus stop_hz when
//     the steps do not land on it;
//   - bands: the IEC 61260-1 base-10 mid-band frequencies of 1/b-octave
//     bands whose exact or ISO 266 nominal mid-band lies in
//     [start_hz, stop_hz] (so start_hz = 20 keeps the 19.953 Hz band);
//   - list: frequencies_hz, sorted (the order written is not kept).
//
// It checks only what it needs to compute them; Validate checks the rest.
func (p *Plan) Freqs() ([]Freq, error) {
	f := &p.Frequencies
	n, err := p.check()
	if err != nil {
		return nil, err
	}
	out := make([]Freq, 0, n)
	label := func(hz float64) Freq { return Freq{Hz: hz, Label: FormatHz(hz, 4)} }
	switch f.Spacing {
	case SpacingLog:
		if f.PointsPerDecade > 0 {
			n := f.PointsPerDecade
			kLo, kHi := gridRange(f.StartHz, f.StopHz, n)
			half := 0.5 / float64(n) // half a step, in decades
			if !near(decadeGrid(kLo, n), f.StartHz) {
				out = append(out, label(f.StartHz))
			}
			for k := kLo; k <= kHi; k++ {
				g := decadeGrid(k, n)
				edge := near(g, f.StartHz) || near(g, f.StopHz)
				if !edge && k%n != 0 && (math.Log10(g/f.StartHz) < half || math.Log10(f.StopHz/g) < half) {
					continue // too close to a requested end point
				}
				out = append(out, label(g))
			}
			if !near(decadeGrid(kHi, n), f.StopHz) {
				out = append(out, label(f.StopHz))
			}
		} else {
			lo, hi := math.Log(f.StartHz), math.Log(f.StopHz)
			for i := range f.Points {
				hz := math.Exp(lo + (hi-lo)*float64(i)/float64(f.Points-1))
				switch i {
				case 0:
					hz = f.StartHz
				case f.Points - 1:
					hz = f.StopHz
				}
				out = append(out, label(hz))
			}
		}
	case SpacingLinear:
		if f.Points != 0 {
			for i := range f.Points {
				hz := f.StartHz + (f.StopHz-f.StartHz)*float64(i)/float64(f.Points-1)
				if i == f.Points-1 {
					hz = f.StopHz
				}
				out = append(out, label(hz))
			}
		} else {
			steps := int(math.Floor((f.StopHz-f.StartHz)/f.StepHz + relEps))
			for i := 0; i <= steps; i++ {
				out = append(out, label(f.StartHz+float64(i)*f.StepHz))
			}
			if last := out[len(out)-1].Hz; near(last, f.StopHz) {
				out[len(out)-1] = label(f.StopHz)
			} else if last < f.StopHz {
				out = append(out, label(f.StopHz))
			} else {
				out = out[:len(out)-1]
				out = append(out, label(f.StopHz))
			}
		}
	case SpacingBands:
		b := f.BandsPerOctave
		xLo, xHi := bandRange(f.StartHz, f.StopHz, b)
		for x := xLo; x <= xHi; x++ {
			hz := MidBandHz(x, b)
			nom, ok := Nominal(x, b)
			in := hz >= f.StartHz*(1-relEps) && hz <= f.StopHz*(1+relEps)
			if ok && nom >= f.StartHz && nom <= f.StopHz {
				in = true
			}
			if !in {
				continue
			}
			l := FormatHz(nom, 3)
			if !ok {
				l = FormatHz(hz, 3)
			}
			out = append(out, Freq{Hz: hz, Label: l})
		}
	case SpacingList:
		for _, hz := range f.ListHz {
			out = append(out, label(hz))
		}
		slices.SortStableFunc(out, func(a, b Freq) int {
			switch {
			case a.Hz < b.Hz:
				return -1
			case a.Hz > b.Hz:
				return 1
			}
			return 0
		})
	}
	if len(out) == 0 {
		return nil, p.fieldErr("frequencies.start_hz", fmtFloat(f.StartHz),
			fmt.Sprintf("no %s frequency lies in [%s, %s] Hz", f.Spacing, fmtFloat(f.StartHz), fmtFloat(f.StopHz)))
	}
	if f.Descending {
		slices.Reverse(out)
	}
	return out, nil
}

// pointCount says a point count in a message: in full up to a billion,
// beyond that in three significant digits (a step of 1e-300 Hz would
// otherwise print a count of 300 digits).
func pointCount(n float64) string {
	if n <= 1e9 {
		return fmt.Sprintf("%.0f", n)
	}
	return fmt.Sprintf("about %.3g", n)
}

// roundUp3 formats x > 0 rounded up to three significant digits, for a
// lower bound in a message.
func roundUp3(x float64) string {
	if !(x > 0) || math.IsInf(x, 0) {
		return fmtFloat(x)
	}
	e := math.Pow(10, math.Floor(math.Log10(x))-2)
	return strconv.FormatFloat(math.Ceil(x/e-1e-9)*e, 'g', 3, 64)
}

// check refuses a plan whose frequencies cannot be computed or are more
// than MaxPoints, and returns how many there are at most, without
// computing them.
func (p *Plan) check() (int, error) {
	f := &p.Frequencies
	rangeOK := func() error {
		if !(f.StartHz >= MinHz) || math.IsInf(f.StartHz, 0) {
			return p.fieldErr("frequencies.start_hz", fmtFloat(f.StartHz),
				"must be finite and ≥ "+fmtFloat(MinHz)+" Hz on a "+f.Spacing+" plan")
		}
		if !(f.StopHz > f.StartHz) || !(f.StopHz <= MaxHz) {
			return p.fieldErr("frequencies.stop_hz", fmtFloat(f.StopHz),
				"must be > frequencies.start_hz ("+fmtFloat(f.StartHz)+") and ≤ "+fmtFloat(MaxHz)+" Hz")
		}
		return nil
	}
	tooMany := func(field, val string, n float64) error {
		return p.fieldErr(field, val, fmt.Sprintf("gives %s points; at most %d", pointCount(n), MaxPoints))
	}
	switch f.Spacing {
	case SpacingLog:
		if err := rangeOK(); err != nil {
			return 0, err
		}
		if f.PointsPerDecade < 0 {
			return 0, p.fieldErr("frequencies.points_per_decade", strconv.Itoa(f.PointsPerDecade), "must be 1..1000")
		}
		if f.PointsPerDecade > 0 && f.Points != 0 {
			return 0, p.fieldErr("frequencies.points", strconv.Itoa(f.Points), "give points_per_decade or points, not both")
		}
		if f.PointsPerDecade > 0 {
			if f.PointsPerDecade > 1000 {
				return 0, p.fieldErr("frequencies.points_per_decade", strconv.Itoa(f.PointsPerDecade), "must be 1..1000")
			}
			est := float64(f.PointsPerDecade)*math.Log10(f.StopHz/f.StartHz) + 3
			if est > MaxPoints {
				return 0, tooMany("frequencies.points_per_decade", strconv.Itoa(f.PointsPerDecade), est)
			}
			return int(est) + 1, nil
		}
		if f.Points < 2 || f.Points > MaxPoints {
			return 0, p.fieldErr("frequencies.points", strconv.Itoa(f.Points), fmt.Sprintf("must be 2..%d", MaxPoints))
		}
		return f.Points, nil
	case SpacingLinear:
		if err := rangeOK(); err != nil {
			return 0, err
		}
		switch {
		case f.Points != 0 && f.StepHz != 0:
			return 0, p.fieldErr("frequencies.step_hz", fmtFloat(f.StepHz), "give points or step_hz, not both")
		case f.Points != 0:
			if f.Points < 2 || f.Points > MaxPoints {
				return 0, p.fieldErr("frequencies.points", strconv.Itoa(f.Points), fmt.Sprintf("must be 2..%d", MaxPoints))
			}
			return f.Points, nil
		case f.StepHz != 0:
			if !(f.StepHz > 0) || math.IsInf(f.StepHz, 0) {
				return 0, p.fieldErr("frequencies.step_hz", fmtFloat(f.StepHz), "must be > 0 and finite")
			}
			n := math.Floor((f.StopHz-f.StartHz)/f.StepHz+relEps) + 2
			if n > MaxPoints {
				minStep := (f.StopHz - f.StartHz) / (MaxPoints - 2)
				return 0, p.fieldErr("frequencies.step_hz", fmtFloat(f.StepHz),
					fmt.Sprintf("gives %s points; at most %d, so step_hz must be ≥ %s Hz from %s to %s Hz",
						pointCount(n), MaxPoints, roundUp3(minStep), fmtFloat(f.StartHz), fmtFloat(f.StopHz)))
			}
			return int(n), nil
		}
		return 0, p.fieldErr("frequencies.points", "0", "a linear plan needs points (2.."+strconv.Itoa(MaxPoints)+") or step_hz")
	case SpacingBands:
		if err := rangeOK(); err != nil {
			return 0, err
		}
		if !validBands(f.BandsPerOctave) {
			return 0, p.fieldErr("frequencies.bands_per_octave", strconv.Itoa(f.BandsPerOctave), "must be 1, 2, 3, 6, 12 or 24")
		}
		xLo, xHi := bandRange(f.StartHz, f.StopHz, f.BandsPerOctave)
		if n := float64(xHi) - float64(xLo) + 1; n > MaxPoints {
			return 0, tooMany("frequencies.bands_per_octave", strconv.Itoa(f.BandsPerOctave), n)
		}
		return xHi - xLo + 1, nil
	case SpacingList:
		if len(f.ListHz) == 0 {
			return 0, p.fieldErr("frequencies.frequencies_hz", "[]", "a list plan needs at least one frequency")
		}
		if len(f.ListHz) > MaxPoints {
			return 0, p.fieldErr("frequencies.frequencies_hz", strconv.Itoa(len(f.ListHz))+" entries", fmt.Sprintf("at most %d", MaxPoints))
		}
		for i, hz := range f.ListHz {
			if !(hz >= MinHz && hz <= MaxHz) {
				return 0, p.fieldErr(fmt.Sprintf("frequencies.frequencies_hz[%d]", i), fmtFloat(hz),
					fmt.Sprintf("must be in [%s, %s] Hz", fmtFloat(MinHz), fmtFloat(MaxHz)))
			}
		}
		return len(f.ListHz), nil
	}
	return 0, p.fieldErr("frequencies.spacing", strconv.Quote(f.Spacing), "must be one of log, linear, bands, list")
}

func near(a, b float64) bool { return math.Abs(a-b) <= relEps*math.Max(math.Abs(a), math.Abs(b)) }

// decadeGrid returns 10^(k/n), exact on the decades: 10^floor(k/n) (exact
// for the decades a float64 can hold) times 10^((k mod n)/n).
func decadeGrid(k, n int) float64 {
	d, r := floorDiv(k, n)
	v := math.Pow10(d)
	if r != 0 {
		v *= math.Pow(10, float64(r)/float64(n))
	}
	return v
}

func floorDiv(a, b int) (q, r int) {
	q, r = a/b, a%b
	if r < 0 {
		q--
		r += b
	}
	return q, r
}

// gridRange returns the k of the first and last grid points 10^(k/n) in
// [startHz, stopHz] (kLo > kHi when there is none).
func gridRange(startHz, stopHz float64, n int) (kLo, kHi int) {
	kLo = int(math.Ceil(float64(n) * math.Log10(startHz)))
	for decadeGrid(kLo-1, n) >= startHz*(1-relEps) {
		kLo--
	}
	for decadeGrid(kLo, n) < startHz*(1-relEps) {
		kLo++
	}
	kHi = int(math.Floor(float64(n) * math.Log10(stopHz)))
	for decadeGrid(kHi+1, n) <= stopHz*(1+relEps) {
		kHi++
	}
	for decadeGrid(kHi, n) > stopHz*(1+relEps) {
		kHi--
	}
	return kLo, kHi
}
