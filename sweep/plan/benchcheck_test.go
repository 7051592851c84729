package plan

import (
	"errors"
	"testing"

	"rolloff/driver"
)

func TestCheckBench(t *testing.T) {
	lim := driver.GeneratorLimits{MinFreqHz: 1, MaxFreqHz: 1e6, MinVrms: 1e-3, MaxVrms: 1}
	two := []driver.Range{{Name: "1 V", FullScaleVrms: 1, TimeConstantS: 1}, {Name: "10 V", FullScaleVrms: 10, TimeConstantS: 1}}
	one := two[:1]
	base := func(strategy, start string) *Plan {
		p := &Plan{Name: "t", Frequencies: Frequencies{Spacing: SpacingLog, StartHz: 10, StopHz: 1000, PointsPerDecade: 2},
			Level: Level{Vrms: 0.1}, Ranging: Ranging{Strategy: strategy, Start: start}, ReferenceHz: 100}
		p.Defaults()
		return p
	}
	for _, c := range []struct {
		name  string
		p     *Plan
		b     Bench
		field string // "" = accepted
	}{
		{"named range", base(RangeRemote, "10 V"), Bench{Limits: lim, Ranges: two, RemoteRanges: true}, ""},
		{"no such range", base(RangeRemote, "7 V"), Bench{Limits: lim, Ranges: two, RemoteRanges: true}, "ranging.start"},
		{"remote on a hand-switched converter", base(RangeRemote, ""), Bench{Limits: lim, Ranges: two}, "ranging.strategy"},
		{"fixed, range unknown", base(RangeFixed, ""), Bench{Limits: lim, Ranges: two}, "ranging.start"},
		{"fixed, range known", base(RangeFixed, ""), Bench{Limits: lim, Ranges: two, RangeKnown: true}, ""},
		{"fixed, a single range", base(RangeFixed, ""), Bench{Limits: lim, Ranges: one}, ""},
		{"operator asks", base(RangeOperator, ""), Bench{Limits: lim, Ranges: two}, ""},
		{"AC DMM bench", base(RangeFixed, ""), Bench{Limits: lim}, ""},
		{"above the generator", func() *Plan { p := base(RangeFixed, "1 V"); p.Frequencies.StopHz = 2e6; return p }(), Bench{Limits: lim, Ranges: two}, "frequencies.stop_hz"},
		{"level window below the generator", func() *Plan {
			p := base(RangeLevel, "1 V")
			p.Level = Level{Vrms: 0.0005, MinVrms: 0.0001, MaxVrms: 0.0008}
			return p
		}(), Bench{Limits: lim, Ranges: two}, "level.vrms"},
	} {
		err := c.p.CheckBench(c.b)
		var fe *FieldError
		switch {
		case c.field == "" && err != nil:
			t.Errorf("%s: refused: %v", c.name, err)
		case c.field != "" && (!errors.As(err, &fe) || fe.Field != c.field):
			t.Errorf("%s: %v; want a refusal naming %s", c.name, err, c.field)
		}
	}
}
