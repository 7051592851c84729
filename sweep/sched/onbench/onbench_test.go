package onbench

import (
	"context"
	"math"
	"testing"

	"github.com/rs/zerolog"

	"rolloff/configs"
	"rolloff/driver/bench"
	"rolloff/sweep/plan"
)

func TestMeterAndInstruments(t *testing.T) {
	cfg, err := configs.LoadBench(configs.SimBench)
	if err != nil {
		t.Fatal(err)
	}
	// The demo bench's DC voltmeter is set to 1 NPLC at 50 Hz and accepts
	// apertures in seconds up to its profile's max_aperture_s: the
	// shortest aperture used is one line cycle, 20 ms.
	m := Meter(cfg)
	if err := m.Validate(); err != nil {
		t.Fatal(err)
	}
	if math.Abs(m.Shortest()-0.02) > 1e-12 || m.Longest() != cfg.Voltmeter.DMM.DC.MaxApertureS {
		t.Errorf("meter %+v", m)
	}
	b, err := bench.Open(context.Background(), cfg, zerolog.Nop())
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	in := Instruments(b, zerolog.Nop())
	if in.Generator == nil || in.DCVoltmeter == nil || in.Converter == nil || in.TimeScale != b.TimeScale {
		t.Errorf("instruments %+v", in)
	}
	if in.HoldS != cfg.Converter.Spec.HoldS || in.HoldIntervalS != cfg.Converter.Spec.HoldIntervalS || in.HoldS <= 0 {
		t.Errorf("hold %g every %g s", in.HoldS, in.HoldIntervalS)
	}
	if in.Limits.MaxVrms <= 0 || in.Limits.MaxVrms > cfg.Limits.MaxVrms {
		t.Errorf("limits %+v, bench max %g", in.Limits, cfg.Limits.MaxVrms)
	}
	// The plan estimate: a flat DUT takes less than a first-order slope at
	// every point, and both at least the readings.
	data, _ := configs.ReadFile("demo-plan.toml")
	p, err := plan.DecodeTOML("demo-plan.toml", data)
	if err != nil {
		t.Fatal(err)
	}
	flat, err := plan.Estimate(p, Timing(cfg, p, 0))
	if err != nil {
		t.Fatal(err)
	}
	steep, err := plan.Estimate(p, Timing(cfg, p, 20))
	if err != nil {
		t.Fatal(err)
	}
	minReads := float64(flat.Points) * float64(p.Settle.Readings) * 0.02
	if !(flat.PhysicalS >= minReads && steep.PhysicalS > flat.PhysicalS) {
		t.Errorf("estimates flat %g s, steep %g s (readings alone %g s)", flat.PhysicalS, steep.PhysicalS, minReads)
	}
}
