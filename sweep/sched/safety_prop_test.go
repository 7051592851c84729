package sched_test

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/rs/zerolog"

	"rolloff/configs"
	"rolloff/driver"
	"rolloff/driver/bench"
	"rolloff/driver/profile"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/sched"
	"rolloff/sweep/sched/onbench"
	"rolloff/sweep/store"
)

// propGen is one way of driving the generator in the property test: the
// generator profile's edits and the simulated generator's dBm convention.
type propGen struct {
	name    string
	edits   []string
	simDBm  string
	dbmLoad bool
}

var dbmLimits = []string{"min_amplitude = 0.0", "min_amplitude = -60.0", "max_amplitude = 7.07", "max_amplitude = 23.0"}

var propGens = []propGen{
	{name: "vrms", simDBm: "fixed"},
	{name: "vpp", edits: []string{`unit = "vrms"`, `unit = "vpp"`, "max_amplitude = 7.07", "max_amplitude = 20.0"}, simDBm: "fixed"},
	{name: "dbm-load", edits: append([]string{`unit = "vrms"`, "unit = \"dbm\"\ndbm_reference = \"load\""}, dbmLimits...), simDBm: "load", dbmLoad: true},
	{name: "dbm-50", edits: append([]string{`unit = "vrms"`, "unit = \"dbm\"\ndbm_reference = 50"}, dbmLimits...), simDBm: "fixed"},
	// An apply-style command with a DC offset, which counts against the
	// limit as √(Vac² + Vdc²).
	{name: "apply-offset", edits: []string{
		`set_frequency = "SOURce:FREQuency {freq_hz}"`, `set_frequency = "APPLy:SINusoid {freq_hz},{amplitude},{offset_v}"`,
		`set_amplitude = "SOURce:VOLTage {amplitude}"`, `set_amplitude = "APPLy:SINusoid {freq_hz},{amplitude},{offset_v}"`,
		"offset_v = 0.0", "offset_v = 0.05",
	}, simDBm: "fixed"},
}

// simVin is a Vin channel reading the simulated DUT input.
type simVin struct{ b *bench.Bench }

func (simVin) ConfigureAC(context.Context, driver.ACConfig) error { return nil }
func (v simVin) ReadAC(context.Context) (float64, error) {
	if x := v.b.Sim.DUTInputVrms(); x > 0 {
		return x, nil
	}
	return 1e-9, nil
}

// propBench is the simulated demo bench with the generator profile
// edited, a load setting and the simulator's dBm convention.
func propBench(t *testing.T, g propGen, load string, scale float64) (*profile.BenchFile, bool) {
	t.Helper()
	cfg, err := configs.LoadBench(configs.SimBench)
	if err != nil {
		t.Fatal(err)
	}
	data, err := configs.ReadFile("generator-scpi.toml")
	if err != nil {
		t.Fatal(err)
	}
	text := string(data)
	l := load
	if l == "hi-z" {
		l = `"hi-z"`
	}
	for _, e := range [][]string{g.edits, {`load = "hi-z"`, "load = " + l}} {
		for i := 0; i+1 < len(e); i += 2 {
			if !strings.Contains(text, e[i]) {
				t.Fatalf("%q not in generator-scpi.toml", e[i])
			}
			text = strings.Replace(text, e[i], e[i+1], 1)
		}
	}
	gp, err := profile.DecodeGenerator("generator-scpi.toml", []byte(text))
	if g.dbmLoad && load == "hi-z" {
		if err == nil {
			t.Fatal("dBm referred to a hi-z load setting accepted")
		}
		return nil, false
	}
	if err != nil {
		t.Fatal(err)
	}
	cfg.Generator.Generator = gp
	// The [sim] table is decoded from the file's own text when the bench
	// opens (sim.FromBenchFile).
	old := []byte(`dbm_reference = "fixed"`)
	if !bytes.Contains(cfg.Raw, old) {
		t.Fatalf("%s has no %s", cfg.File, old)
	}
	cfg.Raw = bytes.Replace(cfg.Raw, old, []byte(fmt.Sprintf("dbm_reference = %q", g.simDBm)), 1)
	cfg.TimeScale = scale
	return cfg, true
}

// randomPlan draws a short plan: a few log-spaced points between 2 Hz and
// 1 MHz; an amplitude near the limit (60 % to 100 % of limitVrms) for
// half of the plans, else from 5 mV to 1.5 × limitVrms (log-uniform, so
// some above it); for the level strategy a window reaching up to 100
// times the planned amplitude but not past the limit (the plan check
// refuses more, before anything is sent).
func randomPlan(rng *rand.Rand, strategy string, ranges []driver.Range, limitVrms float64) *plan.Plan {
	logU := func(lo, hi float64) float64 { return lo * math.Pow(hi/lo, rng.Float64()) }
	start := logU(2, 2e5)
	p := &plan.Plan{
		Name:        "property",
		Frequencies: plan.Frequencies{Spacing: plan.SpacingLog, StartHz: start, StopHz: math.Min(1e6, start*logU(2, 1e3)), PointsPerDecade: 2},
		Level:       plan.Level{Vrms: logU(5e-3, 1.5) * limitVrms},
		Settle:      plan.Settle{Tolerance: 0.005, Readings: 2},
		Ranging:     plan.Ranging{Strategy: strategy},
		ReferenceHz: 1000,
	}
	if rng.IntN(2) == 0 {
		p.Level.Vrms = limitVrms * (0.6 + 0.4*rng.Float64())
	}
	if strategy == plan.RangeLevel {
		p.Level.MinVrms = math.Max(1e-3, p.Level.Vrms*logU(0.01, 1))
		p.Level.MaxVrms = math.Min(limitVrms, p.Level.Vrms*logU(1, 100))
	}
	p.ReferenceHz = math.Sqrt(p.Frequencies.StartHz * p.Frequencies.StopHz)
	if strategy == plan.RangeFixed || rng.IntN(2) == 0 {
		p.Ranging.Start = ranges[rng.IntN(len(ranges))].Name
	}
	p.Defaults()
	return p
}

// TestPropertyNeverAboveLimit runs random seeded plans on the simulated
// bench for every generator unit (Vrms, Vpp, dBm under each convention,
// an apply-style command with a DC offset), every load setting (50 Ω,
// hi-z, 10 Ω), with and without a Vin channel, and every range strategy,
// and checks the peak the simulated generator itself recorded at the DUT
// input (from its level, unit, convention and impedances, not from what
// the scheduler believes it sent) against the bench's max_vrms.
func TestPropertyNeverAboveLimit(t *testing.T) {
	strategies := []string{plan.RangeFixed, plan.RangeOperator, plan.RangeRemote, plan.RangeLevel}
	seed := uint64(9)
	worst, runs, failed := 0.0, 0, 0
	for _, g := range propGens {
		for _, load := range []string{"50", "hi-z", "10"} {
			for _, vin := range []bool{false, true} {
				for _, st := range strategies {
					seed++
					name := fmt.Sprintf("%s/load=%s/vin=%v/%s", g.name, load, vin, st)
					cfg, ok := propBench(t, g, load, 2000)
					if !ok {
						continue
					}
					rng := rand.New(rand.NewPCG(seed, 1))
					b, err := bench.Open(context.Background(), cfg, zerolog.Nop())
					if errors.Is(err, driver.ErrOutOfRange) {
						// Limits that leave nothing (an offset too large
						// for the load) are refused before anything is
						// sent.
						runs++
						failed++
						continue
					}
					if err != nil {
						t.Fatalf("%s: %v", name, err)
					}
					maxVrms := cfg.Limits.MaxVrms
					p := randomPlan(rng, st, b.Converter.Ranges(), maxVrms)
					st2, err := store.Open(t.TempDir())
					if err != nil {
						t.Fatal(err)
					}
					run, err := st2.Create(store.CreateOpts{PlanFile: "plan.toml", PlanData: []byte("name = \"p\"\n"), Plan: p, BenchFile: cfg.Raw})
					if err != nil {
						t.Fatal(err)
					}
					inst := onbench.Instruments(b, zerolog.Nop())
					if vin {
						inst.VinMeter = simVin{b}
					}
					opts := sched.Opts{NoAnalysis: true, Retries: 1}
					if i := b.Sim.ConverterRange(); i >= 0 {
						opts.RangeKnown, opts.CurrentRange = true, i
					}
					opts.Operator = func(ctx context.Context, pr event.Prompt) (int, error) {
						return pr.RangeIndex, b.Sim.SelectRange(pr.RangeIndex)
					}
					rerr := sched.Start(context.Background(), inst, p, run, opts).Wait()
					peak := b.Sim.PeakDUTInputVrms()
					on := b.Sim.OutputOn()
					run.Close()
					b.Close()
					runs++
					if rerr != nil {
						failed++
						if testing.Verbose() {
							t.Logf("%s: %v", name, rerr)
						}
					}
					worst = math.Max(worst, peak/maxVrms)
					if peak > maxVrms*(1+1e-9) {
						t.Errorf("%s: plan level %g V (window %g..%g): the DUT received %g Vrms, limit %g (run error: %v)",
							name, p.Level.Vrms, p.Level.MinVrms, p.Level.MaxVrms, peak, maxVrms, rerr)
					}
					if on {
						t.Errorf("%s: generator output left on (run error %v)", name, rerr)
					}
				}
			}
		}
	}
	t.Logf("%d runs (%d refused or failed), largest DUT input peak %.4g × max_vrms", runs, failed, worst)
	if runs-failed < runs/3 {
		t.Errorf("only %d of %d runs measured: the property says little", runs-failed, runs)
	}
}
