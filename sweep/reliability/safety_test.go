package reliability

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"rolloff/driver"
	"rolloff/driver/bench"
	"rolloff/driver/profile"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/sched"
	"rolloff/sweep/sched/onbench"
	"rolloff/sweep/store"
)

// genProfileText returns the shipped generator profile with edits.
func genProfileText(t *testing.T, edits ...string) string {
	t.Helper()
	s := shipped(t, "generator-scpi.toml")
	for i := 0; i+1 < len(edits); i += 2 {
		s = replaceOnce(t, s, edits[i], edits[i+1])
	}
	return s
}

var dbmEdits = []string{`unit = "vrms"`, "unit = \"dbm\"", "min_amplitude = 0.0", "min_amplitude = -60.0", "max_amplitude = 7.07", "max_amplitude = 23.0"}

// TestSafetyProfileRefusals: generator profiles that could put a level
// rolloff did not compute on the DUT are refused at load time, naming the
// key: dBm with no reference impedance, and literal levels or
// instrument-chosen levels in templates.
func TestSafetyProfileRefusals(t *testing.T) {
	safe(t, func(t *testing.T) {
		for _, c := range []struct {
			name, key string
			edits     []string
		}{
			{"dBm with no reference", "output.dbm_reference", append(append([]string{}, dbmEdits...), `load = "hi-z"`, `load = 10`)},
			{"dBm into a hi-z load", "output.load", append([]string{`unit = "vrms"`, "unit = \"dbm\"\ndbm_reference = \"load\""}, dbmEdits[2:]...)},
			{"literal level in an apply command", "commands.set_frequency", []string{`set_frequency = "SOURce:FREQuency {freq_hz}"`, `set_frequency = "APPLy:SINusoid {freq_hz},9.9,0"`}},
			{"literal level in init", "commands.init[0]", []string{"init = []", `init = ["SOURce1:VOLTage 5"]`}},
			{"maximum level", "commands.output_on", []string{`output_on = "OUTPut ON"`, `output_on = "SOURce:VOLTage MAXimum"`}},
			{"offset never sent", "output.offset_v", []string{"offset_v = 0.0", "offset_v = 0.5"}},
		} {
			_, err := profile.DecodeGenerator("generator-scpi.toml", []byte(genProfileText(t, c.edits...)))
			if err == nil || !strings.Contains(err.Error(), c.key) || !strings.Contains(err.Error(), "generator-scpi.toml") {
				t.Errorf("%s: %v; want a refusal naming the file and %s", c.name, err, c.key)
				continue
			}
			tally.rejected.Add(1)
		}
	})
}

// safetyBench is the shipped simulated bench with the generator profile
// edited, the simulated generator's dBm convention and its load setting.
func safetyBench(t *testing.T, genText, simDBm string, scale float64) *profile.BenchFile {
	t.Helper()
	cfg := simBench(t, scale)
	g, err := profile.DecodeGenerator("generator-scpi.toml", []byte(genText))
	if err != nil {
		t.Fatal(err)
	}
	cfg.Generator.Generator = g
	editSim(t, cfg, `dbm_reference = "fixed"`, fmt.Sprintf("dbm_reference = %q", simDBm))
	return cfg
}

// simVin is a Vin channel reading the simulated DUT input.
type simVin struct{ b *bench.Bench }

func (simVin) ConfigureAC(context.Context, driver.ACConfig) error { return nil }
func (v simVin) ReadAC(context.Context) (float64, error) {
	return math.Max(v.b.Sim.DUTInputVrms(), 1e-9), nil
}

// runOnSim runs p on an opened simulated bench into a fresh store and
// returns the run directory and the run's error.
func runOnSim(t *testing.T, b *bench.Bench, cfg *profile.BenchFile, p *plan.Plan, vin bool) (string, error) {
	t.Helper()
	st, err := store.Open(t.TempDir())
	if err != nil {
		t.Fatal(err)
	}
	run, err := st.Create(store.CreateOpts{PlanFile: "plan.toml", PlanData: []byte("name = \"safety\"\n"), Plan: p, BenchFile: cfg.Raw})
	if err != nil {
		t.Fatal(err)
	}
	defer run.Close()
	inst := onbench.Instruments(b, zerolog.Nop())
	if vin {
		inst.VinMeter = simVin{b}
	}
	opts := sched.Opts{NoAnalysis: true, RangeKnown: true, CurrentRange: b.Sim.ConverterRange(),
		Operator: func(ctx context.Context, pr event.Prompt) (int, error) {
			return pr.RangeIndex, b.Sim.SelectRange(pr.RangeIndex)
		}}
	err = sched.Start(context.Background(), inst, p, run, opts).Wait()
	return run.Dir(), err
}

func safetyPlan(strategy string, vrms float64) *plan.Plan {
	p := &plan.Plan{
		Name:        "safety",
		Frequencies: plan.Frequencies{Spacing: plan.SpacingLog, StartHz: 100, StopHz: 100000, PointsPerDecade: 1},
		Level:       plan.Level{Vrms: vrms},
		Settle:      plan.Settle{Tolerance: 0.005, Readings: 2},
		Ranging:     plan.Ranging{Strategy: strategy, Start: "10 V"},
		ReferenceHz: 1000,
	}
	if strategy == plan.RangeLevel {
		p.Level.MinVrms, p.Level.MaxVrms = vrms/10, 1
	}
	p.Defaults()
	return p
}

// TestSafetyAmplitudeBound: for every generator unit and dBm convention
// and every load setting, a plan near the limit under a random strategy
// never puts more than max_vrms into the simulated DUT, as measured by
// the simulated generator's own record of its peak output into the DUT.
func TestSafetyAmplitudeBound(t *testing.T) {
	safe(t, func(t *testing.T) {
		gens := []struct {
			name, simDBm string
			edits        []string
		}{
			{"vrms", "fixed", nil},
			{"vpp", "fixed", []string{`unit = "vrms"`, `unit = "vpp"`, "max_amplitude = 7.07", "max_amplitude = 20.0"}},
			{"dbm-load", "load", append([]string{`unit = "vrms"`, "unit = \"dbm\"\ndbm_reference = \"load\""}, dbmEdits[2:]...)},
			{"dbm-50", "fixed", append([]string{`unit = "vrms"`, "unit = \"dbm\"\ndbm_reference = 50"}, dbmEdits[2:]...)},
		}
		strategies := []string{plan.RangeFixed, plan.RangeOperator, plan.RangeRemote, plan.RangeLevel}
		rng := rand.New(rand.NewPCG(9, 9))
		worst := 0.0
		for _, g := range gens {
			for _, load := range []string{"50", `"hi-z"`, "10"} {
				if g.name == "dbm-load" && load == `"hi-z"` {
					continue // refused at load time (TestSafetyProfileRefusals)
				}
				cfg := safetyBench(t, genProfileText(t, append(append([]string{}, g.edits...), `load = "hi-z"`, "load = "+load)...), g.simDBm, 2000)
				b, err := bench.Open(context.Background(), cfg, zerolog.Nop())
				if err != nil {
					t.Fatal(err)
				}
				st := strategies[rng.IntN(len(strategies))]
				p := safetyPlan(st, cfg.Limits.MaxVrms*(0.7+0.3*rng.Float64()))
				dir, rerr := runOnSim(t, b, cfg, p, rng.IntN(2) == 0)
				peak, off := b.Sim.PeakDUTInputVrms(), !b.Sim.OutputOn()
				b.Close()
				worst = math.Max(worst, peak/cfg.Limits.MaxVrms)
				if peak > cfg.Limits.MaxVrms*(1+1e-9) {
					t.Errorf("%s, load %s, %s: the DUT received %g Vrms, limit %g (%v)", g.name, load, st, peak, cfg.Limits.MaxVrms, rerr)
				}
				freqs, _ := p.Freqs()
				verifyRun(t, dir, expect{freqs: freqs, off: func() bool { return off }, final: []event.State{event.Done}})
			}
		}
		t.Logf("largest DUT input peak %.4g × max_vrms", worst)
	})
}

// TestSafetyVinAboveLimit: a profile whose dBm reference is wrong for its
// generator (the load setting, 10 Ω, where the instrument refers to 50 Ω)
// puts √5 × the planned level on the DUT; the Vin channel measures it
// and the run stops with the output off, naming the measured value.
func TestSafetyVinAboveLimit(t *testing.T) {
	safe(t, func(t *testing.T) {
		gen := genProfileText(t, append([]string{`unit = "vrms"`, "unit = \"dbm\"\ndbm_reference = \"load\"", `load = "hi-z"`, "load = 10"}, dbmEdits[2:]...)...)
		cfg := safetyBench(t, gen, "fixed", 2000)
		b, err := bench.Open(context.Background(), cfg, zerolog.Nop())
		if err != nil {
			t.Fatal(err)
		}
		defer b.Close()
		p := safetyPlan(plan.RangeRemote, 0.6)
		dir, rerr := runOnSim(t, b, cfg, p, true)
		if !errors.Is(rerr, driver.ErrOverLimit) {
			t.Fatalf("run error %v; want ErrOverLimit", rerr)
		}
		freqs, _ := p.Freqs()
		verifyRun(t, dir, expect{freqs: freqs, off: func() bool { return !b.Sim.OutputOn() }, cause: []string{"measured Vin 1.34164"}, final: []event.State{event.Failed}})
	})
}

// TestSafetyReadbackMismatch: the generator profile claims 7.07 Vrms but
// the instrument stops at 0.3 Vrms and, with the error queue unchecked,
// silently keeps its old level. The amplitude read-back sees it and stops
// the run with the output off.
func TestSafetyReadbackMismatch(t *testing.T) {
	safe(t, func(t *testing.T) {
		gen := genProfileText(t, `query_amplitude = ""`, `query_amplitude = "SOURce:VOLTage?"`,
			`query_frequency = ""`, `query_frequency = "SOURce:FREQuency?"`, "check_errors = true", "check_errors = false")
		cfg := safetyBench(t, gen, "fixed", 2000)
		editSim(t, cfg, "max_vrms = 7.0", "max_vrms = 0.3")
		b, err := bench.Open(context.Background(), cfg, zerolog.Nop())
		if err != nil {
			t.Fatal(err)
		}
		defer b.Close()
		p := safetyPlan(plan.RangeRemote, 0.5)
		dir, rerr := runOnSim(t, b, cfg, p, false)
		if !errors.Is(rerr, driver.ErrReadback) {
			t.Fatalf("run error %v; want ErrReadback", rerr)
		}
		freqs, _ := p.Freqs()
		verifyRun(t, dir, expect{freqs: freqs, off: func() bool { return !b.Sim.OutputOn() }, cause: []string{"read back"}, final: []event.State{event.Failed}})
	})
}

// TestSafetyBadPlanTouchesNothing: plans the bench cannot run are refused
// naming the field before any command reaches a simulated instrument.
func TestSafetyBadPlanTouchesNothing(t *testing.T) {
	safe(t, func(t *testing.T) {
		cfg := simBench(t, 2000)
		b, err := bench.Open(context.Background(), cfg, zerolog.Nop())
		if err != nil {
			t.Fatal(err)
		}
		defer b.Close()
		for _, c := range []struct {
			field string
			edit  func(p *plan.Plan)
		}{
			{"ranging.start", func(p *plan.Plan) { p.Ranging.Start = "7 V" }},
			{"frequencies.stop_hz", func(p *plan.Plan) { p.Frequencies.StopHz = 5e6 }},
			{"level.max_vrms", func(p *plan.Plan) { p.Ranging.Strategy, p.Level.MinVrms, p.Level.MaxVrms = plan.RangeLevel, 0.01, 2 }},
		} {
			p := safetyPlan(plan.RangeRemote, 0.1)
			c.edit(p)
			before := map[string]int{}
			for _, role := range []string{"generator", "voltmeter", "switch"} {
				before[role] = len(b.Sim.Received(role))
			}
			_, rerr := runOnSim(t, b, cfg, p, false)
			var fe *plan.FieldError
			sent := 0
			for role, n := range before {
				sent += len(b.Sim.Received(role)) - n
			}
			if !errors.As(rerr, &fe) || fe.Field != c.field || sent != 0 {
				t.Errorf("%s: %v, %d commands sent; want a refusal naming it with nothing sent", c.field, rerr, sent)
				continue
			}
			tally.rejected.Add(1)
		}
	})
}

// TestSafetyBenchLock: a second `rolloff run` on instruments a first one
// is sweeping (named by another bench file, host written differently) is
// refused before it sends anything, told the holder's pid and run; after
// the holder is killed with SIGKILL, a third run gets the bench and
// completes.
func TestSafetyBenchLock(t *testing.T) {
	safe(t, func(t *testing.T) {
		s := startSim(t, 20)
		dir := t.TempDir()
		first := writeTCPBench(t, dir, s.Addr, "")
		other := filepath.Join(t.TempDir(), "other")
		if err := os.MkdirAll(other, 0o755); err != nil {
			t.Fatal(err)
		}
		second := writeTCPBench(t, other, func(role string) string {
			return strings.Replace(s.Addr(role), "127.0.0.1", "LOCALHOST", 1)
		}, "")
		planFile := filepath.Join(dir, "plan.toml")
		if err := os.WriteFile(planFile, []byte(longPlanTOML), 0o644); err != nil {
			t.Fatal(err)
		}
		out := filepath.Join(dir, "runs")
		r1 := startProc(t, "first rolloff run", "run", planFile, "--bench", first, "--out", out)
		deadline := time.Now().Add(60 * time.Second)
		var runDir string
		for {
			if ds := runDirs(out); len(ds) == 1 && countLines(filepath.Join(ds[0], "points.jsonl")) >= 1 {
				runDir = ds[0]
				break
			}
			if time.Now().After(deadline) || r1.exited() {
				t.Fatalf("the first run measured nothing: %s", tail(r1.stderr.String(), 2000))
			}
			time.Sleep(5 * time.Millisecond)
		}
		r2 := startProc(t, "second rolloff run", "run", planFile, "--bench", second, "--out", filepath.Join(other, "runs"))
		if !r2.wait(30 * time.Second) {
			t.Fatal("the second run was not refused")
		}
		msg := r2.stderr.String()
		pid := strconv.Itoa(r1.cmd.Process.Pid)
		if r2.exitCode() == 0 || !strings.Contains(msg, "in use by process "+pid) || !strings.Contains(msg, filepath.Base(runDir)) {
			t.Errorf("second run: exit %d, %q; want a refusal naming process %s and run %s", r2.exitCode(), tail(msg, 600), pid, filepath.Base(runDir))
		} else {
			tally.rejected.Add(1)
		}
		if runs := runDirs(filepath.Join(other, "runs")); len(runs) != 0 {
			t.Errorf("the refused run created %v", runs)
		}
		r1.signal(syscall.SIGKILL)
		if !r1.wait(10 * time.Second) {
			t.Fatal("the first run did not die")
		}
		tally.faults.Add(1)
		if s.OutputOn() {
			// The killed run left the output on: the next controller
			// switches it off first thing.
			t.Log("generator output left on by the killed run")
		}
		short := filepath.Join(other, "short.toml")
		shortPlan := regexp.MustCompile(`stop_hz = 100000`).ReplaceAllString(planTOML, "stop_hz = 1000")
		if err := os.WriteFile(short, []byte(shortPlan), 0o644); err != nil {
			t.Fatal(err)
		}
		r3 := startProc(t, "third rolloff run", "run", short, "--bench", second, "--out", filepath.Join(other, "runs"))
		if !r3.wait(60 * time.Second) {
			t.Fatal("the third run did not finish")
		}
		if r3.exitCode() != 0 {
			t.Fatalf("after the holder's crash: exit %d: %s", r3.exitCode(), tail(r3.stderr.String(), 2000))
		}
		ds := runDirs(filepath.Join(other, "runs"))
		if len(ds) != 1 {
			t.Fatalf("runs %v", ds)
		}
		verifyRun(t, ds[0], expect{freqs: planFreqs(t, shortPlan), off: func() bool { return !s.OutputOn() }, final: []event.State{event.Done}, note: logf(t, "after a crashed holder")})
	})
}
