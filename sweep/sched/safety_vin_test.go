package sched_test

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"

	"github.com/rs/zerolog"

	"rolloff/driver"
	"rolloff/driver/bench"
	"rolloff/sweep/plan"
	"rolloff/sweep/sched"
	"rolloff/sweep/sched/onbench"
	"rolloff/sweep/store"
)

// TestVinAboveLimitStops: a profile whose dBm reference is wrong for its
// instrument (dBm said to refer to the 10 Ω load setting, the simulated
// generator refers them to 50 Ω) puts √5 times the planned 0.6 Vrms on
// the DUT. The Vin channel measures it at the first point: the run fails
// with the measured value, the output off and no point recorded.
func TestVinAboveLimitStops(t *testing.T) {
	g := propGens[2] // dBm referred to the load setting
	g.simDBm = "fixed"
	cfg, _ := propBench(t, g, "10", 2000)
	b, err := bench.Open(context.Background(), cfg, zerolog.Nop())
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	p := shortPlan(plan.RangeRemote)
	p.Level.Vrms = 0.6
	st, err := store.Open(t.TempDir())
	if err != nil {
		t.Fatal(err)
	}
	run, err := st.Create(store.CreateOpts{PlanFile: "plan.toml", PlanData: []byte("name = \"v\"\n"), Plan: p, BenchFile: cfg.Raw})
	if err != nil {
		t.Fatal(err)
	}
	defer run.Close()
	inst := onbench.Instruments(b, zerolog.Nop())
	inst.VinMeter = simVin{b}
	rerr := sched.Start(context.Background(), inst, p, run, sched.Opts{NoAnalysis: true}).Wait()
	want := 0.6 * math.Sqrt(5) // dBm definition: V = √(P·R)
	if !errors.Is(rerr, driver.ErrOverLimit) || !strings.Contains(rerr.Error(), fmt.Sprintf("%.6g", want)) {
		t.Fatalf("run error %v; want ErrOverLimit naming %.6g Vrms", rerr, want)
	}
	if b.Sim.OutputOn() {
		t.Error("output on after the over-limit Vin")
	}
	if pts, _ := run.Points(); len(pts) != 0 {
		t.Errorf("%d points recorded", len(pts))
	}
	// What a Vin channel cannot do: the DUT did receive the excess until
	// it was measured.
	t.Logf("DUT input peak before the Vin check stopped the run: %.4g Vrms (limit %g)", b.Sim.PeakDUTInputVrms(), cfg.Limits.MaxVrms)
}
