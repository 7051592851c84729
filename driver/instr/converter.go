package instr

import (
	"context"
	"fmt"
	"math"

	"rolloff/driver"
	"rolloff/driver/profile"
)

// Converter is an analog true-RMS voltmeter used as a converter, with its
// range selected by the operator. It has no instrument link of its own;
// Scale turns its DC output, read by the bench's DC voltmeter, into Vrms.
type Converter struct {
	p      *profile.Converter
	ranges []driver.Range
	win    driver.Window
}

// SwitchedConverter is a Converter whose range is selected remotely
// through a switch instrument, one channel per range.
type SwitchedConverter struct {
	*Converter
	sw *Switch
}

var (
	_ driver.Converter     = (*Converter)(nil)
	_ driver.AccuracySpec  = (*Converter)(nil)
	_ driver.Converter     = (*SwitchedConverter)(nil)
	_ driver.RangeSwitcher = (*SwitchedConverter)(nil)
	_ driver.AccuracySpec  = (*SwitchedConverter)(nil)
)

// NewConverter returns the converter role: a *Converter when the profile's
// range selection is "operator" (sw must be nil), a *SwitchedConverter,
// which also implements driver.RangeSwitcher, when it is "remote" (sw is
// the switch instrument).
func NewConverter(p *profile.Converter, sw *Switch) (driver.Converter, error) {
	if p == nil {
		return nil, fmt.Errorf("instr: NewConverter: nil profile")
	}
	c := &Converter{p: p, ranges: p.DriverRanges(), win: p.Window()}
	switch p.Selection {
	case profile.SelectOperator:
		if sw != nil {
			return nil, fmt.Errorf("instr: converter %s: selection is %q but a switch was given", p.File, p.Selection)
		}
		return c, nil
	case profile.SelectRemote:
		if sw == nil {
			return nil, fmt.Errorf("instr: converter %s: selection is %q and needs a switch instrument", p.File, p.Selection)
		}
		for i, r := range p.Ranges {
			if r.Channel < sw.p.MinChannel || r.Channel > sw.p.MaxChannel {
				return nil, fmt.Errorf("instr: converter %s: ranges[%d] (%s) channel %d is not on switch %s (channels %d to %d): %w",
					p.File, i, r.Name, r.Channel, sw.p.File, sw.p.MinChannel, sw.p.MaxChannel, driver.ErrOutOfRange)
			}
		}
		return &SwitchedConverter{Converter: c, sw: sw}, nil
	}
	return nil, fmt.Errorf("instr: converter %s: unknown selection %q", p.File, p.Selection)
}

// Ranges returns the converter's ranges, ascending.
func (c *Converter) Ranges() []driver.Range { return append([]driver.Range(nil), c.ranges...) }

// Window returns the in-spec window and output scaling.
func (c *Converter) Window() driver.Window { return c.win }

// Profile returns the converter's profile.
func (c *Converter) Profile() *profile.Converter { return c.p }

// HoldIntervalS is how often the converter re-zeroes, seconds (0: never).
func (c *Converter) HoldIntervalS() float64 { return c.p.HoldIntervalS }

// HoldS is how long each re-zeroing holds the output, seconds.
func (c *Converter) HoldS() float64 { return c.p.HoldS }

// Scale turns a DC output reading on range rangeIndex into Vrms:
// Vrms = dc / DCFullScaleV × FullScaleVrms, with the fraction of full
// scale and where it falls in the in-spec window.
func (c *Converter) Scale(rangeIndex int, dcVolts float64) (driver.ConverterReading, error) {
	if rangeIndex < 0 || rangeIndex >= len(c.ranges) {
		return driver.ConverterReading{}, outOfRange("converter", "range index", float64(rangeIndex), fmt.Sprintf("0 to %d", len(c.ranges)-1))
	}
	if math.IsNaN(dcVolts) || math.IsInf(dcVolts, 0) {
		return driver.ConverterReading{}, fmt.Errorf("converter: DC output %g: %w", dcVolts, driver.ErrNotANumber)
	}
	frac := dcVolts / c.win.DCFullScaleV
	st := driver.InSpec
	switch {
	case frac < c.win.UnderFraction:
		st = driver.UnderRange
	case frac > c.win.OverFraction:
		st = driver.OverRange
	}
	return driver.ConverterReading{Vrms: frac * c.ranges[rangeIndex].FullScaleVrms, FractionFS: frac, Status: st}, nil
}

// AccuracyRel returns the specification's half-width as a fraction of
// reading, from the profile's accuracy table.
func (c *Converter) AccuracyRel(rangeIndex int, freqHz float64) (float64, bool) {
	return c.p.AccuracyRel(rangeIndex, freqHz)
}

// SwitchRange selects range rangeIndex through the switch: every channel
// is opened, then the range's channel is closed, and the relays are given
// their settling time.
func (s *SwitchedConverter) SwitchRange(ctx context.Context, rangeIndex int) error {
	if rangeIndex < 0 || rangeIndex >= len(s.ranges) {
		return outOfRange("converter", "range index", float64(rangeIndex), fmt.Sprintf("0 to %d", len(s.ranges)-1))
	}
	return s.sw.Select(ctx, s.p.Ranges[rangeIndex].Channel)
}

// Switch returns the switch instrument.
func (s *SwitchedConverter) Switch() *Switch { return s.sw }
