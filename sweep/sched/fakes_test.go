package sched

import (
	"context"
	"fmt"
	"math"
	"math/cmplx"
	"sync"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"rolloff/driver"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/settle"
)

// fakeClock is a virtual wall clock: Sleep advances it at once.
type fakeClock struct {
	mu  sync.Mutex
	now time.Time
}

func newFakeClock() *fakeClock { return &fakeClock{now: time.Date(2026, 1, 2, 3, 4, 5, 0, time.UTC)} }

func (c *fakeClock) Now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.now
}

func (c *fakeClock) Sleep(ctx context.Context, d time.Duration) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	c.advance(d)
	return ctx.Err()
}

func (c *fakeClock) advance(d time.Duration) {
	if d <= 0 {
		return
	}
	c.mu.Lock()
	c.now = c.now.Add(d)
	c.mu.Unlock()
}

// chain is a fake bench: a generator driving a DUT (a first-order high
// pass times a first-order low pass) into a converter with an exact
// first-order mean-square average, read by a DC voltmeter. Everything
// runs on the fake clock (physical time = wall time, time scale 1).
type chain struct {
	mu    sync.Mutex
	clock *fakeClock
	t0    time.Time

	// DUT corners and passband gain.
	lowHz, highHz, gain float64

	// generator
	freqHz, ampVrms float64
	ampSet, output  bool
	limits          driver.GeneratorLimits
	maxOnVrms       float64 // the largest amplitude ever driven with output on
	onBeforeAmp     bool    // output switched on before any amplitude was set
	outputLog       []bool

	// converter
	ranges    []driver.Range
	window    driver.Window
	rangeIdx  int
	avg       settle.Averager // the mean square state (input Vrms², s)
	hist      []segment
	holdEvery float64
	holdS     float64
	// switched on a range change with the output on
	switchedLive int
	switches     []int

	// voltmeter
	apertureS float64
	overheadS float64
	noiseRel  float64
	rng       uint64
	reads     int
	failReads map[int]error // read number → error (before taking it)
	hook      func(c *chain, what string)
}

func newChain(clock *fakeClock) *chain {
	c := &chain{
		clock: clock, t0: clock.Now(),
		lowHz: 20, highHz: 20000, gain: 1,
		limits:    driver.GeneratorLimits{MinFreqHz: 0.1, MaxFreqHz: 1e7, MinVrms: 1e-3, MaxVrms: 1},
		window:    driver.Window{DCFullScaleV: 1, UnderFraction: 0.3, OverFraction: 1.05, MaxFreqHz: 1e7},
		apertureS: 0.02, overheadS: 0.001, rng: 12345,
	}
	// Ranges 10 dB apart; the slow time constant on every range so
	// that the settle model matters.
	for i, fs := range []float64{0.01, 0.031623, 0.1, 0.31623, 1} {
		c.ranges = append(c.ranges, driver.Range{Name: fmt.Sprintf("r%d", i), FullScaleVrms: fs, TimeConstantS: 0.2})
	}
	c.rangeIdx = 2
	return c
}

func (c *chain) now() float64 { return c.clock.Now().Sub(c.t0).Seconds() }

func (c *chain) dutGain(f float64) float64 {
	s := complex(0, f)
	h := complex(c.gain, 0) * (s / (s + complex(c.lowHz, 0))) * (1 / (1 + s/complex(c.highHz, 0)))
	return cmplx.Abs(h)
}

// segment is the converter's state in force from avg.T on, on a range of
// time constant tau: the scheduler's own model type, whose closed form
// sweep/settle tests against the ODE.
type segment struct {
	avg settle.Averager
	tau float64
}

// stateAt returns the converter's mean square at t (no lock), from the
// segment in force at t (so that a hold can show a past value).
func (c *chain) stateAt(t float64) float64 {
	sg := segment{c.avg, c.ranges[c.rangeIdx].TimeConstantS}
	for i := len(c.hist) - 1; i >= 0 && t < sg.avg.T; i-- {
		sg = c.hist[i]
	}
	return sg.avg.At(t, sg.tau)
}

// mark saves the segment in force before a change at t (no lock) and
// returns the state at t.
func (c *chain) mark(t float64) float64 {
	y := c.stateAt(t)
	c.hist = append(c.hist, segment{c.avg, c.ranges[c.rangeIdx].TimeConstantS})
	if len(c.hist) > 64 {
		c.hist = c.hist[len(c.hist)-64:]
	}
	return y
}

// input re-targets the converter after a change (no lock).
func (c *chain) input() {
	t := c.now()
	u := 0.0
	if c.output {
		v := c.ampVrms * c.dutGain(c.freqHz)
		u = v * v
	}
	c.avg = settle.Averager{T: t, Y: c.mark(t), U: u}
}

func (c *chain) SetFrequency(ctx context.Context, f float64) error {
	c.mu.Lock()
	defer c.mu.Unlock()
	if f < c.limits.MinFreqHz || f > c.limits.MaxFreqHz {
		return driver.ErrOutOfRange
	}
	c.freqHz = f
	c.input()
	c.fire("freq")
	return nil
}

func (c *chain) SetAmplitude(ctx context.Context, v float64) error {
	c.mu.Lock()
	defer c.mu.Unlock()
	if v < c.limits.MinVrms || v > c.limits.MaxVrms {
		return driver.ErrOutOfRange
	}
	c.ampVrms, c.ampSet = v, true
	if c.output {
		c.maxOnVrms = math.Max(c.maxOnVrms, v)
	}
	c.input()
	return nil
}

func (c *chain) SetOutput(ctx context.Context, on bool) error {
	c.mu.Lock()
	defer c.mu.Unlock()
	if on && !c.ampSet {
		c.onBeforeAmp = true
	}
	c.output = on
	c.outputLog = append(c.outputLog, on)
	if on {
		c.maxOnVrms = math.Max(c.maxOnVrms, c.ampVrms)
	}
	c.input()
	return nil
}

func (c *chain) Limits() driver.GeneratorLimits { return c.limits }

func (c *chain) Halt() error {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.output = false
	c.outputLog = append(c.outputLog, false)
	c.input()
	return nil
}

func (c *chain) fire(what string) {
	if h := c.hook; h != nil {
		c.mu.Unlock()
		h(c, what)
		c.mu.Lock()
	}
}

// converter role

func (c *chain) Ranges() []driver.Range { return c.ranges }
func (c *chain) Window() driver.Window  { return c.window }

func (c *chain) Scale(i int, dc float64) (driver.ConverterReading, error) {
	if i < 0 || i >= len(c.ranges) {
		return driver.ConverterReading{}, driver.ErrOutOfRange
	}
	f := dc / c.window.DCFullScaleV
	st := driver.InSpec
	switch {
	case f < c.window.UnderFraction:
		st = driver.UnderRange
	case f > c.window.OverFraction:
		st = driver.OverRange
	}
	return driver.ConverterReading{Vrms: f * c.ranges[i].FullScaleVrms, FractionFS: f, Status: st}, nil
}

// selectRange is the operator's hand (or the remote switch).
func (c *chain) selectRange(i int) {
	c.mu.Lock()
	defer c.mu.Unlock()
	t := c.now()
	c.avg = settle.Averager{T: t, Y: c.mark(t), U: c.avg.U}
	c.rangeIdx = i
	if c.output {
		c.switchedLive++
	}
	c.switches = append(c.switches, i)
}

// remoteChain adds the RangeSwitcher capability.
type remoteChain struct{ *chain }

func (c remoteChain) SwitchRange(ctx context.Context, i int) error {
	if i < 0 || i >= len(c.ranges) {
		return driver.ErrOutOfRange
	}
	c.selectRange(i)
	return nil
}

var _ driver.RangeSwitcher = remoteChain{}
var _ driver.Converter = (*chain)(nil)
var _ driver.Generator = (*chain)(nil)
var _ driver.DCVoltmeter = (*chain)(nil)

// voltmeter role

func (c *chain) ConfigureDC(ctx context.Context, cfg driver.DCConfig) error {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.apertureS = cfg.Aperture.Duration(50)
	return nil
}

func (c *chain) gauss() float64 {
	// xorshift64* and Box–Muller: deterministic noise.
	next := func() float64 {
		c.rng ^= c.rng >> 12
		c.rng ^= c.rng << 25
		c.rng ^= c.rng >> 27
		return float64((c.rng*2685821657736338717)>>11) / (1 << 53)
	}
	u1, u2 := next(), next()
	return math.Sqrt(-2*math.Log(u1+1e-300)) * math.Cos(2*math.Pi*u2)
}

func (c *chain) ReadDC(ctx context.Context) (float64, error) {
	c.mu.Lock()
	c.reads++
	n := c.reads
	err := c.failReads[n]
	c.mu.Unlock()
	c.fireLocked("read")
	if err != nil {
		c.clock.advance(5 * time.Millisecond)
		return 0, err
	}
	c.mu.Lock()
	defer c.mu.Unlock()
	dur := c.apertureS + c.overheadS
	c.clock.advance(time.Duration(dur * float64(time.Second)))
	t := c.now() - dur/2
	if c.holdEvery > 0 {
		k := math.Floor(t / c.holdEvery)
		if t-k*c.holdEvery < c.holdS {
			t = k * c.holdEvery // frozen at the hold's start
		}
	}
	y := c.stateAt(t)
	v := math.Sqrt(math.Max(0, y)) * (1 + c.noiseRel*c.gauss())
	dc := v / c.ranges[c.rangeIdx].FullScaleVrms * c.window.DCFullScaleV
	if dc > 1.2 {
		return 0, fmt.Errorf("fake voltmeter: %w", driver.ErrOverload)
	}
	return dc, nil
}

func (c *chain) fireLocked(what string) {
	if h := c.hook; h != nil {
		h(c, what)
	}
}

func (c *chain) isOn() bool {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.output
}

// memRecorder is an in-memory run store.
type memRecorder struct {
	mu     sync.Mutex
	points []point.Point
	events []event.Event
	states []event.State
}

func (m *memRecorder) AppendPoint(p point.Point) error {
	m.mu.Lock()
	defer m.mu.Unlock()
	for _, q := range m.points {
		if q.Seq == p.Seq {
			return fmt.Errorf("duplicate seq %d", p.Seq)
		}
	}
	m.points = append(m.points, p)
	return nil
}

func (m *memRecorder) AppendEvent(e event.Event) error {
	m.mu.Lock()
	defer m.mu.Unlock()
	m.events = append(m.events, e)
	if e.Type == event.TypeState {
		m.states = append(m.states, e.State)
	}
	return nil
}

func (m *memRecorder) Points() ([]point.Point, error) {
	m.mu.Lock()
	defer m.mu.Unlock()
	return append([]point.Point(nil), m.points...), nil
}

func (m *memRecorder) pointCount() int {
	m.mu.Lock()
	defer m.mu.Unlock()
	return len(m.points)
}

// testPlan is a small log plan.
func testPlan(strategy string) *plan.Plan {
	p := &plan.Plan{
		Name:        "test",
		Frequencies: plan.Frequencies{Spacing: plan.SpacingLog, StartHz: 2, StopHz: 200000, PointsPerDecade: 4},
		Level:       plan.Level{Vrms: 0.05},
		Settle:      plan.Settle{Tolerance: 1e-3, Readings: 3, TimeoutS: 30},
		Ranging:     plan.Ranging{Strategy: strategy},
		ReferenceHz: 1000,
	}
	p.Defaults()
	// The decisions these tests pin are the sweep's; the drift check's
	// own point has its own tests (drift_test.go).
	p.Drift.End = plan.DriftOff
	return p
}

func instruments(c *chain) Instruments {
	return Instruments{
		Generator: c, DCVoltmeter: c, Converter: c,
		TimeScale: 1, Limits: c.limits, Log: zerolog.Nop(),
	}
}

func runOn(t *testing.T, inst Instruments, p *plan.Plan, rec recorder, opts Opts) (*Run, error) {
	t.Helper()
	opts.NoAnalysis = true
	r := start(context.Background(), inst, p, rec, "t", opts)
	select {
	case <-r.Done():
	case <-time.After(20 * time.Second):
		r.Abort()
		t.Fatal("run did not end")
	}
	return r, r.Wait()
}
