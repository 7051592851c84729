package plan

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"

	"rolloff/driver"
)

// Absolute bounds, whatever the bench says.
const (
	MinHz = 0.001 // lowest frequency a plan may name
	MaxHz = 1e9   // highest frequency a plan may name
	// maxErrors bounds how many problems Validate reports at once.
	maxErrors = 20
)

// fieldErr builds a *FieldError for field, with the file and line the
// plan was decoded from.
func (p *Plan) fieldErr(field, value, allowed string) *FieldError {
	fe := &FieldError{Field: field, Value: value, Allowed: allowed}
	if p.src != nil {
		fe.File = p.src.file
		fe.Line = p.src.line(field)
	}
	return fe
}

// validator collects the problems of one plan.
type validator struct {
	p    *Plan
	errs []error
}

func (v *validator) add(field, value, allowed string) {
	if len(v.errs) < maxErrors {
		v.errs = append(v.errs, v.p.fieldErr(field, value, allowed))
	}
}

func (v *validator) num(field string, x float64) bool {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		v.add(field, fmtFloat(x), "must be a finite number")
		return false
	}
	return true
}

// given reports whether a field that does not apply is set anyway.
func (v *validator) unused(field string, set bool, value, why string) {
	if set {
		v.add(field, value, "not used "+why+"; remove it")
	}
}

// Validate checks the plan against itself and against the bench's
// generator limits. lim.MaxVrms must be positive: it is the amplitude cap
// protecting the DUT, and a plan is refused when the bench gives none.
// lim.MinFreqHz, lim.MaxFreqHz and lim.MinVrms are checked when positive.
// Call Defaults first (the decoders do). Every problem is a *FieldError;
// several are joined with errors.Join.
func (p *Plan) Validate(lim driver.GeneratorLimits) error {
	v := &validator{p: p}
	v.text("name", p.Name, 200)
	v.frequencies(lim)
	v.level(lim)
	v.settle()
	v.ranging()
	v.refine()
	v.drift()
	v.unit()
	if t := p.Normalize.ThroughRun; t != "" {
		if err := CheckRunID(t); err != nil {
			v.add("normalize.through_run", strconv.Quote(t), err.Error())
		}
	}
	return join(v.errs)
}

// text checks a free-text field: UTF-8, printable, at most n bytes.
func (v *validator) text(field, s string, n int) {
	switch {
	case len(s) > n:
		v.add(field, strconv.Quote(s[:min(len(s), 40)])+"…", fmt.Sprintf("at most %d bytes", n))
	case !utf8.ValidString(s):
		v.add(field, strconv.Quote(s), "must be valid UTF-8")
	default:
		for _, r := range s {
			if !unicode.IsPrint(r) {
				v.add(field, strconv.Quote(s), "must not hold control characters")
				return
			}
		}
	}
}

func (v *validator) frequencies(lim driver.GeneratorLimits) {
	p := v.p
	f := &p.Frequencies
	sp := f.Spacing
	switch sp {
	case SpacingLog, SpacingLinear, SpacingBands, SpacingList:
	default:
		v.add("frequencies.spacing", strconv.Quote(sp), "must be one of log, linear, bands, list")
		return
	}
	on := "on a " + sp + " plan"
	n0 := len(v.errs)
	if sp == SpacingList {
		v.unused("frequencies.start_hz", f.StartHz != 0, fmtFloat(f.StartHz), on)
		v.unused("frequencies.stop_hz", f.StopHz != 0, fmtFloat(f.StopHz), on)
		if len(f.ListHz) == 0 {
			v.add("frequencies.frequencies_hz", "[]", "a list plan needs at least one frequency")
		}
		if len(f.ListHz) > MaxPoints {
			v.add("frequencies.frequencies_hz", strconv.Itoa(len(f.ListHz))+" entries", fmt.Sprintf("at most %d", MaxPoints))
			return
		}
		seen := make(map[float64]int, len(f.ListHz))
		for i, hz := range f.ListHz {
			field := fmt.Sprintf("frequencies.frequencies_hz[%d]", i)
			switch {
			case !v.num(field, hz):
			case !(hz > 0):
				v.add(field, fmtFloat(hz), "must be > 0")
			case hz < MinHz || hz > MaxHz:
				v.add(field, fmtFloat(hz), fmt.Sprintf("must be in [%s, %s] Hz", fmtFloat(MinHz), fmtFloat(MaxHz)))
			default:
				if j, dup := seen[hz]; dup {
					v.add(field, fmtFloat(hz), fmt.Sprintf("given twice (also frequencies_hz[%d])", j))
				}
				seen[hz] = i
			}
		}
	} else {
		v.unused("frequencies.frequencies_hz", len(f.ListHz) > 0, fmt.Sprintf("[%d values]", len(f.ListHz)), on)
		if v.num("frequencies.start_hz", f.StartHz) {
			switch {
			case !(f.StartHz > 0):
				v.add("frequencies.start_hz", fmtFloat(f.StartHz), "must be > 0 "+on)
			case f.StartHz < MinHz:
				v.add("frequencies.start_hz", fmtFloat(f.StartHz), "must be ≥ "+fmtFloat(MinHz)+" Hz")
			}
		}
		if v.num("frequencies.stop_hz", f.StopHz) {
			switch {
			case !(f.StopHz > 0):
				v.add("frequencies.stop_hz", fmtFloat(f.StopHz), "must be > 0 "+on)
			case f.StopHz > MaxHz:
				v.add("frequencies.stop_hz", fmtFloat(f.StopHz), "must be ≤ "+fmtFloat(MaxHz)+" Hz")
			case f.StartHz > 0 && !(f.StopHz > f.StartHz):
				v.add("frequencies.stop_hz", fmtFloat(f.StopHz), "must be > frequencies.start_hz ("+fmtFloat(f.StartHz)+")")
			}
		}
	}
	switch sp {
	case SpacingLog:
		v.unused("frequencies.step_hz", f.StepHz != 0, fmtFloat(f.StepHz), on)
		v.unused("frequencies.bands_per_octave", f.BandsPerOctave != 0, strconv.Itoa(f.BandsPerOctave), on)
		switch {
		case f.PointsPerDecade != 0 && f.Points != 0:
			v.add("frequencies.points", strconv.Itoa(f.Points), "give points_per_decade or points, not both")
		case f.PointsPerDecade != 0 && (f.PointsPerDecade < 1 || f.PointsPerDecade > 1000):
			v.add("frequencies.points_per_decade", strconv.Itoa(f.PointsPerDecade), "must be 1..1000")
		case f.PointsPerDecade == 0 && (f.Points < 2 || f.Points > MaxPoints):
			v.add("frequencies.points", strconv.Itoa(f.Points), fmt.Sprintf("must be 2..%d", MaxPoints))
		}
	case SpacingLinear:
		v.unused("frequencies.points_per_decade", f.PointsPerDecade != 0, strconv.Itoa(f.PointsPerDecade), on)
		v.unused("frequencies.bands_per_octave", f.BandsPerOctave != 0, strconv.Itoa(f.BandsPerOctave), on)
		switch {
		case f.Points != 0 && f.StepHz != 0:
			v.add("frequencies.step_hz", fmtFloat(f.StepHz), "give points or step_hz, not both")
		case f.Points != 0 && (f.Points < 2 || f.Points > MaxPoints):
			v.add("frequencies.points", strconv.Itoa(f.Points), fmt.Sprintf("must be 2..%d", MaxPoints))
		case f.StepHz != 0 && (!(f.StepHz > 0) || math.IsInf(f.StepHz, 0)):
			v.add("frequencies.step_hz", fmtFloat(f.StepHz), "must be > 0 and finite")
		case f.Points == 0 && f.StepHz == 0:
			v.add("frequencies.points", "0", fmt.Sprintf("a linear plan needs points (2..%d) or step_hz", MaxPoints))
		}
	case SpacingBands:
		v.unused("frequencies.points_per_decade", f.PointsPerDecade != 0, strconv.Itoa(f.PointsPerDecade), on)
		v.unused("frequencies.points", f.Points != 0, strconv.Itoa(f.Points), on)
		v.unused("frequencies.step_hz", f.StepHz != 0, fmtFloat(f.StepHz), on)
		if !validBands(f.BandsPerOctave) {
			v.add("frequencies.bands_per_octave", strconv.Itoa(f.BandsPerOctave), "must be 1, 2, 3, 6, 12 or 24")
		}
	case SpacingList:
		v.unused("frequencies.points_per_decade", f.PointsPerDecade != 0, strconv.Itoa(f.PointsPerDecade), on)
		v.unused("frequencies.points", f.Points != 0, strconv.Itoa(f.Points), on)
		v.unused("frequencies.step_hz", f.StepHz != 0, fmtFloat(f.StepHz), on)
		v.unused("frequencies.bands_per_octave", f.BandsPerOctave != 0, strconv.Itoa(f.BandsPerOctave), on)
	}
	v.num("reference_hz", p.ReferenceHz)
	if len(v.errs) > n0 {
		return // the frequencies cannot be computed
	}
	freqs, err := p.Freqs()
	if err != nil {
		v.errs = append(v.errs, err)
		return
	}
	total := len(freqs)
	if p.Refine.Enabled {
		total += max(p.Refine.MaxPoints, 0)
	}
	if p.Drift.EveryPoints >= 0 {
		total += p.Drift.DriftChecks(len(freqs))
	}
	if total > MaxPoints {
		v.add("frequencies", fmt.Sprintf("%d points", total), fmt.Sprintf("at most %d points per run, refinement included, drift checks too", MaxPoints))
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for i, fr := range freqs {
		lo, hi = math.Min(lo, fr.Hz), math.Max(hi, fr.Hz)
		if !(fr.Hz > 0) || math.IsInf(fr.Hz, 0) { // cannot happen; never let one through
			v.add("frequencies", fmtFloat(fr.Hz), fmt.Sprintf("point %d is not a finite positive frequency", i))
		}
	}
	// The generator's range, named by the field that put a point outside.
	field := func(hz float64, low bool) string {
		if sp == SpacingList {
			for i, l := range f.ListHz {
				if l == hz {
					return fmt.Sprintf("frequencies.frequencies_hz[%d]", i)
				}
			}
		}
		if low {
			return "frequencies.start_hz"
		}
		return "frequencies.stop_hz"
	}
	if lim.MinFreqHz > 0 && lo < lim.MinFreqHz*(1-relEps) {
		v.add(field(lo, true), fmtFloat(lo), fmt.Sprintf("below the generator's range %s..%s Hz", fmtFloat(lim.MinFreqHz), fmtFloat(lim.MaxFreqHz)))
	}
	if lim.MaxFreqHz > 0 && hi > lim.MaxFreqHz*(1+relEps) {
		v.add(field(hi, false), fmtFloat(hi), fmt.Sprintf("above the generator's range %s..%s Hz", fmtFloat(lim.MinFreqHz), fmtFloat(lim.MaxFreqHz)))
	}
	if p.ReferenceHz != 0 && (p.ReferenceHz < lo*(1-relEps) || p.ReferenceHz > hi*(1+relEps)) {
		v.add("reference_hz", fmtFloat(p.ReferenceHz), fmt.Sprintf("must lie within the plan's frequencies %s..%s Hz", fmtFloat(lo), fmtFloat(hi)))
	}
	if !(p.ReferenceHz > 0) {
		v.add("reference_hz", fmtFloat(p.ReferenceHz), "must be > 0")
	}
}

func (v *validator) level(lim driver.GeneratorLimits) {
	p := v.p
	l := &p.Level
	maxDesc := "the bench's amplitude limit " + fmtFloat(lim.MaxVrms) + " Vrms"
	if !(lim.MaxVrms > 0) || math.IsInf(lim.MaxVrms, 0) {
		v.add("level.vrms", fmtFloat(l.Vrms), "the bench gives no amplitude limit (generator max_vrms); set one in the bench file")
		return
	}
	check := func(field string, x float64) {
		if !v.num(field, x) {
			return
		}
		switch {
		case !(x > 0):
			v.add(field, fmtFloat(x), "must be > 0 Vrms")
		case x > lim.MaxVrms:
			v.add(field, fmtFloat(x), "above "+maxDesc+", which protects the DUT; must be ≤ "+fmtFloat(lim.MaxVrms))
		case lim.MinVrms > 0 && x < lim.MinVrms:
			v.add(field, fmtFloat(x), "below the generator's least amplitude "+fmtFloat(lim.MinVrms)+" Vrms")
		}
	}
	check("level.vrms", l.Vrms)
	if p.Ranging.Strategy != RangeLevel {
		why := "unless ranging.strategy = \"level\""
		v.unused("level.min_vrms", l.MinVrms != 0, fmtFloat(l.MinVrms), why)
		v.unused("level.max_vrms", l.MaxVrms != 0, fmtFloat(l.MaxVrms), why)
		return
	}
	check("level.min_vrms", l.MinVrms)
	check("level.max_vrms", l.MaxVrms)
	if l.MinVrms > l.Vrms {
		v.add("level.min_vrms", fmtFloat(l.MinVrms), "must be ≤ level.vrms ("+fmtFloat(l.Vrms)+")")
	}
	if l.MaxVrms < l.Vrms {
		v.add("level.max_vrms", fmtFloat(l.MaxVrms), "must be ≥ level.vrms ("+fmtFloat(l.Vrms)+")")
	}
}

func (v *validator) settle() {
	s := &v.p.Settle
	if v.num("settle.min_dwell_s", s.MinDwellS) && (s.MinDwellS < 0 || s.MinDwellS > 3600) {
		v.add("settle.min_dwell_s", fmtFloat(s.MinDwellS), "must be 0..3600 s")
	}
	if v.num("settle.tolerance", s.Tolerance) && !(s.Tolerance > 0 && s.Tolerance <= 0.1) {
		v.add("settle.tolerance", fmtFloat(s.Tolerance), "must be in (0, 0.1] (relative; 0.002 is 0.2 %)")
	}
	if s.Readings < 1 || s.Readings > 100 {
		v.add("settle.readings", strconv.Itoa(s.Readings), "must be 1..100")
	}
	if v.num("settle.timeout_s", s.TimeoutS) {
		switch {
		case !(s.TimeoutS > 0) || s.TimeoutS > 86400:
			v.add("settle.timeout_s", fmtFloat(s.TimeoutS), "must be in (0, 86400] s")
		case s.TimeoutS < s.MinDwellS:
			v.add("settle.timeout_s", fmtFloat(s.TimeoutS), "must be ≥ settle.min_dwell_s ("+fmtFloat(s.MinDwellS)+")")
		}
	}
}

func (v *validator) ranging() {
	r := &v.p.Ranging
	switch r.Strategy {
	case RangeFixed, RangeOperator, RangeRemote, RangeLevel:
	default:
		v.add("ranging.strategy", strconv.Quote(r.Strategy), "must be one of fixed, operator, remote, level")
	}
	if len(r.Start) > 64 {
		v.add("ranging.start", strconv.Quote(r.Start[:64])+"…", "at most 64 bytes")
		return
	}
	// A range name is looked up among the converter profile's ranges,
	// never sent; still, keep it to letters, digits and a few marks.
	for _, c := range r.Start {
		if !(unicode.IsLetter(c) || unicode.IsDigit(c) || strings.ContainsRune(" .,-_/+%", c)) {
			v.add("ranging.start", strconv.Quote(r.Start), "a range name: letters, digits, space and . , - _ / + %")
			return
		}
	}
}

func (v *validator) drift() {
	d := &v.p.Drift
	if d.End != DriftOn && d.End != DriftOff && d.End != "" {
		v.add("drift.end", strconv.Quote(d.End), `"on" or "off"`)
	}
	if d.EveryPoints < 0 || d.EveryPoints > MaxPoints {
		v.add("drift.every_points", strconv.Itoa(d.EveryPoints), fmt.Sprintf("must be 0 (only at the end) to %d", MaxPoints))
	}
}

func (v *validator) refine() {
	r := &v.p.Refine
	if v.num("refine.level_db", r.LevelDB) && !(r.LevelDB < 0 && r.LevelDB >= -60) {
		v.add("refine.level_db", fmtFloat(r.LevelDB), "must be in [-60, 0) dB (-3.0103 is half power)")
	}
	if v.num("refine.resolution", r.ResolutionRel) && !(r.ResolutionRel >= 1e-5 && r.ResolutionRel <= 0.1) {
		v.add("refine.resolution", fmtFloat(r.ResolutionRel), "must be in [1e-05, 0.1] (relative frequency)")
	}
	if r.MaxPoints < 1 || r.MaxPoints > 1000 {
		v.add("refine.max_points", strconv.Itoa(r.MaxPoints), "must be 1..1000")
	}
}

// CheckRunID checks the syntax of a run id, as the run store makes them
// and as normalize.through_run names one: 1..128 bytes of ASCII letters,
// digits, '.', '_' and '-', not starting with '.' or '-', no "..".
func CheckRunID(id string) error {
	switch {
	case id == "":
		return fmt.Errorf("a run id must not be empty")
	case len(id) > 128:
		return fmt.Errorf("a run id is at most 128 bytes")
	case id[0] == '.' || id[0] == '-':
		return fmt.Errorf("a run id must not start with '.' or '-'")
	case strings.Contains(id, ".."):
		return fmt.Errorf("a run id must not contain \"..\"")
	}
	for i := 0; i < len(id); i++ {
		c := id[i]
		if !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '.' || c == '_' || c == '-') {
			return fmt.Errorf("a run id holds only letters, digits, '.', '_' and '-' (found %q)", c)
		}
	}
	return nil
}
