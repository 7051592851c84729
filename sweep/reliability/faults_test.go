package reliability

import (
	"context"
	"sync/atomic"
	"testing"
	"time"

	"rolloff/driver/profile"
	"rolloff/driver/sim"
	"rolloff/sweep/event"
	"rolloff/sweep/point"
	"rolloff/sweep/sched"
)

// faultCase is one fault injected into a sweep on the simulated bench.
type faultCase struct {
	name string
	tune func(*profile.BenchFile)
	// at is the number of points acknowledged before the fault is armed.
	at     int
	inject func(s *sim.Bench)
	// role and kind name the fault that must have taken effect
	// (sim.Faults.Count), so that a run finishing before the fault could
	// act proves nothing.
	role, kind string
	// final lists the acceptable end states.
	final []event.State
	// cause: a stopped run's events must name one of these; logged: a
	// completed run's events must mention one of these (the fault was
	// noticed and retried, not silently absorbed).
	cause, logged []string
}

// TestFaults injects each fault of the simulated bench into a sweep and
// checks that the run either completes with every point stored exactly
// once, or stops in a clear failed state with the cause in events.jsonl,
// and in both cases that the generator output is off and every point a
// subscriber was told of is on disk.
func TestFaults(t *testing.T) {
	retryLog := []string{"retry"}
	cases := []faultCase{
		{name: "voltmeter link dropped mid-query", at: 2,
			inject: func(s *sim.Bench) { s.Faults(sim.RoleVoltmeter).DropMidQuery() },
			role:   sim.RoleVoltmeter, kind: sim.FaultDropMidQuery,
			final: []event.State{event.Done}, logged: []string{"disconnected"}},
		{name: "generator link dropped mid-query", at: 3,
			inject: func(s *sim.Bench) { s.Faults(sim.RoleGenerator).DropMidQuery() },
			role:   sim.RoleGenerator, kind: sim.FaultDropMidQuery,
			final: []event.State{event.Done}, logged: []string{"disconnected"}},
		{name: "voltmeter link dropped between queries", at: 2,
			inject: func(s *sim.Bench) { s.Faults(sim.RoleVoltmeter).DropNow() },
			role:   sim.RoleVoltmeter, kind: sim.FaultDrop,
			final: []event.State{event.Done}},
		{name: "generator link dropped between queries", at: 4,
			inject: func(s *sim.Bench) { s.Faults(sim.RoleGenerator).DropNow() },
			role:   sim.RoleGenerator, kind: sim.FaultDrop,
			final: []event.State{event.Done}},
		{name: "voltmeter gone longer than the retry budget", at: 3,
			inject: func(s *sim.Bench) { s.Faults(sim.RoleVoltmeter).Gone(30 * time.Second) },
			role:   sim.RoleVoltmeter, kind: sim.FaultGone,
			final: []event.State{event.Failed}, cause: []string{"disconnected", "gave up"}},
		{name: "voltmeter answer delayed past the query time-out", at: 2,
			// A 0.4 s query time-out (the profile's framing), an answer 1 s late.
			tune:   func(c *profile.BenchFile) { c.Voltmeter.DMM.Framing.QueryTimeoutS = 0.4 },
			inject: func(s *sim.Bench) { s.Faults(sim.RoleVoltmeter).DelayNext(time.Second) },
			role:   sim.RoleVoltmeter, kind: sim.FaultDelay,
			final: []event.State{event.Done}, logged: []string{"timeout"}},
		{name: "corrupt numeric answer", at: 2,
			inject: func(s *sim.Bench) { s.Faults(sim.RoleVoltmeter).CorruptNext() },
			role:   sim.RoleVoltmeter, kind: sim.FaultCorrupt,
			final: []event.State{event.Done}, logged: []string{"malformed"}},
		{name: "truncated answer", at: 2,
			inject: func(s *sim.Bench) { s.Faults(sim.RoleVoltmeter).TruncateNext() },
			role:   sim.RoleVoltmeter, kind: sim.FaultTruncate,
			final: []event.State{event.Done}, logged: retryLog},
		{name: "unexpected generator error queue entry after configuring", at: 3,
			inject: func(s *sim.Bench) { s.Faults(sim.RoleGenerator).PushError(-310, "reliability fault 17") },
			role:   sim.RoleGenerator, kind: sim.FaultError,
			final: []event.State{event.Failed, event.Done}, cause: []string{"reliability fault 17"}, logged: []string{"reliability fault 17"}},
		{name: "voltmeter answers the overflow value", at: 2,
			inject: func(s *sim.Bench) { s.Faults(sim.RoleVoltmeter).ForceOverflow(3) },
			role:   sim.RoleVoltmeter, kind: sim.FaultOverflow,
			// One exchange may carry all three overflow values: the point
			// is then read again on a less sensitive range, and the log
			// says why.
			final: []event.State{event.Done}, logged: []string{"over-range", "clipped", "voltmeter overload"}},
		{name: "voltmeter answers the overflow value on every reading", at: 1,
			inject: func(s *sim.Bench) { s.Faults(sim.RoleVoltmeter).ForceOverflow(1 << 20) },
			role:   sim.RoleVoltmeter, kind: sim.FaultOverflow,
			final: []event.State{event.Done, event.Failed}, cause: []string{"no stable range", "overload"}, logged: []string{"clipped"}},
		{name: "converter overloaded", at: 2,
			inject: func(s *sim.Bench) { s.Faults(sim.RoleVoltmeter).OverloadConverter(400 * time.Millisecond) },
			role:   sim.RoleVoltmeter, kind: sim.FaultOverload,
			final: []event.State{event.Done}, logged: []string{"over-range"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			t.Parallel()
			safe(t, func(t *testing.T) { runFault(t, c) })
		})
	}
}

func runFault(t *testing.T, c faultCase) {
	g := openRig(t, 100, "", c.tune)
	p, freqs := loadPlan(t, "plan.toml", planTOML, g.b)
	var armed atomic.Bool
	var onAtFault atomic.Bool
	res := g.sweep(context.Background(), p, planTOML, sched.Opts{}, func(n int, _ point.Point, _ *sched.Run) {
		if n == c.at && !armed.Swap(true) {
			onAtFault.Store(g.sim.OutputOn())
			c.inject(g.sim)
		}
	})
	f := g.sim.Faults(c.role)
	took := f.Count(c.kind)
	if took > 0 {
		tally.faults.Add(1)
	}
	if !armed.Load() || took == 0 {
		t.Errorf("the fault never took effect (armed %v, %s count %d); the run ended %s: %v", armed.Load(), c.kind, took, res.state, res.err)
	}
	st := verifyRun(t, res.dir, expect{freqs: freqs, acked: res.acked, cause: c.cause, off: g.outputOff, final: c.final, note: logf(t, c.name)})
	if st == event.Done && len(c.logged) > 0 {
		rf := readRunFiles(t, res.dir)
		if msg, ok := rf.mentions(c.logged...); !ok {
			t.Errorf("run completed but no event mentions the fault (one of %q)", c.logged)
			for _, e := range rf.events {
				t.Logf("event %s: %s", e.Type, e.Message)
			}
		} else {
			t.Logf("%s: done; logged %q", c.name, msg)
		}
	}
	if st == event.Done && res.err != nil {
		t.Errorf("state done but Wait = %v", res.err)
	}
	if st != event.Done && res.err == nil {
		t.Errorf("state %s but Wait = nil", st)
	}
	t.Logf("%s: %d faults took effect; output on when injected: %v; Wait: %v", c.name, injected(g.sim), onAtFault.Load(), res.err)
}

// TestGeneratorGoneThenBack takes the generator off the network for
// longer than the scheduler's retry budget while its output is on. The
// run cannot switch the output off while the generator is unreachable,
// so it must fail with the cause recorded; and once the generator is back
// on the network, nothing may leave it driving the DUT.
func TestGeneratorGoneThenBack(t *testing.T) {
	t.Parallel()
	safe(t, func(t *testing.T) {
		g := openRig(t, 100, "", nil)
		p, freqs := loadPlan(t, "plan.toml", planTOML, g.b)
		const gone = 12 * time.Second
		var back atomic.Int64 // unix nanos when the generator returns
		var onAtFault atomic.Bool
		res := g.sweep(context.Background(), p, planTOML, sched.Opts{}, func(n int, _ point.Point, _ *sched.Run) {
			if n == 3 {
				onAtFault.Store(g.sim.OutputOn())
				back.Store(time.Now().Add(gone).UnixNano())
				g.sim.Faults(sim.RoleGenerator).Gone(gone)
			}
		})
		if g.sim.Faults(sim.RoleGenerator).Count(sim.FaultGone) > 0 {
			tally.faults.Add(1)
		}
		if back.Load() == 0 {
			t.Fatalf("the fault was never injected: %s, %v", res.state, res.err)
		}
		if !onAtFault.Load() {
			t.Log("the output was off when the generator went away")
		}
		rf := readRunFiles(t, res.dir)
		verifyPoints(t, rf, expect{freqs: freqs, acked: res.acked})
		if rf.metaState != event.Failed {
			t.Errorf("run ended %q (%s), want failed", rf.metaState, rf.metaMsg)
		}
		msg, ok := rf.mentions("disconnected", "gave up")
		if !ok {
			t.Errorf("no event names the lost generator")
		}
		// The generator returns; give the software a few seconds to
		// notice and switch the output off.
		wait := time.Until(time.Unix(0, back.Load())) + 4*time.Second
		time.Sleep(wait)
		if g.sim.OutputOn() {
			t.Errorf("the generator came back %v ago and is still driving the DUT: after a failed halt nothing switches its output off (the halt is tried once and given up)", 4*time.Second)
		} else if ok {
			tally.stopped.Add(1)
		}
		t.Logf("run %s: %q; output on after return: %v", rf.metaState, msg, g.sim.OutputOn())
	})
}
