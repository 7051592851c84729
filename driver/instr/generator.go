package instr

import (
	"context"
	"fmt"
	"math"
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

	// The last settings sent (guarded by mu), for templates that carry
	// several parameters: ampSet is false until the first amplitude.
	freqHz, amplitude float64
	freqSet, ampSet   bool
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
		link: link{role: "generator", sess: sess, checkErrors: p.Commands.CheckErrors},
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
	if err := g.send(ctx, t.FunctionSine); err != nil {
		return err
	}
	if t.SetUnit != nil {
		if err := g.send(ctx, t.SetUnit, scpi.Word("unit", g.p.Output.UnitWord())); err != nil {
			return err
		}
	}
	if t.SetLoad != nil {
		arg := scpi.Word("load", "INFinity")
		if r := g.p.Output.LoadOhms(); !math.IsInf(r, 1) {
			arg = scpi.Num("load", r)
		}
		if err := g.send(ctx, t.SetLoad, arg); err != nil {
			return err
		}
	}
	if t.SetOffset != nil {
		if err := g.send(ctx, t.SetOffset, scpi.Num("offset_v", g.p.Output.OffsetV)); err != nil {
			return err
		}
	}
	return nil
}

// args returns the arguments t takes among the frequency, amplitude and
// offset, from the settings last sent (the smallest amplitude the limits
// allow before the first one).
func (g *Generator) args(t *scpi.Template, freqHz, amplitude float64) []scpi.Arg {
	var out []scpi.Arg
	for _, n := range t.Placeholders() {
		switch n {
		case "freq_hz":
			out = append(out, scpi.Num(n, freqHz))
		case "amplitude":
			out = append(out, scpi.Num(n, amplitude))
		case "offset_v":
			out = append(out, scpi.Num(n, g.p.Output.OffsetV))
		}
	}
	return out
}

// lowestAmplitude is the amplitude sent before the first SetAmplitude by
// a frequency template that carries {amplitude}: the smallest level the
// limits allow, in the instrument's unit. ok is false when there is no
// such level (dBm with no lower limit): the caller must then refuse.
func (g *Generator) lowestAmplitude() (a float64, ok bool) {
	a = g.InstrumentAmplitude(g.lim.MinVrms)
	if !math.IsNaN(a) && !math.IsInf(a, 0) {
		return a, true
	}
	if m := g.p.Limits.MinAmplitude; m != nil {
		return *m, true
	}
	return 0, false
}

// SetFrequency sets the sine frequency in hertz.
func (g *Generator) SetFrequency(ctx context.Context, freqHz float64) error {
	if !(freqHz >= g.lim.MinFreqHz && freqHz <= g.lim.MaxFreqHz) {
		return outOfRange("generator", "frequency (Hz)", freqHz, fmt.Sprintf("%g to %g Hz", g.lim.MinFreqHz, g.lim.MaxFreqHz))
	}
	if err := g.mu.acquire(ctx); err != nil {
		return fmt.Errorf("generator: %w", err)
	}
	defer g.mu.release()
	t := g.p.T.SetFrequency
	amp := g.amplitude
	if !g.ampSet && hasArg(t, "amplitude") {
		var ok bool
		if amp, ok = g.lowestAmplitude(); !ok {
			return fmt.Errorf("generator: %s carries {amplitude}: set the amplitude before the first frequency (the profile gives no lowest level in %s): %w",
				t.Key(), g.p.Output.Unit, driver.ErrOutOfRange)
		}
	}
	if err := g.send(ctx, t, g.args(t, freqHz, amp)...); err != nil {
		return err
	}
	g.freqHz, g.freqSet = freqHz, true
	return g.readBack(ctx, true, hasArg(t, "amplitude"), freqHz, amp)
}

// SetAmplitude sets the amplitude, Vrms at the DUT input.
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
	f := g.freqHz
	if hasArg(t, "freq_hz") && !g.freqSet {
		f = math.Max(g.lim.MinFreqHz, math.Min(1000, g.lim.MaxFreqHz))
	}
	if err := g.send(ctx, t, g.args(t, f, a)...); err != nil {
		return err
	}
	g.amplitude, g.ampSet = a, true
	if hasArg(t, "freq_hz") {
		g.freqHz, g.freqSet = f, true
	}
	return g.readBack(ctx, hasArg(t, "freq_hz"), true, f, a)
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
	if on {
		return g.send(ctx, g.p.T.OutputOn)
	}
	return g.send(ctx, g.p.T.OutputOff)
}

// Halt switches the output off and waits for the instrument to confirm it
// has executed the command (*OPC?, IEEE 488.2 §10.19). It uses its own
// time-out (HaltTimeout), so it works after the caller's context is
// cancelled.
//
// Halt does not wait for a configuration sequence in progress on another
// goroutine: it goes in between two of its commands (the session
// serialises messages), so the output goes off as soon as the link is
// free.
func (g *Generator) Halt() error {
	ctx, cancel := context.WithTimeout(context.Background(), HaltTimeout)
	defer cancel()
	cmd, err := g.p.T.OutputOff.Format()
	if err != nil {
		return fmt.Errorf("generator: halt: %w", err)
	}
	if err := g.sess.Write(ctx, cmd); err != nil {
		return fmt.Errorf("generator: halt: %w", err)
	}
	if err := g.sess.OperationComplete(ctx); err != nil {
		return fmt.Errorf("generator: halt: %s sent, not confirmed: %w", cmd, err)
	}
	return nil
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
