package reliability

import (
	"context"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"rolloff/configs"
	"rolloff/driver/bench"
	"rolloff/driver/profile"
	"rolloff/driver/sim"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/sched"
	"rolloff/sweep/sched/onbench"
	"rolloff/sweep/store"
)

// planTOML is the suite's plan: ten points from 100 Hz to 100 kHz across
// the demo DUT's passband and its upper corner, at 50 mVrms (0.5 Vrms out
// of the +20 dB DUT), ranges switched through the simulated relay
// instrument from the 1 V range.
const planTOML = `name = "reliability"
reference_hz = 1000
[frequencies]
spacing = "log"
start_hz = 100
stop_hz = 100000
points_per_decade = 3
[level]
vrms = 0.05
[settle]
tolerance = 0.002
readings = 2
[ranging]
strategy = "remote"
start = "1 V"
[refine]
enabled = false
`

// longPlanTOML is planTOML at twelve points per decade: 37 points. Its
// lines in points.jsonl (about 450 bytes each) cross the 4 KiB page
// boundaries of tmpfs several times, so that whenever TestDiskFull fills
// the disk in the first half of the run (a subscriber hears of points a
// little after they are stored), a later append needs space that is not
// there; and the crash tests have time to kill a run in its middle.
var longPlanTOML = strings.Replace(planTOML, "points_per_decade = 3", "points_per_decade = 12", 1)

// simBench loads the demo simulated bench file at a time scale (model
// seconds per wall second).
func simBench(t *testing.T, scale float64) *profile.BenchFile {
	t.Helper()
	cfg, err := configs.LoadBench(configs.SimBench)
	if err != nil {
		t.Fatal(err)
	}
	cfg.TimeScale = scale
	return cfg
}

// loadPlan decodes and validates a plan document against lim.
func loadPlan(t *testing.T, name, text string, b *bench.Bench) (*plan.Plan, []plan.Freq) {
	t.Helper()
	p, err := plan.DecodeTOML(name, []byte(text))
	if err != nil {
		t.Fatal(err)
	}
	p.Defaults()
	if err := p.Validate(b.Generator.Limits()); err != nil {
		t.Fatal(err)
	}
	fs, err := p.Freqs()
	if err != nil {
		t.Fatal(err)
	}
	return p, fs
}

// rig is one simulated bench, opened in-process through the real
// transports, with a run store.
type rig struct {
	t     *testing.T
	cfg   *profile.BenchFile
	b     *bench.Bench
	sim   *sim.Bench // the simulator (b.Sim, or one the test started)
	st    *store.Store
	dir   string
	scale float64
}

// openRig opens the demo simulated bench at scale, after tune adjusts
// its configuration, with a store in a fresh directory (or storeDir).
func openRig(t *testing.T, scale float64, storeDir string, tune func(*profile.BenchFile)) *rig {
	t.Helper()
	cfg := simBench(t, scale)
	if tune != nil {
		tune(cfg)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancel()
	b, err := bench.Open(ctx, cfg, zerolog.Nop())
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { b.Close() })
	if storeDir == "" {
		storeDir = t.TempDir()
	}
	st, err := store.Open(storeDir)
	if err != nil {
		t.Fatal(err)
	}
	return &rig{t: t, cfg: cfg, b: b, sim: b.Sim, st: st, dir: storeDir, scale: scale}
}

// sweepResult is what one run of the scheduler gave.
type sweepResult struct {
	run   *store.Run
	r     *sched.Run
	err   error
	state event.State
	acked []point.Point // point events received by a subscriber
	dir   string
}

// sweep creates a run of p and sweeps it, calling hook with every point
// the subscriber is told of (n counts from 1). The run is closed when
// sweep returns.
func (g *rig) sweep(ctx context.Context, p *plan.Plan, text string, opts sched.Opts, hook func(n int, pt point.Point, r *sched.Run)) sweepResult {
	g.t.Helper()
	run, err := g.st.Create(store.CreateOpts{PlanFile: "plan.toml", PlanData: []byte(text), Plan: p, BenchFile: g.cfg.Raw, Identities: g.b.Identities})
	if err != nil {
		g.t.Fatal(err)
	}
	return g.sweepRun(ctx, run, p, opts, hook)
}

// sweepRun sweeps p into an open, locked run.
func (g *rig) sweepRun(ctx context.Context, run *store.Run, p *plan.Plan, opts sched.Opts, hook func(n int, pt point.Point, r *sched.Run)) sweepResult {
	g.t.Helper()
	inst := onbench.Instruments(g.b, zerolog.Nop())
	if g.b.Sim == nil {
		inst.TimeScale = g.scale
	}
	if !opts.RangeKnown {
		if i := g.sim.ConverterRange(); i >= 0 {
			opts.RangeKnown, opts.CurrentRange = true, i
		}
	}
	if opts.RetryBackoff == 0 {
		opts.RetryBackoff = 10 * time.Millisecond
	}
	if opts.SubscriberBuffer == 0 {
		opts.SubscriberBuffer = 1 << 14
	}
	if opts.Finish == nil && !opts.NoAnalysis {
		opts.NoAnalysis = true
	}
	r := sched.Start(ctx, inst, p, run, opts)
	ch, cancel := r.Subscribe()
	res := sweepResult{run: run, r: r, dir: run.Dir()}
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		defer cancel()
		n := 0
		for ev := range ch {
			if ev.Type != event.TypePoint || ev.Point == nil {
				continue
			}
			n++
			res.acked = append(res.acked, *ev.Point)
			if hook != nil {
				hook(n, *ev.Point, r)
			}
		}
	}()
	done := make(chan struct{})
	go func() { res.err = r.Wait(); close(done) }()
	select {
	case <-done:
	case <-time.After(90 * time.Second):
		r.Abort()
		<-done
		g.t.Errorf("the run did not end within 90 s (aborted)")
	}
	wg.Wait()
	res.state = r.Status().State
	if err := run.Close(); err != nil {
		g.t.Errorf("closing the run: %v", err)
	}
	return res
}

// outputOff reports whether the simulated generator's output is off.
func (g *rig) outputOff() bool { return !g.sim.OutputOn() }

// injected sums the faults that took effect on every simulated instrument.
func injected(s *sim.Bench) int {
	n := 0
	for _, role := range sim.Roles {
		n += s.Faults(role).Injected()
	}
	return n
}

// logf returns a note function for verifyRun.
func logf(t *testing.T, prefix string) func(string) {
	return func(s string) { t.Logf("%s: %s", prefix, s) }
}
