package instr

import (
	"context"
	"fmt"
	"math"
	"strings"
	"time"

	"rolloff/driver"
	"rolloff/driver/profile"
	"rolloff/driver/scpi"
)

// HaltTimeout bounds a Halt: waiting for the role and switching the
// output off.
const HaltTimeout = 2 * time.Second

// Generator is a SCPI function generator driven from a profile. It takes
// amplitudes in Vrms at the DUT input and converts them to the
// instrument's unit and load setting.
type Generator struct {
	link
	mu  lock
	p   *profile.Generator
	lim driver.GeneratorLimits

	// The last settings sent (guarded by mu), as the instrument
	// received them (rounded to the profile's digits), for templates that
	// carry several parameters: ampSet is false until the first
	// amplitude. sentVrms is the amplitude at the DUT they give.
	freqHz, amplitude float64
	freqSet, ampSet   bool
	sentVrms          float64
}

var (
	_ driver.Generator  = (*Generator)(nil)
	_ driver.Identifier = (*Generator)(nil)
	_ driver.Halter     = (*Generator)(nil)
)

// NewGenerator returns the generator role for an instrument reached by
// sess. Its limits are the tighter of the instrument's (from p) and the
// bench's; a zero MaxFreqHz or MaxVrms in bench means no bench limit on
// it. Nothing is sent.
func NewGenerator(sess *scpi.Session, p *profile.Generator, bench driver.GeneratorLimits) (*Generator, error) {
	if sess == nil || p == nil {
		return nil, fmt.Errorf("instr: NewGenerator: nil session or profile")
	}
	lim, err := GeneratorLimitsFor(p, bench)
	if err != nil {
		return nil, err
	}
	return &Generator{
		link: link{role: "generator", sess: sess, checkErrors: p.Commands.CheckErrors, dialect: p.Dialect},
		mu:   newLock(),
		p:    p,
		lim:  lim,
	}, nil
}

// Limits returns the settings this generator accepts.
func (g *Generator) Limits() driver.GeneratorLimits { return g.lim }

// Profile returns the generator's profile.
func (g *Generator) Profile() *profile.Generator { return g.p }

// Setup sends the profile's init commands, selects a sine and sets the
// amplitude unit and load. It does not touch the output.
func (g *Generator) Setup(ctx context.Context) error {
	if err := g.mu.acquire(ctx); err != nil {
		return fmt.Errorf("generator: %w", err)
	}
	defer g.mu.release()
	t := &g.p.T
	if err := g.sendAll(ctx, t.Init); err != nil {
		return err
	}
	if err := g.sendGen(ctx, t.FunctionSine); err != nil {
		return err
	}
	if t.SetUnit != nil {
		if err := g.sendGen(ctx, t.SetUnit, scpi.Word("unit", g.p.Output.UnitWord())); err != nil {
			return err
		}
	}
	if t.SetLoad != nil {
		arg := scpi.Word("load", "INFinity")
		if r := g.p.Output.LoadOhms(); !math.IsInf(r, 1) {
			arg, _ = g.num("load", r)
		}
		if err := g.sendGen(ctx, t.SetLoad, arg); err != nil {
			return err
		}
	}
	if t.SetOffset != nil {
		if err := g.sendGen(ctx, t.SetOffset); err != nil {
			return err
		}
	}
	return g.afterSettings(ctx)
}

// genArgs returns the generator parameters s carries, from the settings
// last sent: the frequency (before the first, 1 kHz within the limits),
// the amplitude (before the first, the smallest the limits allow) and
// the offset, each rounded as the profile sends numbers.
func (g *Generator) genArgs(s *scpi.Seq, freqHz, amplitude float64) []scpi.Arg {
	var out []scpi.Arg
	for _, n := range s.Placeholders() {
		var a scpi.Arg
		switch n {
		case "freq_hz":
			a, _ = g.num(n, freqHz)
		case "amplitude":
			a, _ = g.num(n, amplitude)
		case "offset_v":
			// Toward zero: the offset counts against the amplitude
			// limit, and rounding must not add to it.
			a, _ = g.num(n, g.dialect.NumberFormat().TowardZero(g.p.Output.OffsetV))
		default:
			continue
		}
		out = append(out, a)
	}
	return out
}

// defaults returns the frequency and amplitude to fill a command with
// before they have been set; ok is false when a command carries
// {amplitude} and there is no lowest level to send.
func (g *Generator) defaults(s *scpi.Seq) (freqHz, amplitude float64, err error) {
	return g.defaultsFor(s, s.Has("amplitude"))
}

// defaultsFor is defaults; needAmp says whether the amplitude last sent
// is needed (false when the caller supplies it).
func (g *Generator) defaultsFor(s *scpi.Seq, needAmp bool) (freqHz, amplitude float64, err error) {
	freqHz, amplitude = g.freqHz, g.amplitude
	if !g.freqSet {
		freqHz = math.Max(g.lim.MinFreqHz, math.Min(1000, g.lim.MaxFreqHz))
	}
	if !g.ampSet && needAmp {
		var ok bool
		if amplitude, ok = g.lowestAmplitude(); !ok {
			return 0, 0, fmt.Errorf("generator: %s carries {amplitude}: set the amplitude first (the profile gives no lowest level in %s): %w",
				s.Key(), g.p.Output.Unit, driver.ErrOutOfRange)
		}
	}
	return freqHz, amplitude, nil
}

// sendGen sends s with extra arguments and whichever generator
// parameters it carries, from the settings last sent.
func (g *Generator) sendGen(ctx context.Context, s *scpi.Seq, extra ...scpi.Arg) error {
	f, a, err := g.defaults(s)
	if err != nil {
		return err
	}
	return g.send(ctx, s, append(extra, g.genArgs(s, f, a)...)...)
}

// lowestAmplitude is the amplitude sent before the first SetAmplitude by
// a command that carries {amplitude}: the smallest level the limits
// allow, in the instrument's unit. ok is false when there is no such
// level (dBm with no lower limit): the caller must then refuse.
func (g *Generator) lowestAmplitude() (a float64, ok bool) {
	a = g.InstrumentAmplitude(g.lim.MinVrms)
	if !math.IsNaN(a) && !math.IsInf(a, 0) {
		return g.dialect.NumberFormat().Ceil(a), true
	}
	if m := g.p.Limits.MinAmplitude; m != nil {
		return *m, true
	}
	return 0, false
}

// SetFrequency sets the sine frequency in hertz. The instrument receives
// it rounded to the profile's digits: SentFrequencyHz returns that value.
func (g *Generator) SetFrequency(ctx context.Context, freqHz float64) error {
	if !(freqHz >= g.lim.MinFreqHz && freqHz <= g.lim.MaxFreqHz) {
		return outOfRange("generator", "frequency (Hz)", freqHz, fmt.Sprintf("%g to %g Hz", g.lim.MinFreqHz, g.lim.MaxFreqHz))
	}
	if err := g.mu.acquire(ctx); err != nil {
		return fmt.Errorf("generator: %w", err)
	}
	defer g.mu.release()
	t := g.p.T.SetFrequency
	_, amp, err := g.defaults(t)
	if err != nil {
		return err
	}
	_, sent := g.num("freq_hz", freqHz)
	if err := g.send(ctx, t, g.genArgs(t, freqHz, amp)...); err != nil {
		return err
	}
	g.freqHz, g.freqSet = sent, true
	if t.Has("amplitude") {
		g.noteAmplitude(amp)
	}
	if err := g.afterSettings(ctx); err != nil {
		return err
	}
	return g.readBack(ctx, true, t.Has("amplitude"), sent, g.round(amp))
}

// SetAmplitude sets the amplitude, Vrms at the DUT input. The instrument
// receives it in its unit rounded to the profile's digits:
// SentAmplitudeVrms returns the Vrms at the DUT that gives.
func (g *Generator) SetAmplitude(ctx context.Context, vrms float64) error {
	if !(vrms >= g.lim.MinVrms && vrms <= g.lim.MaxVrms) {
		return outOfRange("generator", "amplitude (Vrms at the DUT)", vrms, fmt.Sprintf("%g to %g Vrms", g.lim.MinVrms, g.lim.MaxVrms))
	}
	a := g.InstrumentAmplitude(vrms)
	if math.IsNaN(a) || math.IsInf(a, 0) {
		return outOfRange("generator", "amplitude (Vrms at the DUT)", vrms, fmt.Sprintf("a level the unit %s can express", g.p.Output.Unit))
	}
	if err := g.mu.acquire(ctx); err != nil {
		return fmt.Errorf("generator: %w", err)
	}
	defer g.mu.release()
	t := g.p.T.SetAmplitude
	f, _, err := g.defaultsFor(t, false)
	if err != nil {
		return err
	}
	a = g.sentLevel(a)
	if err := g.send(ctx, t, g.genArgs(t, f, a)...); err != nil {
		return err
	}
	g.noteAmplitude(a)
	if t.Has("freq_hz") {
		g.freqHz, g.freqSet = g.round(f), true
	}
	if err := g.afterSettings(ctx); err != nil {
		return err
	}
	return g.readBack(ctx, t.Has("freq_hz"), true, g.round(f), g.round(a))
}

// sentLevel is the amplitude a (instrument unit) as sent: rounded to the
// profile's digits toward the lower level, so that a level at the
// limit never goes over it by a digit; toward the higher one only where
// the lower would fall under the smallest level allowed.
func (g *Generator) sentLevel(a float64) float64 {
	nf := g.dialect.NumberFormat()
	s := nf.Floor(a)
	if g.p.Output.DUTVrms(g.p.Output.FromUnit(s)) < g.lim.MinVrms*(1-1e-9) {
		s = nf.Ceil(a)
	}
	return s
}

// round is the value the instrument receives for v.
func (g *Generator) round(v float64) float64 { return g.dialect.NumberFormat().Round(v) }

// noteAmplitude records amplitude a (instrument unit, before rounding)
// as sent.
func (g *Generator) noteAmplitude(a float64) {
	g.amplitude, g.ampSet = g.round(a), true
	g.sentVrms = g.p.Output.DUTVrms(g.p.Output.FromUnit(g.amplitude))
}

// SentFrequencyHz returns the frequency the instrument last received
// (rounded to the profile's digits), 0 before the first.
func (g *Generator) SentFrequencyHz() float64 {
	if err := g.mu.acquire(context.Background()); err != nil {
		return 0
	}
	defer g.mu.release()
	if !g.freqSet {
		return 0
	}
	return g.freqHz
}

// SentAmplitudeVrms returns the amplitude at the DUT, Vrms, that the
// value the instrument last received gives (the requested amplitude
// rounded as sent), 0 before the first.
func (g *Generator) SentAmplitudeVrms() float64 {
	if err := g.mu.acquire(context.Background()); err != nil {
		return 0
	}
	defer g.mu.release()
	if !g.ampSet {
		return 0
	}
	return g.sentVrms
}

// InstrumentAmplitude returns the value the amplitude command is given for
// vrms at the DUT input: converted for the load setting and the DUT's
// load, then to the profile's unit.
func (g *Generator) InstrumentAmplitude(vrms float64) float64 {
	return g.p.Output.ToUnit(g.p.Output.ShownVrms(vrms))
}

// SetOutput switches the output on or off.
func (g *Generator) SetOutput(ctx context.Context, on bool) error {
	if err := g.mu.acquire(ctx); err != nil {
		return fmt.Errorf("generator: %w", err)
	}
	defer g.mu.release()
	s := g.p.T.OutputOff
	if on {
		s = g.p.T.OutputOn
	}
	if err := g.sendGen(ctx, s); err != nil {
		return err
	}
	return g.afterSettings(ctx)
}

// Halt switches the output off and confirms it: with the profile's
// operation-complete query (*OPC?, IEEE 488.2 §10.19) where it has one,
// else by reading the output state back (commands.query_output), else
// by waiting dialect.delay_after_settings_s (at least 100 ms). It uses
// its own time-out (HaltTimeout), so it works after the caller's
// context is cancelled.
//
// Halt does not wait for a configuration sequence in progress on another
// goroutine: it goes in between two of its commands (the session
// serialises messages), so the output goes off as soon as the link is
// free.
func (g *Generator) Halt() error {
	ctx, cancel := context.WithTimeout(context.Background(), HaltTimeout)
	defer cancel()
	s := g.p.T.OutputOff
	var args []scpi.Arg
	if len(s.Placeholders()) > 0 {
		// An output-off command carrying the generator's parameters
		// (rare): the settings last sent, read without the role's lock
		// so that a halt never waits for a setting in progress.
		f, a := g.freqHz, g.amplitude
		if !g.freqSet {
			f = math.Max(g.lim.MinFreqHz, math.Min(1000, g.lim.MaxFreqHz))
		}
		if !g.ampSet {
			a, _ = g.lowestAmplitude()
		}
		args = g.genArgs(s, f, a)
	}
	cmds, err := s.Format(args...)
	if err != nil {
		return fmt.Errorf("generator: halt: %w", err)
	}
	for _, cmd := range cmds {
		if err := g.sess.Write(ctx, cmd); err != nil {
			return fmt.Errorf("generator: halt: %w", err)
		}
	}
	sent := strings.Join(cmds, " then ")
	switch {
	case g.sess.HasOPCQuery():
		if err := g.sess.OperationComplete(ctx); err != nil {
			return fmt.Errorf("generator: halt: %s sent, not confirmed: %w", sent, err)
		}
	case g.p.T.QueryOutput != nil:
		resp, _, err := g.query(ctx, g.p.T.QueryOutput)
		if err != nil {
			return fmt.Errorf("generator: halt: %s sent, output state not read back: %w", sent, err)
		}
		if on, ok := outputState(resp); !ok || on {
			return fmt.Errorf("generator: halt: %s sent, but %s answers %q, not off: %w", sent, g.p.T.QueryOutput.Key(), resp, driver.ErrInstrument)
		}
	default:
		d := g.dialect.DelayAfterSettings()
		if d < minHaltDelay {
			d = minHaltDelay
		}
		if err := sleep(ctx, d); err != nil {
			return fmt.Errorf("generator: halt: %s sent, waiting: %w", sent, err)
		}
	}
	return nil
}

// minHaltDelay is the least wait that confirms a halt on an instrument
// that can neither report completion nor its output state.
const minHaltDelay = 100 * time.Millisecond

// outputState reads an output-state answer: 1/ON or 0/OFF (SCPI-1999
// boolean response, NR1).
func outputState(resp string) (on, ok bool) {
	switch strings.ToUpper(strings.TrimSpace(resp)) {
	case "1", "ON", "+1":
		return true, true
	case "0", "OFF", "+0":
		return false, true
	}
	return false, false
}

// GeneratorLimitsFor returns the settings a generator of profile p
// accepts on a bench with limits bench (see NewGenerator): the tighter of
// the two, the amplitude cap lowered for the profile's DC offset. It
// sends nothing, so a plan can be checked against them before any
// instrument is opened.
func GeneratorLimitsFor(p *profile.Generator, bench driver.GeneratorLimits) (driver.GeneratorLimits, error) {
	lim := driver.GeneratorLimits{
		MinFreqHz: math.Max(p.Limits.MinFreqHz, bench.MinFreqHz),
		MaxFreqHz: p.Limits.MaxFreqHz,
		MinVrms:   math.Max(p.MinVrms(), bench.MinVrms),
		MaxVrms:   p.MaxVrms(),
	}
	if bench.MaxFreqHz > 0 {
		lim.MaxFreqHz = math.Min(lim.MaxFreqHz, bench.MaxFreqHz)
	}
	if bench.MaxVrms > 0 {
		lim.MaxVrms = math.Min(lim.MaxVrms, bench.MaxVrms)
	}
	if off := math.Abs(p.Output.DUTOffsetV()); off > 0 {
		// The DC offset adds in power: Vrms at the DUT = √(Vac² + Vdc²).
		if off >= lim.MaxVrms {
			return driver.GeneratorLimits{}, fmt.Errorf("instr: generator %s: output.offset_v %g V puts %g V DC on the DUT, at or above the amplitude limit %g Vrms: %w",
				p.File, p.Output.OffsetV, off, lim.MaxVrms, driver.ErrOutOfRange)
		}
		lim.MaxVrms = math.Sqrt(lim.MaxVrms*lim.MaxVrms - off*off)
	}
	if !(lim.MinFreqHz < lim.MaxFreqHz) {
		return driver.GeneratorLimits{}, fmt.Errorf("instr: generator %s: frequency limits %g..%g Hz (profile) and %g..%g Hz (bench) leave nothing: %w",
			p.File, p.Limits.MinFreqHz, p.Limits.MaxFreqHz, bench.MinFreqHz, bench.MaxFreqHz, driver.ErrOutOfRange)
	}
	if !(lim.MinVrms < lim.MaxVrms) {
		return driver.GeneratorLimits{}, fmt.Errorf("instr: generator %s: amplitude limits %g..%g Vrms (profile, at the DUT) and %g..%g Vrms (bench) leave nothing: %w",
			p.File, p.MinVrms(), p.MaxVrms(), bench.MinVrms, bench.MaxVrms, driver.ErrOutOfRange)
	}
	return lim, nil
}

var _ driver.SentSettings = (*Generator)(nil)

// WaitsAfterSettings reports whether the profile waits after a setting
// (dialect.wait_after_settings "opc" or "delay").
func (g *Generator) WaitsAfterSettings() bool {
	return g.dialect.WaitAfterSettings == profile.WaitOPC || g.dialect.WaitAfterSettings == profile.WaitDelay
}

var _ driver.SettlingOutput = (*Generator)(nil)
