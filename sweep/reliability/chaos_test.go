package reliability

import (
	"context"
	"math/rand/v2"
	"os"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"rolloff/driver/profile"
	"rolloff/driver/sim"
	"rolloff/sweep/event"
	"rolloff/sweep/point"
	"rolloff/sweep/sched"
)

// chaosPlanTOML is planTOML at twenty points per decade: 61 points.
var chaosPlanTOML = strings.Replace(planTOML, "points_per_decade = 3", "points_per_decade = 20", 1)

// TestChaos injects a random transient fault (seeded, so that a failure
// can be replayed) after about every other point of a longer sweep: links
// dropped during and between queries on both instruments, late, corrupt
// and truncated answers, overflow readings and converter overloads, one
// outstanding at a time. Each one is within the retry budget (ROLLOFF_CHAOS_SEED picks another seed), so the run must complete with every
// point stored exactly once and the output off.
func TestChaos(t *testing.T) {
	t.Parallel()
	safe(t, func(t *testing.T) {
		seed := uint64(20261201)
		if v := os.Getenv("ROLLOFF_CHAOS_SEED"); v != "" {
			n, err := strconv.ParseUint(v, 10, 64)
			if err != nil {
				t.Fatalf("ROLLOFF_CHAOS_SEED=%q: want an unsigned integer", v)
			}
			seed = n
		}
		// Time scale 25: the sweep lasts long enough (about 6 s) for a fault
		// to be armed after about every other point even on a loaded machine.
		g := openRig(t, 25, "", func(c *profile.BenchFile) { c.Voltmeter.DMM.Framing.QueryTimeoutS = 0.4 })
		p, freqs := loadPlan(t, "plan.toml", chaosPlanTOML, g.b)
		rng := rand.New(rand.NewPCG(seed, 1))
		vm, gen := g.sim.Faults(sim.RoleVoltmeter), g.sim.Faults(sim.RoleGenerator)
		faults := []struct {
			name string
			f    func()
		}{
			{"voltmeter drop mid-query", vm.DropMidQuery},
			{"generator drop mid-query", gen.DropMidQuery},
			{"voltmeter drop", vm.DropNow},
			{"generator drop", gen.DropNow},
			{"voltmeter late answer", func() { vm.DelayNext(time.Second) }},
			{"corrupt answer", vm.CorruptNext},
			{"truncated answer", vm.TruncateNext},
			{"overflow reading", func() { vm.ForceOverflow(1) }},
			{"converter overload", func() { vm.OverloadConverter(150 * time.Millisecond) }},
		}
		var mu sync.Mutex
		var armed []string
		took := 0            // faults that had taken effect when the last one was armed
		pending := false     // the last fault armed has not taken effect yet
		var effect time.Time // when the hook first saw it had
		res := g.sweep(context.Background(), p, chaosPlanTOML, sched.Opts{}, func(n int, pt point.Point, _ *sched.Run) {
			// One fault at a time, and the next only once a point has
			// been measured after the last one took effect: the
			// subscriber hears of points some time after they are
			// measured, and faults armed faster than the sweep recovers
			// would pile onto one operation and exhaust its retry
			// budget, which is a different test.
			if cur := injected(g.sim); pending && cur > took {
				pending, effect = false, time.Now()
			}
			if pending || !pt.Time.After(effect) || rng.IntN(2) != 0 {
				return
			}
			took, pending = injected(g.sim), true
			f := faults[rng.IntN(len(faults))]
			f.f()
			mu.Lock()
			armed = append(armed, f.name)
			mu.Unlock()
		})
		took = injected(g.sim)
		tally.faults.Add(int64(took))
		if took < 5 {
			t.Errorf("only %d faults took effect (armed %v)", took, armed)
		}
		verifyRun(t, res.dir, expect{freqs: freqs, acked: res.acked, off: g.outputOff,
			final: []event.State{event.Done}, note: logf(t, "chaos")})
		t.Logf("seed %d: %d faults armed, %d took effect: %v; Wait: %v", seed, len(armed), took, armed, res.err)
	})
}
