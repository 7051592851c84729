package plan

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"rolloff/driver"
)

// Bench is what a plan is checked against before any instrument is
// touched: the generator's effective limits and the converter's ranges.
type Bench struct {
	// Limits are the generator's limits at the DUT input: the tighter of
	// the generator profile's and the bench file's.
	Limits driver.GeneratorLimits
	// Ranges are the converter's ranges; nil on a bench that reads AC
	// directly (voltmeter_mode "ac-dmm").
	Ranges []driver.Range
	// RemoteRanges says that the converter's range is switched remotely
	// (a relay instrument).
	RemoteRanges bool
	// RangeKnown says that the converter's selected range will be known
	// when the run starts (a simulated bench, a resumed run).
	RangeKnown bool
}

// CheckBench checks the plan against the bench, with no instrument
// involved: everything Validate checks, with the bench's effective
// limits; ranging.start naming a range of the converter; a strategy the
// converter supports; a start range where the strategy keeps the range
// and it is otherwise unknown (a converter with one range needs none);
// and the level strategy's window left inside the limits. Every problem
// is a *FieldError naming the plan field; several are joined.
func (p *Plan) CheckBench(b Bench) error {
	if err := p.Validate(b.Limits); err != nil {
		return err
	}
	v := &validator{p: p}
	r := &p.Ranging
	if b.Ranges != nil {
		names := make([]string, len(b.Ranges))
		start := -1
		for i, rg := range b.Ranges {
			names[i] = strconv.Quote(rg.Name)
			if rg.Name == r.Start {
				start = i
			}
		}
		if r.Start != "" && start < 0 {
			v.add("ranging.start", strconv.Quote(r.Start), "one of the converter's ranges: "+strings.Join(names, ", "))
		}
		switch r.Strategy {
		case RangeRemote:
			if !b.RemoteRanges {
				v.add("ranging.strategy", strconv.Quote(r.Strategy), `the converter's range is selected by hand on this bench: "operator", "fixed" or "level"`)
			}
		case RangeFixed, RangeLevel:
			if r.Start == "" && !b.RangeKnown && len(b.Ranges) > 1 {
				v.add("ranging.start", `""`, fmt.Sprintf("the range the converter is on (its range is unknown before the run and strategy %q keeps it): one of %s", r.Strategy, strings.Join(names, ", ")))
			}
		}
	}
	if r.Strategy == RangeLevel {
		lo, hi := p.Level.MinVrms, p.Level.MaxVrms
		if lo <= 0 {
			lo = p.Level.Vrms
		}
		if hi <= 0 {
			hi = p.Level.Vrms
		}
		if b.Limits.MinVrms > 0 {
			lo = math.Max(lo, b.Limits.MinVrms)
		}
		hi = math.Min(hi, b.Limits.MaxVrms)
		if lo > hi {
			v.add("level.min_vrms", fmtFloat(p.Level.MinVrms), fmt.Sprintf("a window inside the generator's %s..%s Vrms", fmtFloat(b.Limits.MinVrms), fmtFloat(b.Limits.MaxVrms)))
		}
	}
	return join(v.errs)
}
