package profile

import (
	"fmt"
	"math"
	"strings"

	"rolloff/driver"
)

// Converter is an analog true-RMS voltmeter used as a converter (kind
// "analog-converter"): it has no SCPI of its own; its rear DC output is
// read by a DC voltmeter and scaled by the selected range.
type Converter struct {
	File string `toml:"-"`
	Kind string `toml:"kind"`
	Name string `toml:"name"`
	// DCFullScaleV is the DC output at full scale on every range, volts.
	DCFullScaleV float64 `toml:"dc_full_scale_v"`
	// UnderFraction: readings below this fraction of full scale are out of
	// the accuracy specification.
	UnderFraction float64 `toml:"under_fraction"`
	// OverFraction: readings above this fraction of full scale are
	// over-range.
	OverFraction float64 `toml:"over_fraction"`
	// MaxFreqHz is the converter's frequency limit.
	MaxFreqHz float64 `toml:"max_freq_hz"`
	// HoldIntervalS is how often the converter re-zeroes; during HoldS
	// seconds its output is held and must not be read. 0 = never.
	HoldIntervalS float64 `toml:"hold_interval_s"`
	HoldS         float64 `toml:"hold_s"`
	// Selection is how the range is chosen: "operator" (by hand, rolloff
	// asks) or "remote" (through the bench's switch instrument, one
	// channel per range).
	Selection string `toml:"selection"`
	// Ranges are the ranges, ascending.
	Ranges []ConverterRange `toml:"ranges"`
	// Accuracy is the specification table; first matching row wins.
	Accuracy []ConverterAccuracy `toml:"accuracy"`
	// RangeGainPct and LinearityPct split the specification into its
	// components (see spec.go); 0 when the profile does not say.
	RangeGainPct float64 `toml:"range_gain_pct"`
	LinearityPct float64 `toml:"linearity_pct"`
}

// Range selection modes.
const (
	SelectOperator = "operator"
	SelectRemote   = "remote"
)

// ConverterRange is one range of a converter.
type ConverterRange struct {
	// Name as printed on the range switch, e.g. "31.62 mV".
	Name string `toml:"name"`
	// FullScaleVrms is the input for a full-scale reading.
	FullScaleVrms float64 `toml:"full_scale_vrms"`
	// TimeConstantS is the averaging time constant, physical seconds.
	TimeConstantS float64 `toml:"time_constant_s"`
	// Channel is the switch channel that selects this range when
	// Selection is "remote"; 0 otherwise.
	Channel int `toml:"channel"`
}

// ConverterAccuracy is one row of the accuracy table: ±ReadingPct % of
// reading on the listed ranges (all when empty) from FromHz to ToHz.
type ConverterAccuracy struct {
	Ranges     []string `toml:"ranges"`
	FromHz     float64  `toml:"from_hz"`
	ToHz       float64  `toml:"to_hz"`
	ReadingPct float64  `toml:"reading_pct"`
	// FlatnessPct is the part of ReadingPct due to the frequency
	// response in this band (see spec.go); 0 when the profile does not
	// say.
	FlatnessPct float64 `toml:"flatness_pct"`

	idx []int
}

// DecodeConverter decodes and validates a converter profile.
func DecodeConverter(file string, data []byte) (*Converter, error) {
	if err := expectKind(file, data, KindConverter); err != nil {
		return nil, err
	}
	c := &Converter{File: file}
	if err := decodeStrict(file, data, c); err != nil {
		return nil, err
	}
	p := newProblems(file, data)
	c.validate(p)
	if err := p.err(); err != nil {
		return nil, err
	}
	return c, nil
}

func (c *Converter) validate(p *problems) {
	checkKind(p, c.Kind, KindConverter)
	if !finite(c.DCFullScaleV) || c.DCFullScaleV <= 0 || c.DCFullScaleV > 100 {
		p.add("dc_full_scale_v", c.DCFullScaleV, "more than 0, at most 100 V (typically 1)", "bad DC full-scale output")
	}
	if !finite(c.UnderFraction) || c.UnderFraction < 0 || c.UnderFraction >= 1 {
		p.add("under_fraction", c.UnderFraction, "0 to below 1 (e.g. 0.1)", "bad in-spec window")
	}
	if !finite(c.OverFraction) || c.OverFraction < 1 || c.OverFraction > 2 {
		p.add("over_fraction", c.OverFraction, "1 to 2 (e.g. 1.05)", "bad over-range threshold")
	}
	if !finite(c.MaxFreqHz) || c.MaxFreqHz <= 0 || c.MaxFreqHz > 10e9 {
		p.add("max_freq_hz", c.MaxFreqHz, "more than 0 Hz, at most 10 GHz", "bad frequency limit")
	}
	if !finite(c.HoldIntervalS) || c.HoldIntervalS < 0 {
		p.add("hold_interval_s", c.HoldIntervalS, "0 (no hold) or more seconds", "bad hold interval")
	}
	if !finite(c.HoldS) || c.HoldS < 0 || (c.HoldIntervalS > 0 && c.HoldS >= c.HoldIntervalS) || (c.HoldIntervalS == 0 && c.HoldS != 0) {
		p.add("hold_s", c.HoldS, "0 to below hold_interval_s (0 when hold_interval_s is 0)", "bad hold time")
	}
	switch c.Selection {
	case SelectOperator, SelectRemote:
	default:
		p.add("selection", c.Selection, `"operator" or "remote"`, "unknown range selection")
	}
	if len(c.Ranges) == 0 {
		p.add("ranges", nil, "one [[ranges]] table per range, ascending", "no ranges")
	}
	names := map[string]int{}
	channels := map[int]int{}
	for i, r := range c.Ranges {
		k := fmt.Sprintf("ranges[%d]", i)
		if strings.TrimSpace(r.Name) == "" || len(r.Name) > 40 {
			p.add(k+".name", r.Name, "a label of 1 to 40 characters", "bad range name")
		} else if j, dup := names[r.Name]; dup {
			p.add(k+".name", r.Name, fmt.Sprintf("a name not already used by ranges[%d]", j), "duplicate range name")
		} else {
			names[r.Name] = i
		}
		if !finite(r.FullScaleVrms) || r.FullScaleVrms <= 0 || r.FullScaleVrms > 10000 {
			p.add(k+".full_scale_vrms", r.FullScaleVrms, "more than 0, at most 10000 Vrms", "bad full scale")
		} else if i > 0 && r.FullScaleVrms <= c.Ranges[i-1].FullScaleVrms {
			p.add(k+".full_scale_vrms", r.FullScaleVrms, fmt.Sprintf("above ranges[%d].full_scale_vrms (%g)", i-1, c.Ranges[i-1].FullScaleVrms), "ranges not ascending")
		}
		if !finite(r.TimeConstantS) || r.TimeConstantS <= 0 || r.TimeConstantS > 600 {
			p.add(k+".time_constant_s", r.TimeConstantS, "more than 0, at most 600 seconds", "bad time constant")
		}
		if c.Selection == SelectRemote {
			if r.Channel < 1 || r.Channel > 9999 {
				p.add(k+".channel", r.Channel, "a switch channel from 1 to 9999", "remote selection needs a channel per range")
			} else if j, dup := channels[r.Channel]; dup {
				p.add(k+".channel", r.Channel, fmt.Sprintf("a channel not already used by ranges[%d]", j), "duplicate channel")
			} else {
				channels[r.Channel] = i
			}
		} else if r.Channel != 0 {
			p.add(k+".channel", r.Channel, `0 unless selection = "remote"`, "channel on an operator-selected range")
		}
	}
	for i := range c.Accuracy {
		a := &c.Accuracy[i]
		k := fmt.Sprintf("accuracy[%d]", i)
		a.idx = a.idx[:0]
		for j, n := range a.Ranges {
			ix, ok := names[n]
			if !ok {
				p.add(fmt.Sprintf("%s.ranges[%d]", k, j), n, "a name from [[ranges]]", "no such range")
				continue
			}
			a.idx = append(a.idx, ix)
		}
		if !finite(a.FromHz) || !finite(a.ToHz) || a.FromHz < 0 || a.ToHz <= a.FromHz {
			p.add(k+".to_hz", a.ToHz, fmt.Sprintf("above from_hz (%g)", a.FromHz), "bad frequency band")
		}
		if !finite(a.ReadingPct) || a.ReadingPct <= 0 || a.ReadingPct > 100 {
			p.add(k+".reading_pct", a.ReadingPct, "more than 0, at most 100 %", "bad accuracy")
		}
	}
	c.validateSpec(p)
}

// DriverRanges returns the ranges as driver.Range values.
func (c *Converter) DriverRanges() []driver.Range {
	out := make([]driver.Range, len(c.Ranges))
	for i, r := range c.Ranges {
		out[i] = driver.Range{Name: r.Name, FullScaleVrms: r.FullScaleVrms, TimeConstantS: r.TimeConstantS}
	}
	return out
}

// Window returns the in-spec window and output scaling.
func (c *Converter) Window() driver.Window {
	return driver.Window{DCFullScaleV: c.DCFullScaleV, UnderFraction: c.UnderFraction, OverFraction: c.OverFraction, MaxFreqHz: c.MaxFreqHz}
}

// AccuracyRel returns the half-width of the specification as a fraction of
// reading for a range and frequency: the first row of the table that
// names the range (or names none) and whose band holds freqHz.
func (c *Converter) AccuracyRel(rangeIndex int, freqHz float64) (float64, bool) {
	if rangeIndex < 0 || rangeIndex >= len(c.Ranges) || math.IsNaN(freqHz) {
		return 0, false
	}
	for _, a := range c.Accuracy {
		if freqHz < a.FromHz || freqHz > a.ToHz {
			continue
		}
		match := len(a.Ranges) == 0
		for _, ix := range a.idx {
			match = match || ix == rangeIndex
		}
		if match {
			return a.ReadingPct / 100, true
		}
	}
	return 0, false
}

// RangeIndex returns the index of the range called name.
func (c *Converter) RangeIndex(name string) (int, bool) {
	for i, r := range c.Ranges {
		if r.Name == name {
			return i, true
		}
	}
	return 0, false
}
