package sim

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"sync"
	"time"

	"rolloff/driver"
	"rolloff/driver/sim/model"
)

// Instrument roles served by a Bench.
const (
	RoleGenerator = "generator"
	RoleVoltmeter = "voltmeter"
	RoleSwitch    = "switch"
	RoleDMM       = "dmm"
)

// Roles lists the roles in a fixed order.
var Roles = []string{RoleGenerator, RoleVoltmeter, RoleSwitch, RoleDMM}

// Errors of the bench.
var (
	// ErrUnknownRole is returned for a role not in Roles.
	ErrUnknownRole = errors.New("sim: unknown role")
	// ErrClosed is returned after Close.
	ErrClosed = fmt.Errorf("sim: bench closed: %w", driver.ErrClosed)
	// ErrRange is returned by SelectRange for an index out of range.
	ErrRange = fmt.Errorf("sim: no such converter range: %w", driver.ErrOutOfRange)
)

// Noise stream identifiers: one PCG stream per instrument, so that the
// timing of one instrument's readings does not change another's noise.
const (
	streamConverter = iota + 1
	streamVoltmeter
	streamDMM
)

// Bench is a simulated bench: a generator, the DUT, the true-RMS
// converter, its DC voltmeter, an AC DMM and the range switch, each
// instrument answering SCPI on loopback TCP (and, on request, on a
// pseudo-terminal), coupled through the physical model in model time
// (wall time since New × TimeScale).
type Bench struct {
	cfg   Config
	scale float64
	start time.Time

	ctx    context.Context // cancelled by Close: aborts measurements
	cancel context.CancelFunc

	mu        sync.Mutex // guards everything below
	dut       model.DUT
	conv      *model.Converter
	dmm       *model.Averager
	gen       genState
	sig       model.Signal // at the DUT input
	sigTS     float64      // model time the signal started
	peakVrms  float64      // largest DUT input since New or ResetPeak
	overUntil time.Time    // converter overload fault
	rngConv   *rand.Rand
	rngVM     *rand.Rand
	rngDMM    *rand.Rand
	sys       SystematicErrors // drawn at New, kept for life
	drift     *drift           // converter gain drift, nil: none
	started   bool
	closed    bool
	// The opc-mute personality: the frequency the mute last followed
	// and the wall time the output comes back.
	muteFreqHz float64
	muteUntil  time.Time

	insts map[string]*instrument
	wg    sync.WaitGroup
}

// New validates cfg and builds a bench at rest: generator reset (output
// off), converter on cfg.Converter.InitialRange. Model time starts now.
func New(cfg Config) (*Bench, error) {
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	cfg = cloneConfig(cfg)
	b := &Bench{cfg: cfg, scale: cfg.TimeScale, start: time.Now()}
	b.ctx, b.cancel = context.WithCancel(context.Background())
	b.dut = model.DUT{GainDB: cfg.DUT.GainDB, ClipV: cfg.DUT.ClipV, NoiseVrms: cfg.DUT.NoiseVrms}
	for _, s := range cfg.DUT.Sections {
		b.dut.Sections = append(b.dut.Sections, model.Section{Kind: s.Kind, FreqHz: s.FreqHz, Q: s.Q, Order: s.Order})
	}
	cp := model.ConverterParams{
		DCFullScaleV:     cfg.Converter.DCFullScaleV,
		SaturateFraction: cfg.Converter.SaturateFraction,
		FloorFraction:    cfg.Converter.FloorFraction,
		Hold:             model.Hold{IntervalS: cfg.Converter.HoldIntervalS, DurationS: cfg.Converter.HoldS},
		PostFilterS:      cfg.Converter.PostFilterS,
	}
	for _, r := range cfg.Converter.Ranges {
		cp.Ranges = append(cp.Ranges, model.Range{FullScaleVrms: r.FullScaleVrms, TauS: r.TimeConstantS})
	}
	b.sys = drawSystematic(&cfg)
	b.sys.converterParams(&cp)
	b.drift = newDrift(&cfg)
	b.conv = model.NewConverter(cp, 0, cfg.Converter.InitialRange)
	b.dmm = model.NewAverager(0, cfg.DMM.TimeConstantS, 0)
	b.rngConv = rand.New(rand.NewPCG(cfg.Seed, streamConverter))
	b.rngVM = rand.New(rand.NewPCG(cfg.Seed, streamVoltmeter))
	b.rngDMM = rand.New(rand.NewPCG(cfg.Seed, streamDMM))
	b.gen = resetGen(&cfg.Generator)
	b.muteFreqHz = b.gen.freqHz
	b.applyLocked(0)

	b.insts = map[string]*instrument{
		RoleGenerator: newInstrument(b, RoleGenerator, cfg.Generator.IDN, b.generatorCommands),
		RoleVoltmeter: newInstrument(b, RoleVoltmeter, cfg.Voltmeter.IDN, b.voltmeterCommands),
		RoleSwitch:    newInstrument(b, RoleSwitch, cfg.Switch.IDN, b.switchCommands),
		RoleDMM:       newInstrument(b, RoleDMM, cfg.DMM.IDN, b.dmmCommands),
	}
	return b, nil
}

func cloneConfig(c Config) Config {
	c.DUT.Sections = append([]Section(nil), c.DUT.Sections...)
	c.Converter.Ranges = append([]Range(nil), c.Converter.Ranges...)
	c.Voltmeter.RangesV = append([]float64(nil), c.Voltmeter.RangesV...)
	c.DMM.RangesVrms = append([]float64(nil), c.DMM.RangesVrms...)
	c.Spec = c.Spec.clone()
	c.DMM.Filters = append([]DMMFilter(nil), c.DMM.Filters...)
	return c
}

// Start opens a TCP listener on 127.0.0.1 (a free port) for every role
// and serves until Close. ctx bounds the start only.
func (b *Bench) Start(ctx context.Context) error {
	b.mu.Lock()
	if b.closed {
		b.mu.Unlock()
		return ErrClosed
	}
	if b.started {
		b.mu.Unlock()
		return errors.New("sim: bench already started")
	}
	b.started = true
	b.mu.Unlock()
	for _, role := range Roles {
		if err := ctx.Err(); err != nil {
			b.Close()
			return fmt.Errorf("sim: start: %w", err)
		}
		if err := b.insts[role].listen(ctx); err != nil {
			b.Close()
			return fmt.Errorf("sim: start %s: %w", role, err)
		}
	}
	return nil
}

// Addr returns the role's address as "tcp://127.0.0.1:PORT", or "" for an
// unknown role or before Start.
func (b *Bench) Addr(role string) string {
	in := b.insts[role]
	if in == nil {
		return ""
	}
	in.lnMu.Lock()
	defer in.lnMu.Unlock()
	if in.addr == "" {
		return ""
	}
	return "tcp://" + in.addr
}

// ServeSerial serves the role's instrument on a new pseudo-terminal and
// returns the path of its slave side, which a client opens as a serial
// port. The terminal is in raw mode; messages end with "\n" ("\r\n" is
// accepted).
func (b *Bench) ServeSerial(role string) (string, error) {
	in := b.insts[role]
	if in == nil {
		return "", fmt.Errorf("%w %q", ErrUnknownRole, role)
	}
	b.mu.Lock()
	closed := b.closed
	b.mu.Unlock()
	if closed {
		return "", ErrClosed
	}
	return in.servePTY()
}

// Close stops every server, closes every connection and pseudo-terminal
// and aborts measurements in progress. It is idempotent.
func (b *Bench) Close() error {
	b.mu.Lock()
	if b.closed {
		b.mu.Unlock()
		return nil
	}
	b.closed = true
	b.mu.Unlock()
	b.cancel()
	for _, role := range Roles {
		b.insts[role].shutdown()
	}
	b.wg.Wait()
	return nil
}

// Config returns a copy of the bench's configuration.
func (b *Bench) Config() Config { return cloneConfig(b.cfg) }

// TimeScale returns model seconds per wall second.
func (b *Bench) TimeScale() float64 { return b.scale }

// LineHz returns the power-line frequency of NPLC apertures.
func (b *Bench) LineHz() float64 { return b.cfg.LineHz }

// Ranges returns the converter ranges in the driver contract's form.
func (b *Bench) Ranges() []driver.Range {
	out := make([]driver.Range, len(b.cfg.Converter.Ranges))
	for i, r := range b.cfg.Converter.Ranges {
		out[i] = r.Driver()
	}
	return out
}

// now returns the model time.
func (b *Bench) now() float64 {
	return time.Since(b.start).Seconds() * b.scale
}

// ModelTime returns the current model time, seconds since New.
func (b *Bench) ModelTime() float64 { return b.now() }

// wallAt returns the wall time at which the model reaches t.
func (b *Bench) wallAt(t float64) time.Time {
	return b.start.Add(time.Duration(t / b.scale * float64(time.Second)))
}

// sleepUntil waits until the model reaches t, or ctx or the bench ends.
func (b *Bench) sleepUntil(ctx context.Context, t float64) error {
	d := time.Until(b.wallAt(t))
	if d <= 0 {
		return nil
	}
	timer := time.NewTimer(d)
	defer timer.Stop()
	select {
	case <-timer.C:
		return nil
	case <-ctx.Done():
		return ctx.Err()
	case <-b.ctx.Done():
		return ErrClosed
	}
}

// applyLocked pushes the generator state into the model at model time t.
func (b *Bench) applyLocked(t float64) {
	sig := model.Signal{Shape: b.gen.shape, FreqHz: b.gen.freqHz}
	muted := b.muteOnFreqChangeLocked()
	if b.gen.on && !muted {
		sig.Vrms = b.gen.dutVrms(b.cfg.Generator.SourceOhm, b.cfg.DUT.InputOhm) * b.sys.GeneratorGain(b.gen.freqHz)
	}
	b.notePeakLocked()
	if sig != b.sig {
		b.sig = sig
		b.sigTS = t
	}
	h := b.cfg.Generator.Harmonics
	b.conv.SetInput(t, model.Analyze(sig, &b.dut, b.cfg.Converter.DroopHz, h), b.sigTS)
	ms := model.Analyze(sig, &b.dut, b.cfg.DMM.BandwidthHz, h)
	ms.C0 += b.cfg.DMM.FloorVrms * b.cfg.DMM.FloorVrms
	b.dmm.Set(t, ms, b.sigTS, b.cfg.DMM.tauAt(sig.FreqHz), 0)
}

// OutputOn reports whether the generator output is on.
func (b *Bench) OutputOn() bool {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.gen.on
}

// FreqHz returns the generator frequency.
func (b *Bench) FreqHz() float64 {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.gen.freqHz
}

// AmplitudeVrms returns the generator's amplitude setting in Vrms (into
// the load it is set for), whether or not the output is on.
func (b *Bench) AmplitudeVrms() float64 {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.gen.vrms
}

// DUTInputVrms returns the RMS voltage actually at the DUT input: 0 with
// the output off, and otherwise the setting corrected for the generator's
// source impedance, its load setting and the DUT's input impedance.
func (b *Bench) DUTInputVrms() float64 {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.sig.Vrms
}

// ConverterRange returns the selected converter range index (-1: none).
func (b *Bench) ConverterRange() int {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.conv.Range()
}

// SelectRange is the operator's hand on the converter's range switch:
// it selects range i (0-based; -1 opens every relay). The mean-square
// state carries over, so the DC output rescales at once.
func (b *Bench) SelectRange(i int) error {
	b.mu.Lock()
	defer b.mu.Unlock()
	if i < -1 || i >= b.conv.Ranges() {
		return fmt.Errorf("%w: %d not in -1..%d", ErrRange, i, b.conv.Ranges()-1)
	}
	b.conv.SelectRange(b.now(), i)
	return nil
}

// Overloaded reports whether the converter is over range now (its output
// saturated) or an overload fault is active.
func (b *Bench) Overloaded() bool {
	b.mu.Lock()
	defer b.mu.Unlock()
	return time.Now().Before(b.overUntil) || b.conv.Saturated(b.now())
}

// DCOutputV returns the converter's noise-free DC output now.
func (b *Bench) DCOutputV() float64 {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.dcOutputLocked(b.now())
}

func (b *Bench) dcOutputLocked(t float64) float64 {
	if time.Now().Before(b.overUntil) {
		return b.cfg.Converter.SaturateFraction * b.cfg.Converter.DCFullScaleV
	}
	return b.conv.DCOutput(t) * b.drift.factor(t)
}

// DUTGainDB returns the DUT's small-signal gain at freqHz, dB.
func (b *Bench) DUTGainDB(freqHz float64) float64 {
	return b.dut.GainDBAt(freqHz)
}

// DUTCorners returns the frequencies below and above 1 kHz where the
// DUT's gain crosses its 1 kHz gain + levelDB (levelDB -3: the -3 dB
// corners), by root finding on the model; NaN where there is none.
func (b *Bench) DUTCorners(levelDB float64) (lowHz, highHz float64) {
	return b.dut.Corners(1000, levelDB)
}

// DUTOutputVrms returns the true RMS of the DUT output for the present
// signal, noise included (the settled value an ideal meter would read).
func (b *Bench) DUTOutputVrms() float64 {
	b.mu.Lock()
	defer b.mu.Unlock()
	return math.Sqrt(model.Analyze(b.sig, &b.dut, 0, b.cfg.Generator.Harmonics).C0)
}

// Faults returns the fault hooks of a role, nil for an unknown role.
func (b *Bench) Faults(role string) *Faults {
	in := b.insts[role]
	if in == nil {
		return nil
	}
	return in.faults
}

// Received returns every program message unit the role's instrument has
// received, in order, over all its connections.
func (b *Bench) Received(role string) []string {
	in := b.insts[role]
	if in == nil {
		return nil
	}
	in.recMu.Lock()
	defer in.recMu.Unlock()
	return append([]string(nil), in.received...)
}

// noise returns a normal deviate of standard deviation sigma from r.
func noise(r *rand.Rand, sigma float64) float64 {
	if sigma <= 0 {
		return 0
	}
	return sigma * r.NormFloat64()
}
