package profile

import (
	"fmt"
	"sort"
	"strings"

	"rolloff/driver/scpi"
)

// DMM is a SCPI-1999 digital multimeter profile (kind "scpi-dmm"), used as
// the DC voltmeter on the converter's output and, where it has [ac], as an
// AC voltmeter reading true RMS itself.
type DMM struct {
	File     string        `toml:"-"`
	Kind     string        `toml:"kind"`
	Name     string        `toml:"name"`
	Framing  Framing       `toml:"framing"`
	Identity IdentityCheck `toml:"identity"`
	Dialect  Dialect       `toml:"dialect"`
	Response Response      `toml:"response"`
	// LineHz is the power-line frequency NPLC apertures refer to: 50 or 60.
	LineHz float64 `toml:"line_hz"`
	// Init is sent in order after the instrument is cleared.
	Init []string `toml:"init"`
	// CheckErrors reads the error queue after configuring.
	CheckErrors bool `toml:"check_errors"`
	// SetSampleCount sets how many readings one read returns; {count}.
	SetSampleCount Cmds `toml:"set_sample_count"`
	// MaxSamples is the largest burst (sample count). Default 1 (no bursts).
	MaxSamples int `toml:"max_samples"`
	// RangeHeadroom is how far past its nominal full scale a range reads,
	// as a multiple (1 to 2; default 1): a 1 V range with 1.2 reads 1.2 V.
	RangeHeadroom float64 `toml:"range_headroom"`
	DC            DMMDC   `toml:"dc"`
	AC            *DMMAC  `toml:"ac"`
	T             DMMTmpl `toml:"-"`
}

// DMMDC is the DC voltage function.
type DMMDC struct {
	// RangesV are the DC ranges, full scale in volts, ascending.
	RangesV []float64 `toml:"ranges_v"`
	// NPLC are the integration times the instrument accepts, in power-line
	// cycles, ascending. Empty means no NPLC setting.
	NPLC []float64 `toml:"nplc"`
	// MinApertureS and MaxApertureS bound an aperture in seconds; both 0
	// means no aperture setting.
	MinApertureS float64 `toml:"min_aperture_s"`
	MaxApertureS float64 `toml:"max_aperture_s"`
	// FixedApertureS is the integration time, seconds, of a meter that
	// cannot set it (no nplc, no aperture bounds): the ripple bound and
	// the reading plan use it. Required then, refused otherwise.
	FixedApertureS float64 `toml:"fixed_aperture_s"`
	// Configure selects the DC voltage function. No placeholders.
	// Optional (a meter that answers MEASure only needs none).
	Configure Cmds `toml:"configure"`
	// SetRange sets the range; {range_v} in volts. Optional when Read
	// carries {range_v} itself (MEASure:VOLTage:DC? {range_v}).
	SetRange Cmds `toml:"set_range"`
	// SetAutoRange selects autorange, for a configuration with range 0.
	// No placeholders. Optional.
	SetAutoRange Cmds `toml:"set_auto_range"`
	// SetNPLC sets the integration time; {nplc}. Optional.
	SetNPLC Cmds `toml:"set_nplc"`
	// SetAperture sets the integration time; {aperture_s}. Optional.
	SetAperture Cmds `toml:"set_aperture"`
	// Read triggers and returns the reading(s), comma-separated: one
	// query, or a list of commands whose last is the query (INITiate,
	// FETCh?). It may carry {range_v}.
	Read Cmds `toml:"read"`
	// Accuracy is the DC specification per range.
	Accuracy []DCAccuracy `toml:"accuracy"`
}

// DCAccuracy is the DC specification on one range:
// ±(ReadingPct % of reading + RangePct % of range).
type DCAccuracy struct {
	RangeV     float64 `toml:"range_v"`
	ReadingPct float64 `toml:"reading_pct"`
	RangePct   float64 `toml:"range_pct"`
}

// DMMAC is the AC (true-RMS) voltage function.
type DMMAC struct {
	RangesVrms   []float64 `toml:"ranges_vrms"`
	NPLC         []float64 `toml:"nplc"`
	MinApertureS float64   `toml:"min_aperture_s"`
	MaxApertureS float64   `toml:"max_aperture_s"`
	Configure    Cmds      `toml:"configure"`
	SetRange     Cmds      `toml:"set_range"` // {range_vrms}
	SetAutoRange Cmds      `toml:"set_auto_range"`
	SetNPLC      Cmds      `toml:"set_nplc"`
	SetAperture  Cmds      `toml:"set_aperture"`
	Read         Cmds      `toml:"read"`
	// FixedApertureS is the integration time of a reading, seconds, where
	// the profile sets none (see ACTiming); optional.
	FixedApertureS float64 `toml:"fixed_aperture_s"`
	// Filters is the meter's own RMS settling, per frequency band (see
	// ACFilter); optional.
	Filters []ACFilter `toml:"filters"`
}

// DMMTmpl are the compiled DMM templates. Optional ones are nil.
type DMMTmpl struct {
	Init           []*scpi.Template
	SetSampleCount *scpi.Seq
	DCConfigure    *scpi.Seq
	DCSetRange     *scpi.Seq
	DCSetAutoRange *scpi.Seq
	DCSetNPLC      *scpi.Seq
	DCSetAperture  *scpi.Seq
	DCRead         *scpi.Seq
	ACConfigure    *scpi.Seq
	ACSetRange     *scpi.Seq
	ACSetAutoRange *scpi.Seq
	ACSetNPLC      *scpi.Seq
	ACSetAperture  *scpi.Seq
	ACRead         *scpi.Seq
}

const maxSamples = 100000

// DecodeDMM decodes and validates a DMM profile.
func DecodeDMM(file string, data []byte) (*DMM, error) {
	if err := expectKind(file, data, KindDMM); err != nil {
		return nil, err
	}
	d := &DMM{File: file}
	if err := decodeStrict(file, data, d); err != nil {
		return nil, err
	}
	p := newProblems(file, data)
	d.validate(p)
	if err := p.err(); err != nil {
		return nil, err
	}
	return d, nil
}

func (d *DMM) validate(p *problems) {
	checkKind(p, d.Kind, KindDMM)
	d.Framing.validate(p)
	d.Identity.validate(p)
	d.Dialect.validate(p, d.CheckErrors)
	d.Response.validate(p)
	if d.LineHz != 50 && d.LineHz != 60 {
		p.add("line_hz", d.LineHz, "50 or 60", "bad power-line frequency")
	}
	if d.MaxSamples == 0 {
		d.MaxSamples = 1
	}
	if d.MaxSamples < 1 || d.MaxSamples > maxSamples {
		p.add("max_samples", d.MaxSamples, fmt.Sprintf("1 to %d", maxSamples), "bad sample count")
	}
	if d.RangeHeadroom == 0 {
		d.RangeHeadroom = 1
	}
	if !finite(d.RangeHeadroom) || d.RangeHeadroom < 1 || d.RangeHeadroom > 2 {
		p.add("range_headroom", d.RangeHeadroom, "1 to 2", "bad range headroom")
	}
	t := &d.T
	t.Init = compileList(p, "init", d.Init)
	t.SetSampleCount = compileSeq(p, "set_sample_count", d.SetSampleCount, d.MaxSamples > 1, "count")
	validateRanges(p, "dc.ranges_v", d.DC.RangesV, 1e-3, 1e4)
	validateAperture(p, "dc", d.DC.NPLC, d.DC.MinApertureS, d.DC.MaxApertureS)
	validateFixedAperture(p, "dc", d.DC.FixedApertureS, len(d.DC.NPLC) > 0 || d.DC.MaxApertureS > 0)
	t.DCConfigure = compileSeq(p, "dc.configure", d.DC.Configure, false)
	dcRangeInRead := readCarries(d.DC.Read, "range_v")
	t.DCSetRange = compileSeq(p, "dc.set_range", d.DC.SetRange, !dcRangeInRead, "range_v")
	t.DCSetAutoRange = compileSeq(p, "dc.set_auto_range", d.DC.SetAutoRange, false)
	t.DCSetNPLC = compileSeq(p, "dc.set_nplc", d.DC.SetNPLC, len(d.DC.NPLC) > 0, "nplc")
	t.DCSetAperture = compileSeq(p, "dc.set_aperture", d.DC.SetAperture, d.DC.MaxApertureS > 0, "aperture_s")
	t.DCRead = compileQuerySeq(p, "dc.read", d.DC.Read, true, placeholdersIf(dcRangeInRead, "range_v")...)
	if dcRangeInRead && !d.DC.SetAutoRange.Empty() {
		p.add("dc.set_auto_range", cmdsValue(d.DC.SetAutoRange), `"" when dc.read carries {range_v} (the range goes with each reading)`, "autorange and a range in every reading")
	}
	for i, a := range d.DC.Accuracy {
		k := fmt.Sprintf("dc.accuracy[%d]", i)
		if !contains(d.DC.RangesV, a.RangeV) {
			p.add(k+".range_v", a.RangeV, "one of dc.ranges_v "+formatValue(d.DC.RangesV), "no such range")
		}
		if !finite(a.ReadingPct) || a.ReadingPct < 0 || a.ReadingPct > 100 {
			p.add(k+".reading_pct", a.ReadingPct, "0 to 100 %", "bad accuracy")
		}
		if !finite(a.RangePct) || a.RangePct < 0 || a.RangePct > 100 {
			p.add(k+".range_pct", a.RangePct, "0 to 100 %", "bad accuracy")
		}
	}
	if ac := d.AC; ac != nil {
		validateRanges(p, "ac.ranges_vrms", ac.RangesVrms, 1e-3, 1e4)
		validateAperture(p, "ac", ac.NPLC, ac.MinApertureS, ac.MaxApertureS)
		t.ACConfigure = compileSeq(p, "ac.configure", ac.Configure, false)
		acRangeInRead := readCarries(ac.Read, "range_vrms")
		t.ACSetRange = compileSeq(p, "ac.set_range", ac.SetRange, !acRangeInRead, "range_vrms")
		t.ACSetAutoRange = compileSeq(p, "ac.set_auto_range", ac.SetAutoRange, false)
		t.ACSetNPLC = compileSeq(p, "ac.set_nplc", ac.SetNPLC, len(ac.NPLC) > 0, "nplc")
		t.ACSetAperture = compileSeq(p, "ac.set_aperture", ac.SetAperture, ac.MaxApertureS > 0, "aperture_s")
		t.ACRead = compileQuerySeq(p, "ac.read", ac.Read, true, placeholdersIf(acRangeInRead, "range_vrms")...)
		if acRangeInRead && !ac.SetAutoRange.Empty() {
			p.add("ac.set_auto_range", cmdsValue(ac.SetAutoRange), `"" when ac.read carries {range_vrms} (the range goes with each reading)`, "autorange and a range in every reading")
		}
		ac.validateTiming(p)
	}
}

// readCarries reports whether a reading's commands carry {name}: a
// meter that takes its range with each reading (MEASure:VOLTage:DC?
// {range_v}) needs no set_range.
func readCarries(c Cmds, name string) bool {
	for _, s := range c {
		if strings.Contains(s, "{"+name+"}") {
			return true
		}
	}
	return false
}

func placeholdersIf(ok bool, names ...string) []string {
	if ok {
		return names
	}
	return nil
}

// DCAccuracyV returns the half-width of the DC specification in volts for
// a reading on the range rangeV (the smallest specified range at least
// rangeV), or 0 where the profile gives no specification.
func (d *DMM) DCAccuracyV(readingV, rangeV float64) float64 {
	best := -1
	for i, a := range d.DC.Accuracy {
		if a.RangeV >= rangeV*(1-1e-9) && (best < 0 || a.RangeV < d.DC.Accuracy[best].RangeV) {
			best = i
		}
	}
	if best < 0 {
		return 0
	}
	a := d.DC.Accuracy[best]
	if readingV < 0 {
		readingV = -readingV
	}
	return readingV*a.ReadingPct/100 + a.RangeV*a.RangePct/100
}

// PickRange returns the smallest of ranges that reads v, a range r
// reading up to r·headroom; false when none does.
func PickRange(ranges []float64, v, headroom float64) (float64, bool) {
	if headroom < 1 {
		headroom = 1
	}
	for _, r := range ranges {
		if r*headroom >= v*(1-1e-9) {
			return r, true
		}
	}
	return 0, false
}

func validateRanges(p *problems, key string, ranges []float64, lo, hi float64) {
	if len(ranges) == 0 {
		p.add(key, nil, fmt.Sprintf("a list of full-scale values from %g to %g, ascending", lo, hi), "missing")
		return
	}
	for i, r := range ranges {
		if !finite(r) || r < lo || r > hi {
			p.add(fmt.Sprintf("%s[%d]", key, i), r, fmt.Sprintf("%g to %g", lo, hi), "range out of bounds")
		}
	}
	if !sort.Float64sAreSorted(ranges) || hasDup(ranges) {
		p.add(key, ranges, "strictly ascending values", "ranges not ascending")
	}
}

func validateAperture(p *problems, sect string, nplc []float64, minS, maxS float64) {
	for i, n := range nplc {
		if !finite(n) || n <= 0 || n > 1000 {
			p.add(fmt.Sprintf("%s.nplc[%d]", sect, i), n, "more than 0, at most 1000 power-line cycles", "bad NPLC")
		}
	}
	if !sort.Float64sAreSorted(nplc) || hasDup(nplc) {
		p.add(sect+".nplc", nplc, "strictly ascending values", "NPLC list not ascending")
	}
	if !finite(minS) || !finite(maxS) || minS < 0 || maxS < minS || maxS > 100 {
		p.add(sect+".max_aperture_s", maxS, fmt.Sprintf("at least %s.min_aperture_s (%g), at most 100 s", sect, minS), "bad aperture bounds")
	}
}

func hasDup(v []float64) bool {
	for i := 1; i < len(v); i++ {
		if v[i] == v[i-1] {
			return true
		}
	}
	return false
}

func contains(v []float64, x float64) bool {
	for _, y := range v {
		if y == x {
			return true
		}
	}
	return false
}
