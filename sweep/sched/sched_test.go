package sched

import (
	"context"
	"errors"
	"fmt"
	"math"
	"testing"
	"time"

	"rolloff/driver"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/settle"
)

func TestStateMachine(t *testing.T) {
	legal := [][2]event.State{
		{"", event.Preparing},
		{event.Preparing, event.Settling},
		{event.Settling, event.Reading},
		{event.Reading, event.Settling},
		{event.Reading, event.Paused},
		{event.Paused, event.Settling},
		{event.Settling, event.WaitingOperator},
		{event.WaitingOperator, event.Settling},
		{event.Reading, event.Done},
		{event.Settling, event.Aborted},
		{event.WaitingOperator, event.Failed},
		{event.Paused, event.Interrupted},
	}
	for _, tr := range legal {
		m := machine{state: tr[0]}
		if err := m.to(tr[1]); err != nil || m.state != tr[1] {
			t.Errorf("%q → %q refused: %v", tr[0], tr[1], err)
		}
	}
	illegal := [][2]event.State{
		{"", event.Settling},
		{event.Preparing, event.Reading},
		{event.Done, event.Settling},
		{event.Aborted, event.Preparing},
		{event.Failed, event.Done},
		{event.Interrupted, event.Settling},
		{event.Paused, event.Reading},
		{event.Paused, event.Done},
		{event.WaitingOperator, event.Reading},
		{event.Settling, event.Done},
		{event.Reading, event.Queued},
	}
	for _, tr := range illegal {
		m := machine{state: tr[0]}
		if err := m.to(tr[1]); !errors.Is(err, ErrIllegalTransition) || m.state != tr[0] {
			t.Errorf("%q → %q: %v, state %q; want ErrIllegalTransition", tr[0], tr[1], err, m.state)
		}
	}
}

// checkTimeline verifies that the recorded state events form a legal
// path from preparing to want, with timestamps in order.
func checkTimeline(t *testing.T, rec *memRecorder, want event.State) {
	t.Helper()
	rec.mu.Lock()
	defer rec.mu.Unlock()
	var m machine
	var last time.Time
	for _, e := range rec.events {
		if e.Time.Before(last) {
			t.Errorf("event at %v before %v", e.Time, last)
		}
		last = e.Time
		if e.Type != event.TypeState {
			continue
		}
		if e.From != m.state {
			t.Errorf("state event from %q, machine at %q", e.From, m.state)
		}
		if err := m.to(e.State); err != nil {
			t.Errorf("timeline: %v", err)
		}
	}
	if m.state != want {
		t.Errorf("final state %q, want %q", m.state, want)
	}
}

func TestSweepFirstOrderChain(t *testing.T) {
	// The accepted readings of every point must agree with the fake
	// chain's exact DUT response within the tolerance: the settle model
	// (first-order step response) and the converge test together.
	for _, tau := range []float64{0.05, 0.5, 2} {
		t.Run(fmt.Sprintf("tau=%g", tau), func(t *testing.T) {
			clk := newFakeClock()
			c := newChain(clk)
			for i := range c.ranges {
				c.ranges[i].TimeConstantS = tau
			}
			c.noiseRel = 5e-5
			p := testPlan(plan.RangeRemote)
			rec := &memRecorder{}
			inst := instruments(c)
			inst.Converter = remoteChain{c}
			_, err := runOn(t, inst, p, rec, Opts{Clock: clk})
			if err != nil {
				t.Fatal(err)
			}
			checkTimeline(t, rec, event.Done)
			freqs, _ := p.Freqs()
			if len(rec.points) != len(freqs) {
				t.Fatalf("%d points, plan has %d", len(rec.points), len(freqs))
			}
			for i, pt := range rec.points {
				if pt.Seq != i || pt.Index != i || pt.FreqHz != freqs[i].Hz {
					t.Errorf("point %d: seq %d index %d at %g Hz", i, pt.Seq, pt.Index, pt.FreqHz)
				}
				want := c.dutGain(pt.FreqHz)
				got := pt.VoutVrms / pt.VinVrms
				if pt.Excluded() {
					t.Errorf("point %d at %g Hz flagged %v", i, pt.FreqHz, pt.Flags)
				}
				if math.Abs(got/want-1) > 1.5e-3 {
					t.Errorf("point %d at %g Hz: gain %.6f, DUT %.6f (%.2g)", i, pt.FreqHz, got, want, got/want-1)
				}
				if pt.Readings < p.Settle.Readings || pt.StdRel <= 0 || pt.StdRel > 1e-3 {
					t.Errorf("point %d: %d readings, std %g", i, pt.Readings, pt.StdRel)
				}
				if math.Abs(pt.GainDB-20*math.Log10(got)) > 1e-9 {
					t.Errorf("point %d: gain_db %g", i, pt.GainDB)
				}
			}
			if c.isOn() {
				t.Error("output left on")
			}
			if c.onBeforeAmp || c.maxOnVrms > p.Level.Vrms {
				t.Errorf("output on before amplitude %v, max driven %g", c.onBeforeAmp, c.maxOnVrms)
			}
			if c.switchedLive > 0 {
				t.Errorf("%d range switches with the output on", c.switchedLive)
			}
		})
	}
}

func TestHoldDoesNotFoolSettle(t *testing.T) {
	// Holds of 0.3 to 0.9 s, up to a tenth of the time, on a τ = 0.3 s
	// converter: without the hold check, readings inside a hold agree and
	// freeze a stale value (errors of several tolerances).
	total := 0
	for _, h := range []struct{ every, hold float64 }{{6, 0.5}, {4.1, 0.4}, {9, 0.9}, {5, 0.3}, {7.3, 0.7}, {11, 0.6}} {
		t.Run(fmt.Sprintf("%g/%g", h.hold, h.every), func(t *testing.T) {
			clk := newFakeClock()
			c := newChain(clk)
			c.holdEvery, c.holdS = h.every, h.hold
			for i := range c.ranges {
				c.ranges[i].TimeConstantS = 0.3
			}
			p := testPlan(plan.RangeRemote)
			rec := &memRecorder{}
			inst := instruments(c)
			inst.Converter = remoteChain{c}
			inst.HoldIntervalS, inst.HoldS = h.every, h.hold
			if _, err := runOn(t, inst, p, rec, Opts{Clock: clk}); err != nil {
				t.Fatal(err)
			}
			for _, pt := range rec.points {
				want := c.dutGain(pt.FreqHz)
				if got := pt.VoutVrms / pt.VinVrms; math.Abs(got/want-1) > 1.5e-3 {
					t.Errorf("%g Hz: gain %.6f, DUT %.6f", pt.FreqHz, got, want)
				}
			}
			for _, e := range rec.events {
				if e.Type == event.TypeLog && contains(e.Message, "output hold") {
					total++
				}
			}
		})
	}
	if total == 0 {
		t.Error("no hold detected: the test does not exercise the hold check")
	}
	t.Logf("%d holds detected", total)
}

func TestFixedFlags(t *testing.T) {
	// Fixed on the 100 mV range with 50 mV in: the roll-offs fall under
	// the window and are flagged; a gain of 4 drives the passband over
	// range, which must switch the output off at once.
	clk := newFakeClock()
	c := newChain(clk)
	c.gain = 2.5
	p := testPlan(plan.RangeFixed)
	p.Ranging.Start = "r2"
	rec := &memRecorder{}
	var onWhileOver int
	c.hook = func(c *chain, what string) {}
	if _, err := runOn(t, instruments(c), p, rec, Opts{Clock: clk}); err != nil {
		t.Fatal(err)
	}
	_ = onWhileOver
	var under, over int
	for _, pt := range rec.points {
		fr := c.ampVrms * c.dutGain(pt.FreqHz) / 0.1
		switch {
		case fr > c.window.OverFraction:
			over++
			if !pt.Has(point.FlagOverRange) && !pt.Has(point.FlagClipped) {
				t.Errorf("%g Hz at %.2f FS not flagged over-range: %v", pt.FreqHz, fr, pt.Flags)
			}
		case fr < c.window.UnderFraction*0.98:
			under++
			if !pt.Has(point.FlagUnderRange) {
				t.Errorf("%g Hz at %.2f FS not flagged under-range: %v", pt.FreqHz, fr, pt.Flags)
			}
		case fr > c.window.UnderFraction*1.02 && fr < c.window.OverFraction*0.98:
			if pt.Excluded() {
				t.Errorf("%g Hz at %.2f FS flagged %v", pt.FreqHz, fr, pt.Flags)
			}
		}
		if pt.RangeIndex != 2 {
			t.Errorf("range changed to %d in fixed mode", pt.RangeIndex)
		}
	}
	if under == 0 || over == 0 {
		t.Fatalf("test premise: %d under, %d over", under, over)
	}
	// Every over-range point was followed by output off before the next
	// frequency: count offs.
	offs := 0
	for _, on := range c.outputLog {
		if !on {
			offs++
		}
	}
	if offs < over {
		t.Errorf("%d output-offs for %d over-range points", offs, over)
	}
	if len(c.switches) != 0 {
		t.Errorf("fixed strategy switched ranges %v", c.switches)
	}
}

func TestOperatorPromptConfirm(t *testing.T) {
	clk := newFakeClock()
	c := newChain(clk)
	p := testPlan(plan.RangeOperator)
	rec := &memRecorder{}
	opts := Opts{Clock: clk, RangeKnown: true, CurrentRange: 4, NoAnalysis: true}
	r := start(context.Background(), instruments(c), p, rec, "t", opts)
	ch, cancel := r.Subscribe()
	defer cancel()
	prompts := 0
	for ev := range ch {
		if ev.Type != event.TypePrompt {
			continue
		}
		prompts++
		if c.isOn() {
			t.Error("output on while waiting for the operator")
		}
		if st := r.Status(); st.State != event.WaitingOperator || st.Prompt == nil || st.Prompt.ID != ev.Prompt.ID {
			t.Errorf("status during prompt: %+v", st)
		}
		if err := r.Confirm(ev.Prompt.ID+100, ev.Prompt.RangeIndex); !errors.Is(err, ErrNoPrompt) {
			t.Errorf("Confirm with a wrong id: %v", err)
		}
		if err := r.Confirm(ev.Prompt.ID, 99); !errors.Is(err, ErrBadRange) {
			t.Errorf("Confirm with a bad range: %v", err)
		}
		c.selectRange(ev.Prompt.RangeIndex)
		if err := r.Confirm(ev.Prompt.ID, ev.Prompt.RangeIndex); err != nil {
			t.Errorf("Confirm: %v", err)
		}
	}
	if err := r.Wait(); err != nil {
		t.Fatal(err)
	}
	if prompts < 2 {
		t.Errorf("%d prompts; the roll-offs need range changes", prompts)
	}
	for _, pt := range rec.points {
		if pt.Excluded() && c.dutGain(pt.FreqHz)*0.05 > 0.01*0.3*1.1 {
			t.Errorf("%g Hz flagged %v", pt.FreqHz, pt.Flags)
		}
	}
	checkTimeline(t, rec, event.Done)
}

func TestOperatorCallback(t *testing.T) {
	clk := newFakeClock()
	c := newChain(clk)
	p := testPlan(plan.RangeOperator)
	rec := &memRecorder{}
	var asked []event.Prompt
	op := func(ctx context.Context, pr event.Prompt) (int, error) {
		asked = append(asked, pr)
		c.selectRange(pr.RangeIndex)
		return pr.RangeIndex, nil
	}
	if _, err := runOn(t, instruments(c), p, rec, Opts{Clock: clk, Operator: op}); err != nil {
		t.Fatal(err)
	}
	if len(asked) < 2 || asked[0].Reason == "" {
		t.Fatalf("prompts %+v", asked)
	}
	for _, pt := range rec.points {
		if pt.RangeIndex != c.rangeIdxAt(pt) {
			t.Errorf("point at %g Hz records range %d", pt.FreqHz, pt.RangeIndex)
		}
	}
}

// rangeIdxAt is the range a point should have been read on: the one the
// converter's Scale agrees with (the recorded fraction times full scale
// is the reading).
func (c *chain) rangeIdxAt(pt point.Point) int {
	for i, rg := range c.ranges {
		if math.Abs(pt.FractionFS*rg.FullScaleVrms-pt.VoutVrms) <= 1e-12 {
			return i
		}
	}
	return -1
}

func TestRemoteSwitching(t *testing.T) {
	clk := newFakeClock()
	c := newChain(clk)
	p := testPlan(plan.RangeRemote)
	rec := &memRecorder{}
	inst := instruments(c)
	inst.Converter = remoteChain{c}
	if _, err := runOn(t, inst, p, rec, Opts{Clock: clk}); err != nil {
		t.Fatal(err)
	}
	if len(c.switches) < 3 {
		t.Errorf("switches %v", c.switches)
	}
	if c.switchedLive > 0 {
		t.Errorf("%d switches with output on", c.switchedLive)
	}
	for _, pt := range rec.points {
		if pt.Excluded() {
			t.Errorf("%g Hz flagged %v (range %s, %.3f FS)", pt.FreqHz, pt.Flags, pt.Range, pt.FractionFS)
		}
	}
}

func TestLevelStrategy(t *testing.T) {
	// Level: fixed range 31.6 mV; the DUT falls 40 dB at the ends; the
	// generator level follows within [5 mV, 0.5 V] and the gain is taken
	// from the actual amplitude.
	clk := newFakeClock()
	c := newChain(clk)
	p := testPlan(plan.RangeLevel)
	p.Ranging.Start = "r1"
	c.rangeIdx = 1
	p.Level = plan.Level{Vrms: 0.02, MinVrms: 0.005, MaxVrms: 0.5}
	rec := &memRecorder{}
	if _, err := runOn(t, instruments(c), p, rec, Opts{Clock: clk}); err != nil {
		t.Fatal(err)
	}
	amps := map[float64]bool{}
	for _, pt := range rec.points {
		amps[pt.VinVrms] = true
		if pt.VinVrms < 0.005 || pt.VinVrms > 0.5 {
			t.Errorf("%g Hz at %g Vrms: outside the level bounds", pt.FreqHz, pt.VinVrms)
		}
		want := c.dutGain(pt.FreqHz)
		need := 0.01 * 0.3 / want // input that reaches the window
		if need > 0.5 {
			continue // cannot reach the window: flagged
		}
		if pt.Excluded() {
			t.Errorf("%g Hz flagged %v at %g Vrms", pt.FreqHz, pt.Flags, pt.VinVrms)
		}
		if got := pt.VoutVrms / pt.VinVrms; math.Abs(got/want-1) > 1.5e-3 {
			t.Errorf("%g Hz: gain %.6f, DUT %.6f", pt.FreqHz, got, want)
		}
	}
	if len(amps) < 3 {
		t.Errorf("amplitudes used %v", amps)
	}
	if c.maxOnVrms > 0.5 {
		t.Errorf("drove %g Vrms", c.maxOnVrms)
	}
}

func TestAbortTurnsOutputOff(t *testing.T) {
	clk := newFakeClock()
	c := newChain(clk)
	p := testPlan(plan.RangeRemote)
	rec := &memRecorder{}
	inst := instruments(c)
	inst.Converter = remoteChain{c}
	var r *Run
	started := make(chan struct{})
	freqs := 0
	c.hook = func(c *chain, what string) {
		if what == "freq" {
			if freqs++; freqs == 4 {
				<-started
				r.Abort()
			}
		}
	}
	r = start(context.Background(), inst, p, rec, "t", Opts{Clock: clk, NoAnalysis: true})
	close(started)
	err := r.Wait()
	if !errors.Is(err, ErrAborted) {
		t.Fatalf("Wait = %v, want ErrAborted", err)
	}
	if c.isOn() {
		t.Error("output on after abort")
	}
	if r.State() != event.Aborted {
		t.Errorf("state %q", r.State())
	}
	checkTimeline(t, rec, event.Aborted)
	if err := r.Pause(); !errors.Is(err, ErrFinished) {
		t.Errorf("Pause after the end: %v", err)
	}
}

func TestContextCancelTurnsOutputOff(t *testing.T) {
	// A cancelled context is SIGINT/SIGTERM in the command: the run ends
	// interrupted (resumable) with the output off.
	clk := newFakeClock()
	c := newChain(clk)
	p := testPlan(plan.RangeRemote)
	rec := &memRecorder{}
	inst := instruments(c)
	inst.Converter = remoteChain{c}
	ctx, cancel := context.WithCancel(context.Background())
	freqs := 0
	c.hook = func(c *chain, what string) {
		if what == "freq" {
			if freqs++; freqs == 6 {
				cancel()
			}
		}
	}
	r := start(ctx, inst, p, rec, "t", Opts{Clock: clk, NoAnalysis: true})
	err := r.Wait()
	if err == nil || !errors.Is(err, context.Canceled) {
		t.Fatalf("Wait = %v", err)
	}
	if c.isOn() {
		t.Error("output on after cancel")
	}
	checkTimeline(t, rec, event.Interrupted)
}

func TestTransientRetryNoDuplicates(t *testing.T) {
	clk := newFakeClock()
	c := newChain(clk)
	c.failReads = map[int]error{}
	for _, n := range []int{10, 11, 40, 77} {
		c.failReads[n] = fmt.Errorf("fake: %w", driver.ErrDisconnected)
	}
	p := testPlan(plan.RangeRemote)
	rec := &memRecorder{}
	inst := instruments(c)
	inst.Converter = remoteChain{c}
	if _, err := runOn(t, inst, p, rec, Opts{Clock: clk, RetryBackoff: time.Millisecond}); err != nil {
		t.Fatal(err)
	}
	freqs, _ := p.Freqs()
	if len(rec.points) != len(freqs) {
		t.Fatalf("%d points for %d frequencies", len(rec.points), len(freqs))
	}
	seen := map[int]bool{}
	for _, pt := range rec.points {
		if seen[pt.Index] {
			t.Errorf("index %d twice", pt.Index)
		}
		seen[pt.Index] = true
	}
	retries := 0
	for _, e := range rec.events {
		if e.Type == event.TypeLog && contains(e.Message, "retry") {
			retries++
		}
	}
	if retries != 4 {
		t.Errorf("%d retry events, want 4", retries)
	}
}

func TestRetryBudgetFails(t *testing.T) {
	clk := newFakeClock()
	c := newChain(clk)
	c.failReads = map[int]error{}
	for n := 20; n < 30; n++ {
		c.failReads[n] = fmt.Errorf("fake: %w", driver.ErrTimeout)
	}
	p := testPlan(plan.RangeRemote)
	rec := &memRecorder{}
	inst := instruments(c)
	inst.Converter = remoteChain{c}
	_, err := runOn(t, inst, p, rec, Opts{Clock: clk, RetryBackoff: time.Millisecond})
	if !errors.Is(err, driver.ErrTimeout) {
		t.Fatalf("Wait = %v, want the cause", err)
	}
	if c.isOn() {
		t.Error("output on after failure")
	}
	checkTimeline(t, rec, event.Failed)
	last := rec.events[len(rec.events)-1]
	if last.State != event.Failed || !contains(last.Message, "timeout") {
		t.Errorf("last event %+v", last)
	}
}

func contains(s, sub string) bool {
	for i := 0; i+len(sub) <= len(s); i++ {
		if s[i:i+len(sub)] == sub {
			return true
		}
	}
	return false
}

func TestPauseResume(t *testing.T) {
	clk := newFakeClock()
	c := newChain(clk)
	p := testPlan(plan.RangeRemote)
	rec := &memRecorder{}
	inst := instruments(c)
	inst.Converter = remoteChain{c}
	var r *Run
	ready := make(chan struct{})
	paused := false
	freqs := 0
	c.hook = func(c *chain, what string) {
		if what == "freq" {
			freqs++
		}
		if what == "read" && freqs >= 5 && !paused {
			<-ready
			paused = true
			if err := r.Pause(); err != nil {
				t.Error(err)
			}
		}
	}
	r = start(context.Background(), inst, p, rec, "t", Opts{Clock: clk, NoAnalysis: true})
	ch, cancel := r.Subscribe()
	defer cancel()
	close(ready)
	if err := r.Resume(); !errors.Is(err, ErrNotPaused) && err != nil {
		t.Errorf("Resume before pause: %v", err)
	}
	for ev := range ch {
		if ev.Type == event.TypeState && ev.State == event.Paused {
			if c.isOn() {
				t.Error("output on while paused")
			}
			if err := r.Resume(); err != nil {
				t.Error(err)
			}
		}
	}
	if err := r.Wait(); err != nil {
		t.Fatal(err)
	}
	planFreqs, _ := p.Freqs()
	if len(rec.points) != len(planFreqs) {
		t.Errorf("%d points", len(rec.points))
	}
	checkTimeline(t, rec, event.Done)
	for _, pt := range rec.points {
		if math.Abs(pt.VoutVrms/pt.VinVrms/c.dutGain(pt.FreqHz)-1) > 1.5e-3 {
			t.Errorf("%g Hz off after pause", pt.FreqHz)
		}
	}
}

func TestResumeSamePoints(t *testing.T) {
	// Interrupt after 7 points, resume on a new run of the same store:
	// the same frequencies, no index twice, Seq continuous, and the
	// gains those of an uninterrupted run within the tolerance.
	p := testPlan(plan.RangeRemote)
	full := func() []point.Point {
		clk := newFakeClock()
		c := newChain(clk)
		inst := instruments(c)
		inst.Converter = remoteChain{c}
		rec := &memRecorder{}
		if _, err := runOn(t, inst, p, rec, Opts{Clock: clk}); err != nil {
			t.Fatal(err)
		}
		return rec.points
	}()
	rec := &memRecorder{}
	{
		clk := newFakeClock()
		c := newChain(clk)
		inst := instruments(c)
		inst.Converter = remoteChain{c}
		ctx, cancel := context.WithCancel(context.Background())
		freqs := 0
		c.hook = func(c *chain, what string) {
			if what == "freq" {
				if freqs++; freqs == 8 {
					cancel()
				}
			}
		}
		r := start(ctx, inst, p, rec, "t", Opts{Clock: clk, NoAnalysis: true})
		if err := r.Wait(); err == nil {
			t.Fatal("interrupted run ended without error")
		}
		if n := rec.pointCount(); n < 5 || n > 8 {
			t.Fatalf("%d points stored before the interruption", n)
		}
	}
	clk := newFakeClock()
	c := newChain(clk)
	inst := instruments(c)
	inst.Converter = remoteChain{c}
	if _, err := runOn(t, inst, p, rec, Opts{Clock: clk, Resume: true}); err != nil {
		t.Fatal(err)
	}
	if len(rec.points) != len(full) {
		t.Fatalf("%d points after resume, %d uninterrupted", len(rec.points), len(full))
	}
	for i, pt := range rec.points {
		if pt.Seq != i || pt.Index != full[i].Index || pt.FreqHz != full[i].FreqHz {
			t.Errorf("point %d: seq %d index %d %g Hz; uninterrupted index %d %g Hz", i, pt.Seq, pt.Index, pt.FreqHz, full[i].Index, full[i].FreqHz)
		}
		if math.Abs(pt.VoutVrms/pt.VinVrms/(full[i].VoutVrms/full[i].VinVrms)-1) > 2e-3 {
			t.Errorf("point %d: gain %g vs %g", i, pt.VoutVrms/pt.VinVrms, full[i].VoutVrms/full[i].VinVrms)
		}
	}
}

func TestSlowSubscriberNeverBlocks(t *testing.T) {
	clk := newFakeClock()
	c := newChain(clk)
	p := testPlan(plan.RangeRemote)
	rec := &memRecorder{}
	inst := instruments(c)
	inst.Converter = remoteChain{c}
	r := start(context.Background(), inst, p, rec, "t", Opts{Clock: clk, NoAnalysis: true, SubscriberBuffer: 4})
	slow, cancelSlow := r.Subscribe() // never read until the end
	defer cancelSlow()
	if err := r.Wait(); err != nil {
		t.Fatal(err)
	}
	n := 0
	for range slow {
		n++
	}
	if n > 4 {
		t.Errorf("slow subscriber received %d events with a buffer of 4", n)
	}
	if len(rec.events) < 20 {
		t.Errorf("only %d events stored", len(rec.events))
	}
}

// orderRecorder checks that a point is stored before any subscriber sees it.
type orderRecorder struct {
	memRecorder
}

func TestPointStoredBeforeEvent(t *testing.T) {
	clk := newFakeClock()
	c := newChain(clk)
	p := testPlan(plan.RangeRemote)
	rec := &orderRecorder{}
	inst := instruments(c)
	inst.Converter = remoteChain{c}
	r := start(context.Background(), inst, p, rec, "t", Opts{Clock: clk, NoAnalysis: true})
	ch, cancel := r.Subscribe()
	defer cancel()
	got := 0
	for ev := range ch {
		if ev.Type == event.TypePoint {
			got++
			pts, _ := rec.Points()
			found := false
			for _, q := range pts {
				found = found || q.Seq == ev.Point.Seq
			}
			if !found {
				t.Errorf("point %d announced before it was stored", ev.Point.Seq)
			}
		}
	}
	if err := r.Wait(); err != nil {
		t.Fatal(err)
	}
	if got == 0 {
		t.Error("no point events")
	}
}

func TestRefinement(t *testing.T) {
	clk := newFakeClock()
	c := newChain(clk)
	p := testPlan(plan.RangeRemote)
	p.Refine = plan.Refine{Enabled: true, LevelDB: plan.HalfPowerDB, ResolutionRel: 0.002, MaxPoints: 40}
	rec := &memRecorder{}
	inst := instruments(c)
	inst.Converter = remoteChain{c}
	if _, err := runOn(t, inst, p, rec, Opts{Clock: clk}); err != nil {
		t.Fatal(err)
	}
	freqs, _ := p.Freqs()
	var refined []point.Point
	for _, pt := range rec.points {
		if pt.Has(point.FlagRefined) {
			if pt.Index < len(freqs) {
				t.Errorf("refined point with plan index %d", pt.Index)
			}
			refined = append(refined, pt)
		}
	}
	if len(refined) < 6 || len(refined) > 40 {
		t.Fatalf("%d refined points", len(refined))
	}
	// Every crossing of the measured response (reference at 1 kHz
	// − 3.0103 dB) is bracketed by points closer than the resolution, and
	// lies within 0.5 % of the analytic corner of the fake DUT (solved by
	// bisection on |H|; the settle tolerance of 0.1 % moves a first-order
	// corner by about 0.2 %).
	pts := sortedByFreq(rec.points)
	var ref float64
	for _, pt := range pts {
		if pt.FreqHz == 1000 {
			ref = pt.GainDB
		}
	}
	lvl := ref + plan.HalfPowerDB
	var crossings []float64
	for i := 1; i < len(pts); i++ {
		a, b := pts[i-1], pts[i]
		if (a.GainDB-lvl)*(b.GainDB-lvl) <= 0 {
			if b.FreqHz/a.FreqHz-1 > 0.002 {
				t.Errorf("crossing bracketed by %g..%g Hz (%.3g)", a.FreqHz, b.FreqHz, b.FreqHz/a.FreqHz-1)
			}
			crossings = append(crossings, math.Sqrt(a.FreqHz*b.FreqHz))
		}
	}
	aref := c.dutGain(1000)
	want := []float64{findCorner(c, aref, 2, 1000), findCorner(c, aref, 1000, 2e5)}
	if len(crossings) != 2 {
		t.Fatalf("crossings %v, analytic %v", crossings, want)
	}
	for i := range want {
		if math.Abs(crossings[i]/want[i]-1) > 0.005 {
			t.Errorf("crossing %g Hz, analytic %g Hz", crossings[i], want[i])
		}
	}
}

func sortedByFreq(pts []point.Point) []point.Point {
	v := append([]point.Point(nil), pts...)
	for i := range v {
		for j := i + 1; j < len(v); j++ {
			if v[j].FreqHz < v[i].FreqHz {
				v[i], v[j] = v[j], v[i]
			}
		}
	}
	return v
}

// findCorner solves |H(f)| = ref/√2 by bisection in log f.
func findCorner(c *chain, ref, lo, hi float64) float64 {
	target := ref / math.Sqrt2
	for i := 0; i < 200; i++ {
		m := math.Sqrt(lo * hi)
		if (c.dutGain(lo)-target)*(c.dutGain(m)-target) <= 0 {
			hi = m
		} else {
			lo = m
		}
	}
	return math.Sqrt(lo * hi)
}

func TestDwellMatchesModel(t *testing.T) {
	// The time spent per point is the model's dwell plus the readings:
	// the sum over points of SettleS stays within 25 % of the physical
	// bound (the first-order settle from the previous value to the
	// tolerance, plus the readings' time).
	clk := newFakeClock()
	c := newChain(clk)
	p := testPlan(plan.RangeRemote)
	p.Frequencies.PointsPerDecade = 12
	rec := &memRecorder{}
	inst := instruments(c)
	inst.Converter = remoteChain{c}
	inst.Meter = settle.Meter{AperturesS: []float64{0.02, 0.05, 0.1, 0.2, 0.5}, OverheadS: 0.001}
	if _, err := runOn(t, inst, p, rec, Opts{Clock: clk}); err != nil {
		t.Fatal(err)
	}
	bound, spent := 0.0, 0.0
	prev := 0.0
	for _, pt := range rec.points {
		v := pt.VoutVrms
		bound += settle.DwellS(c.ranges[pt.RangeIndex].TimeConstantS, prev, v, p.Settle.Tolerance)
		rd, _ := settle.ChooseAperture(pt.FreqHz, c.ranges[pt.RangeIndex].TimeConstantS, rippleShare*p.Settle.Tolerance, inst.Meter)
		bound += float64(p.Settle.Readings) * rd.TimeS(inst.Meter)
		spent += pt.SettleS + rd.TimeS(inst.Meter)/2
		prev = v
	}
	if spent > 1.25*bound || spent < 0.95*bound {
		t.Errorf("sum of settle %.3f s vs bound %.3f s (x %.3f)", spent, bound, spent/bound)
	}
	t.Logf("settle sum %.3f s, bound %.3f s, x %.3f", spent, bound, spent/bound)
}

func TestBeyondConverterBandFlagged(t *testing.T) {
	// A converter specified to 50 kHz: points above it are kept but
	// flagged and excluded; points at or below it are not.
	clk := newFakeClock()
	c := newChain(clk)
	c.window.MaxFreqHz = 50e3
	rec := &memRecorder{}
	inst := instruments(c)
	inst.Converter = remoteChain{c}
	if _, err := runOn(t, inst, testPlan(plan.RangeRemote), rec, Opts{Clock: clk}); err != nil {
		t.Fatal(err)
	}
	var beyond int
	for _, pt := range rec.points {
		flagged := pt.Has(point.FlagBeyondBand)
		if flagged != (pt.FreqHz > 50e3) {
			t.Errorf("%g Hz: beyond-band flag %v, converter limit 50 kHz", pt.FreqHz, flagged)
		}
		if flagged {
			beyond++
			if !pt.Excluded() {
				t.Errorf("%g Hz beyond the converter's band is not excluded", pt.FreqHz)
			}
		}
	}
	if beyond == 0 {
		t.Fatal("test premise: no point above 50 kHz")
	}
}

func TestETAIncludesRefinement(t *testing.T) {
	// At the end of the planned points the refinement is still to come:
	// the ETA then must not read zero, and must be within a factor of 3
	// of the time that actually remained.
	clk := newFakeClock()
	c := newChain(clk)
	p := testPlan(plan.RangeRemote)
	p.Refine = plan.Refine{Enabled: true, LevelDB: plan.HalfPowerDB, ResolutionRel: 0.002, MaxPoints: 40}
	rec := &memRecorder{}
	inst := instruments(c)
	inst.Converter = remoteChain{c}
	if _, err := runOn(t, inst, p, rec, Opts{Clock: clk}); err != nil {
		t.Fatal(err)
	}
	freqs, err := p.Freqs()
	if err != nil {
		t.Fatal(err)
	}
	var atPlanEnd *event.Event
	var end time.Time
	for i, e := range rec.events {
		if e.Type == event.TypeProgress && e.Progress.Done == len(freqs) && atPlanEnd == nil {
			atPlanEnd = &rec.events[i]
		}
		if e.Type == event.TypeState && e.State == event.Done {
			end = e.Time
		}
	}
	if atPlanEnd == nil || end.IsZero() {
		t.Fatal("no progress event at the end of the planned points, or no done state")
	}
	left := end.Sub(atPlanEnd.Time).Seconds()
	eta := atPlanEnd.Progress.ETA.Seconds()
	if left < 1 {
		t.Fatalf("test premise: only %.3g s of refinement", left)
	}
	if eta < left/3 || eta > 3*left {
		t.Errorf("ETA at the end of the planned points %.3g s, actually %.3g s remained", eta, left)
	}
	t.Logf("ETA %.3g s, remaining %.3g s", eta, left)
}

// vinMeter is a second channel on the DUT input: the generator's setting
// less a 2 % loss in the source impedance, the case a measured Vin exists
// for.
type vinMeter struct {
	c     *chain
	reads int
}

func (m *vinMeter) ConfigureAC(ctx context.Context, cfg driver.ACConfig) error { return nil }
func (m *vinMeter) ReadAC(ctx context.Context) (float64, error) {
	m.reads++
	m.c.mu.Lock()
	defer m.c.mu.Unlock()
	return 0.98 * m.c.ampVrms, nil
}

func TestMeasuredVin(t *testing.T) {
	clk := newFakeClock()
	c := newChain(clk)
	rec := &memRecorder{}
	inst := instruments(c)
	inst.Converter = remoteChain{c}
	vm := &vinMeter{c: c}
	inst.VinMeter = vm
	if _, err := runOn(t, inst, testPlan(plan.RangeRemote), rec, Opts{Clock: clk}); err != nil {
		t.Fatal(err)
	}
	if vm.reads == 0 {
		t.Fatal("the Vin channel was never read")
	}
	for _, pt := range rec.points {
		if math.Abs(pt.VinVrms/(0.98*0.05)-1) > 1e-12 {
			t.Errorf("%g Hz: Vin %g Vrms, want the measured %g", pt.FreqHz, pt.VinVrms, 0.98*0.05)
		}
		// gain = Vout / Vin (definition), from the measured Vin.
		if want := 20 * math.Log10(pt.VoutVrms/pt.VinVrms); math.Abs(pt.GainDB-want) > 1e-9 {
			t.Errorf("%g Hz: gain %g dB, Vout/Vin gives %g dB", pt.FreqHz, pt.GainDB, want)
		}
	}
}
