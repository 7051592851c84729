package analysis

import (
	"fmt"
	"io"
	"math"
	"strings"
)

// Text returns the text report (see Report).
func (r *Result) Text() string {
	var b strings.Builder
	r.Report(&b)
	return b.String()
}

// Report writes the figures as a plain-text report, one figure a line.
func (r *Result) Report(w io.Writer) error {
	var b strings.Builder
	p := func(format string, a ...any) { fmt.Fprintf(&b, format+"\n", a...) }
	p("points:       %d measured, %d used, %d excluded", r.Points, r.Included, len(r.Excluded))
	p("sweep:        %s to %s", FormatHz(r.SweepHz[0], 4), FormatHz(r.SweepHz[1], 4))
	switch r.ReferenceMode {
	case RefFrequency:
		p("reference:    %.3f dB at %s (gain at the reference frequency)", r.ReferenceGainDB, FormatHz(r.ReferenceHz, 4))
	case RefMax:
		p("reference:    %.3f dB at %s (passband maximum)", r.ReferenceGainDB, FormatHz(r.ReferenceHz, 4))
	case RefBand:
		p("reference:    %.3f dB (mean over %s to %s)", r.ReferenceGainDB, FormatHz(r.ReferenceBandHz[0], 4), FormatHz(r.ReferenceBandHz[1], 4))
	}
	if r.Through {
		p("              normalised by a through run")
	}
	p("level:        %.4f dB (corners where the gain is %.3f dB)", r.LevelDB, r.ThresholdDB)
	corner := func(name string, hz, u, beyond *float64, low bool) {
		switch {
		case hz != nil && u != nil && *u > 0:
			p("%-13s %s (k = %g) [%s]", name+":", FormatWithU(*hz, *u), r.CoverageFactor, r.CornerSource)
		case hz != nil:
			p("%-13s %s [%s]", name+":", FormatHz(*hz, 4), r.CornerSource)
		case low && r.DCCoupled:
			p("%-13s none: DC-coupled (flat down to %s)", name+":", FormatHz(*beyond, 4))
		case low && r.LowUnderRangeHz != nil:
			p("%-13s not measurable on this range (under-range up to %s; no crossing at or above %s)", name+":", FormatHz(*r.LowUnderRangeHz, 4), FormatHz(*beyond, 4))
		case !low && r.HighUnderRangeFromHz != nil:
			p("%-13s not measurable on this range (under-range from %s; no crossing at or below %s)", name+":", FormatHz(*r.HighUnderRangeFromHz, 4), FormatHz(*beyond, 4))
		case low:
			p("%-13s below the sweep (no crossing at or above %s)", name+":", FormatHz(*beyond, 4))
		default:
			p("%-13s above the sweep (no crossing at or below %s)", name+":", FormatHz(*beyond, 4))
		}
	}
	corner("low corner", r.LowHz, r.LowUHz, r.LowBeyondHz, true)
	corner("high corner", r.HighHz, r.HighUHz, r.HighBeyondHz, false)
	ie, me := r.Estimators.Interpolation, r.Estimators.Model
	if me != nil {
		p("estimators:   interpolation low %s, high %s; model low %s, high %s", optHz(ie.LowHz), optHz(ie.HighHz), optHz(me.LowHz), optHz(me.HighHz))
		var diffs []string
		if r.Agreement.LowRel != nil {
			diffs = append(diffs, fmt.Sprintf("low %+.3f %%", 100**r.Agreement.LowRel))
		}
		if r.Agreement.HighRel != nil {
			diffs = append(diffs, fmt.Sprintf("high %+.3f %%", 100**r.Agreement.HighRel))
		}
		if len(diffs) > 0 {
			p("              model − interpolation: %s; %s", strings.Join(diffs, ", "), r.Agreement.Note)
		} else {
			p("              %s", r.Agreement.Note)
		}
	}
	if len(r.Crossings) > 2 {
		var cs []string
		for _, c := range r.Crossings {
			dir := "falling"
			if c.Rising {
				dir = "rising"
			}
			cs = append(cs, FormatHz(c.FreqHz, 4)+" "+dir)
		}
		p("crossings:    %d: %s (the passband around the reference is reported)", len(r.Crossings), strings.Join(cs, ", "))
	}
	if r.BandwidthHz != nil {
		if r.CentreHz != nil {
			p("bandwidth:    %s, geometric centre %s", FormatHz(*r.BandwidthHz, 4), FormatHz(*r.CentreHz, 4))
		} else {
			p("bandwidth:    %s (from DC)", FormatHz(*r.BandwidthHz, 4))
		}
	}
	if r.FlatnessDB != nil {
		p("flatness:     %.3f dB peak to peak from %s to %s", *r.FlatnessDB, FormatHz(r.FlatnessSpanHz[0], 4), FormatHz(r.FlatnessSpanHz[1], 4))
	}
	p("peaking:      %+.3f dB at %s", r.PeakingDB, FormatHz(r.PeakingHz, 4))
	slope := func(name string, s *Slope) {
		if s == nil {
			return
		}
		p("%-13s %+.1f dB/decade (%+.1f dB/octave), about order %d; %d points, %s to %s, %s", name+":", s.DBPerDecade, s.DBPerOctave, s.Order, s.Points, FormatHz(s.SpanHz[0], 3), FormatHz(s.SpanHz[1], 3), s.Method)
	}
	slope("roll-off low", r.SlopeLow)
	slope("roll-off high", r.SlopeHigh)
	if m := r.Model; m != nil {
		verdict := "not used"
		if m.Accepted {
			verdict = "used for the corners"
		}
		p("model:        behaves like %s (gain %.3f dB)", m.Description, m.GainDB)
		p("              %s; %s", verdict, m.Reason)
	}
	if len(r.Excluded) > 0 {
		var es []string
		for _, e := range r.Excluded {
			es = append(es, fmt.Sprintf("%s (%s)", FormatHz(e.FreqHz, 4), strings.Join(e.Reasons, ", ")))
		}
		p("excluded:     %s", strings.Join(es, "; "))
	}
	if v := r.Mask; v != nil {
		name := v.Name
		if name == "" {
			name = v.File
		}
		res := "PASS"
		if !v.Pass {
			res = "FAIL"
		}
		line := fmt.Sprintf("mask:         %s %s: %d points checked, %d failed", res, name, v.Checked, v.Failed)
		if v.WorstMarginDB != nil {
			line += fmt.Sprintf("; worst margin %+.3f dB at %s (%s limit)", *v.WorstMarginDB, FormatHz(*v.WorstHz, 4), v.WorstLimit)
		}
		p("%s", line)
	}
	if line := r.Drift.Line(); line != "" {
		p("drift:        %s", line)
	}
	r.reportBudget(p)
	_, err := io.WriteString(w, b.String())
	return err
}

// FormatWithU renders "95.1 kHz ± 0.4 kHz": the uncertainty with two
// significant digits, the value rounded to the same decimal place, both in
// the value's unit.
func FormatWithU(hz, uHz float64) string {
	if !(uHz > 0) || math.IsInf(uHz, 0) {
		return FormatHz(hz, 5) + " (uncertainty unknown)"
	}
	unit, div := "Hz", 1.0
	switch a := math.Abs(hz); {
	case a >= 1e6:
		unit, div = "MHz", 1e6
	case a >= 1e3:
		unit, div = "kHz", 1e3
	}
	v, u := hz/div, uHz/div
	d := 0
	if u > 0 {
		d = 1 - int(math.Floor(math.Log10(u)))
	}
	d = max(0, min(d, 9))
	return fmt.Sprintf("%.*f %s ± %.*f %s", d, v, unit, d, u, unit)
}

func optHz(v *float64) string {
	if v == nil {
		return "none"
	}
	return FormatHz(*v, 5)
}
