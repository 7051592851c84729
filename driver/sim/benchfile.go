package sim

import (
	"errors"
	"fmt"
	"math"

	"rolloff/driver/profile"
	"rolloff/internal/fielderr"
)

// FromBenchFile returns the simulated bench a bench file describes in its
// [sim] table, reconciled with the profiles the file names. The table is
// decoded over DemoConfig: keys it leaves out keep their demo values, and
// the converter ranges, DC output, hold, DC voltmeter and DMM ranges and
// line frequency come from the profiles unless [sim] lists them, so that
// the simulator and the driver agree. The bench file's top-level
// time_scale, when set, is the simulator's. Every problem is a
// *profile.FieldError naming the bench file, the line and the key (e.g.
// "sim.dut.gain_db"); a file without a [sim] table is an error too.
func FromBenchFile(b *profile.BenchFile) (*Config, error) {
	if b.Sim == nil {
		return nil, b.KeyError("sim", nil, "a [sim] table describing the simulated bench", "no [sim] table", nil)
	}
	c := DemoConfig()
	if err := b.DecodeTable("sim", &c); err != nil {
		return nil, err
	}
	var errs []error
	add := func(key string, value any, allowed, msg string) {
		errs = append(errs, b.KeyError(key, value, allowed, msg, nil))
	}
	listed := b.Listed
	if b.TimeScale != 1 || listed("time_scale") {
		if listed("sim.time_scale") && c.TimeScale != b.TimeScale {
			add("sim.time_scale", c.TimeScale, fmt.Sprintf("the top-level time_scale (%g), or leave one of them out", b.TimeScale), "two time scales")
		}
		c.TimeScale = b.TimeScale
	}
	syncConverter(b, &c, add)
	syncMeters(b, &c, add)
	syncSpec(b, &c)
	if err := c.Validate(); err != nil {
		ces := fielderr.All(err)
		if len(ces) == 0 {
			errs = append(errs, b.KeyError("sim", nil, "", "bad [sim] table", err))
		}
		for _, ce := range ces {
			// The same problem, placed in the bench file.
			fe := *ce
			fe.Field = "sim." + ce.Field
			fe.File, fe.Line = b.File, b.Line(fe.Field)
			errs = append(errs, &fe)
		}
	}
	if len(errs) > 0 {
		return nil, errors.Join(errs...)
	}
	return &c, nil
}

// syncConverter takes the converter's ranges, DC output and hold from its
// profile where [sim] is silent, and refuses other ranges than the
// profile's.
func syncConverter(b *profile.BenchFile, c *Config, add func(key string, value any, allowed, msg string)) {
	conv := b.Converter
	if conv == nil || conv.Spec == nil {
		return
	}
	listed := b.Listed
	cs := conv.Spec
	if listed("sim.converter.ranges") {
		// The simulator may give its converter other time constants
		// (to test settling), but not other ranges than the driver
		// scales by.
		same := len(c.Converter.Ranges) == len(cs.Ranges)
		for i := 0; same && i < len(cs.Ranges); i++ {
			r := c.Converter.Ranges[i]
			same = r.Name == cs.Ranges[i].Name && math.Abs(r.FullScaleVrms-cs.Ranges[i].FullScaleVrms) <= 1e-9*cs.Ranges[i].FullScaleVrms
		}
		if !same {
			add("sim.converter.ranges", nil, fmt.Sprintf("the names and full scales of the %d ranges of %s, or no ranges here", len(cs.Ranges), cs.File), "the simulator's converter ranges differ from the converter profile")
		}
	} else {
		c.Converter.Ranges = c.Converter.Ranges[:0:0]
		for _, r := range cs.Ranges {
			c.Converter.Ranges = append(c.Converter.Ranges, Range{Name: r.Name, FullScaleVrms: r.FullScaleVrms, TimeConstantS: r.TimeConstantS})
		}
		if !listed("sim.converter.initial_range") && c.Converter.InitialRange >= len(c.Converter.Ranges) {
			c.Converter.InitialRange = len(c.Converter.Ranges) - 1
		}
	}
	if !listed("sim.converter.dc_full_scale_v") {
		c.Converter.DCFullScaleV = cs.DCFullScaleV
	}
	if !listed("sim.converter.hold_interval_s") && !listed("sim.converter.hold_s") {
		c.Converter.HoldIntervalS, c.Converter.HoldS = cs.HoldIntervalS, cs.HoldS
	}
}

// syncMeters takes the DC voltmeter's and the DMM's ranges, sample limits,
// over-range and the line frequency from their profiles where [sim] is
// silent, and refuses another line frequency.
func syncMeters(b *profile.BenchFile, c *Config, add func(key string, value any, allowed, msg string)) {
	listed := b.Listed
	var lineHz float64
	var lineFrom string
	if v := b.Voltmeter; v != nil && v.DMM != nil {
		if !listed("sim.voltmeter.ranges_v") {
			c.Voltmeter.RangesV = append([]float64(nil), v.DMM.DC.RangesV...)
		}
		if !listed("sim.voltmeter.max_samples") {
			c.Voltmeter.MaxSamples = v.DMM.MaxSamples
		}
		if !listed("sim.voltmeter.over_range_fraction") {
			c.Voltmeter.OverRangeFraction = v.DMM.RangeHeadroom - 1
		}
		if fx := v.DMM.DC.FixedApertureS; fx > 0 && !listed("sim.voltmeter.reset_nplc") {
			c.Voltmeter.ResetNPLC = fx * v.DMM.LineHz // the profile's fixed integration time
		}
		lineHz, lineFrom = v.DMM.LineHz, v.DMM.File
	}
	if d := b.DMM; d != nil && d.DMM != nil && d.DMM.AC != nil {
		if !listed("sim.dmm.ranges_vrms") {
			c.DMM.RangesVrms = append([]float64(nil), d.DMM.AC.RangesVrms...)
		}
		if !listed("sim.dmm.max_samples") {
			c.DMM.MaxSamples = d.DMM.MaxSamples
		}
		if !listed("sim.dmm.over_range_fraction") {
			c.DMM.OverRangeFraction = d.DMM.RangeHeadroom - 1
		}
		if fx := d.DMM.AC.FixedApertureS; fx > 0 && !listed("sim.dmm.reset_nplc") {
			c.DMM.ResetNPLC = fx * d.DMM.LineHz // the profile's fixed integration time
		}
		if fs := d.DMM.AC.Filters; len(fs) > 0 && !listed("sim.dmm.filters") {
			c.DMM.Filters = nil
			for _, f := range fs {
				c.DMM.Filters = append(c.DMM.Filters, DMMFilter{FromHz: f.FromHz, TimeConstantS: f.TimeConstantS})
			}
		}
		lineHz, lineFrom = d.DMM.LineHz, d.DMM.File
	}
	if lineHz > 0 {
		if listed("sim.line_hz") && c.LineHz != lineHz {
			add("sim.line_hz", c.LineHz, fmt.Sprintf("%g, the line_hz of %s", lineHz, lineFrom), "the simulator and the voltmeter profile disagree")
		} else {
			c.LineHz = lineHz
		}
	}
}
