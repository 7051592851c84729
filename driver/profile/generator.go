package profile

import (
	"fmt"
	"math"

	"rolloff/driver/scpi"
)

// Generator is a SCPI-1999 function generator profile (kind
// "scpi-generator"). Amplitudes are converted from Vrms at the DUT input
// to the instrument's unit and load setting (see GeneratorOutput).
type Generator struct {
	File     string                   `toml:"-"` // file the profile was read from
	Kind     string                   `toml:"kind"`
	Name     string                   `toml:"name"`
	Framing  Framing                  `toml:"framing"`
	Identity IdentityCheck            `toml:"identity"`
	Limits   GeneratorInstrumentLimit `toml:"limits"`
	Output   GeneratorOutput          `toml:"output"`
	Commands GeneratorCommands        `toml:"commands"`

	// T holds the compiled command templates.
	T GeneratorTemplates `toml:"-"`
}

// GeneratorInstrumentLimit is what the instrument itself can do. The
// amplitude limits are in Output.Unit, as the instrument shows them with
// its load setting (Output.Load).
type GeneratorInstrumentLimit struct {
	MinFreqHz    float64  `toml:"min_freq_hz"`
	MaxFreqHz    float64  `toml:"max_freq_hz"`
	MinAmplitude *float64 `toml:"min_amplitude"`
	MaxAmplitude float64  `toml:"max_amplitude"`
}

// Amplitude units an instrument can be driven in.
const (
	UnitVrms = "vrms" // volts RMS
	UnitVpp  = "vpp"  // volts peak to peak; a sine's Vpp = 2√2·Vrms
	UnitDBm  = "dbm"  // dB re 1 mW into the load setting: 10·log10(Vrms²/R / 1 mW)
)

// HiZ is the load value meaning a high-impedance (open-circuit) load.
const HiZ = "hi-z"

// GeneratorOutput says how the instrument's amplitude relates to the Vrms
// at the DUT input.
//
// A generator with source impedance Rs behind an EMF E shows the voltage
// it would put across the load it is told it drives (Load, its OUTPut:LOAD
// setting): V_shown = E·R_load/(R_load+Rs), or E for "hi-z". The DUT,
// with input resistance R_dut (DUTLoad), actually receives
// V_dut = E·R_dut/(R_dut+Rs), or E for "hi-z". So a 50 Ω source set for
// a 50 Ω load but driving a hi-z DUT puts twice the shown amplitude on the
// DUT; rolloff sets V_shown = V_dut·(R_dut+Rs)/R_dut·R_load/(R_load+Rs).
type GeneratorOutput struct {
	// Unit is the unit the amplitude command takes: vrms, vpp or dbm.
	Unit string `toml:"unit"`
	// SourceOhms is the generator's output impedance. Default 50.
	SourceOhms *float64 `toml:"source_ohms"`
	// Load is the instrument's load setting: "hi-z" or ohms. Default "hi-z".
	Load any `toml:"load"`
	// DUTLoad is the input resistance the DUT presents: "hi-z" or ohms.
	// Default "hi-z".
	DUTLoad any `toml:"dut_load"`

	loadOhms, dutOhms float64 // +Inf for hi-z
}

// SourceImpedance returns the source impedance in ohms, defaulted.
func (o *GeneratorOutput) SourceImpedance() float64 {
	if o.SourceOhms == nil {
		return 50
	}
	return *o.SourceOhms
}

// LoadOhms returns the load setting in ohms, +Inf for hi-z.
func (o *GeneratorOutput) LoadOhms() float64 { return o.loadOhms }

// DUTOhms returns the DUT's input resistance in ohms, +Inf for hi-z.
func (o *GeneratorOutput) DUTOhms() float64 { return o.dutOhms }

// ShownVrms returns the Vrms the instrument must be set to (across its
// load setting) for vrmsDUT at the DUT input.
func (o *GeneratorOutput) ShownVrms(vrmsDUT float64) float64 {
	rs := o.SourceImpedance()
	emf := vrmsDUT
	if !math.IsInf(o.dutOhms, 1) {
		emf = vrmsDUT * (o.dutOhms + rs) / o.dutOhms
	}
	if math.IsInf(o.loadOhms, 1) {
		return emf
	}
	return emf * o.loadOhms / (o.loadOhms + rs)
}

// DUTVrms is the inverse of ShownVrms.
func (o *GeneratorOutput) DUTVrms(shownVrms float64) float64 {
	return shownVrms / o.ShownVrms(1)
}

// ToUnit converts a shown Vrms (sine) to the instrument's unit.
func (o *GeneratorOutput) ToUnit(shownVrms float64) float64 {
	switch o.Unit {
	case UnitVpp:
		return 2 * math.Sqrt2 * shownVrms
	case UnitDBm:
		return 10 * math.Log10(shownVrms*shownVrms/o.loadOhms/1e-3)
	}
	return shownVrms
}

// FromUnit converts an amplitude in the instrument's unit to shown Vrms.
func (o *GeneratorOutput) FromUnit(v float64) float64 {
	switch o.Unit {
	case UnitVpp:
		return v / (2 * math.Sqrt2)
	case UnitDBm:
		return math.Sqrt(math.Pow(10, v/10) * 1e-3 * o.loadOhms)
	}
	return v
}

// UnitWord returns the SCPI character data for Unit: VRMS, VPP or DBM.
func (o *GeneratorOutput) UnitWord() string {
	switch o.Unit {
	case UnitVpp:
		return "VPP"
	case UnitDBm:
		return "DBM"
	}
	return "VRMS"
}

// GeneratorCommands are the command templates. Placeholders are written
// {name}; each template accepts only the placeholders listed.
type GeneratorCommands struct {
	// Init is sent in order after the instrument is cleared, before any
	// configuration. No placeholders.
	Init []string `toml:"init"`
	// FunctionSine selects a sine wave. No placeholders.
	FunctionSine string `toml:"function_sine"`
	// SetUnit selects the amplitude unit; {unit} is VRMS, VPP or DBM.
	// Optional: without it the instrument must already use Output.Unit.
	SetUnit string `toml:"set_unit"`
	// SetLoad tells the instrument its load; {load} is the number of ohms
	// or INFinity for hi-z. Optional.
	SetLoad string `toml:"set_load"`
	// SetFrequency sets the frequency; {freq_hz} in hertz.
	SetFrequency string `toml:"set_frequency"`
	// SetAmplitude sets the amplitude; {amplitude} in Output.Unit.
	SetAmplitude string `toml:"set_amplitude"`
	// OutputOn and OutputOff switch the output. No placeholders.
	OutputOn  string `toml:"output_on"`
	OutputOff string `toml:"output_off"`
	// CheckErrors reads the error queue (SYSTem:ERRor?) after
	// configuring; an entry there fails the configuration.
	CheckErrors bool `toml:"check_errors"`
}

// GeneratorTemplates are the compiled GeneratorCommands. Optional
// templates are nil when absent.
type GeneratorTemplates struct {
	Init         []*scpi.Template
	FunctionSine *scpi.Template
	SetUnit      *scpi.Template
	SetLoad      *scpi.Template
	SetFrequency *scpi.Template
	SetAmplitude *scpi.Template
	OutputOn     *scpi.Template
	OutputOff    *scpi.Template
}

// Generator amplitude and frequency bounds accepted in a profile.
const (
	maxProfileFreqHz = 10e9
	maxProfileVrms   = 1000.0
)

// DecodeGenerator decodes and validates a generator profile.
func DecodeGenerator(file string, data []byte) (*Generator, error) {
	if err := expectKind(file, data, KindGenerator); err != nil {
		return nil, err
	}
	g := &Generator{File: file}
	if err := decodeStrict(file, data, g); err != nil {
		return nil, err
	}
	p := newProblems(file, data)
	g.validate(p)
	if err := p.err(); err != nil {
		return nil, err
	}
	return g, nil
}

func (g *Generator) validate(p *problems) {
	checkKind(p, g.Kind, KindGenerator)
	g.Framing.validate(p)
	g.Identity.validate(p)
	o := &g.Output
	switch o.Unit {
	case UnitVrms, UnitVpp, UnitDBm:
	default:
		p.add("output.unit", o.Unit, `"vrms", "vpp" or "dbm"`, "unknown amplitude unit")
	}
	if o.SourceOhms != nil && (!finite(*o.SourceOhms) || *o.SourceOhms < 0 || *o.SourceOhms > 1e6) {
		p.add("output.source_ohms", *o.SourceOhms, "0 to 1e6 ohms", "source impedance out of range")
	}
	var ok bool
	if o.loadOhms, ok = parseLoad(p, "output.load", o.Load); !ok {
		o.loadOhms = math.Inf(1)
	}
	if o.dutOhms, ok = parseLoad(p, "output.dut_load", o.DUTLoad); !ok {
		o.dutOhms = math.Inf(1)
	}
	if o.Unit == UnitDBm && math.IsInf(o.loadOhms, 1) {
		p.add("output.load", o.Load, `ohms (e.g. 50) when output.unit = "dbm"`, "dBm needs a finite load setting")
	}
	l := g.Limits
	if !finite(l.MinFreqHz) || l.MinFreqHz < 0 || !finite(l.MaxFreqHz) || l.MaxFreqHz <= l.MinFreqHz || l.MaxFreqHz > maxProfileFreqHz {
		p.add("limits.max_freq_hz", l.MaxFreqHz, fmt.Sprintf("above limits.min_freq_hz (%g) and at most %g Hz", l.MinFreqHz, maxProfileFreqHz), "bad frequency range")
	}
	if !finite(l.MinFreqHz) || l.MinFreqHz < 0 {
		p.add("limits.min_freq_hz", l.MinFreqHz, "0 Hz or more", "bad frequency")
	}
	if o.Unit != UnitDBm {
		if l.MinAmplitude != nil && (!finite(*l.MinAmplitude) || *l.MinAmplitude < 0) {
			p.add("limits.min_amplitude", *l.MinAmplitude, "0 or more in output.unit", "bad amplitude")
		}
		if !finite(l.MaxAmplitude) || l.MaxAmplitude <= 0 {
			p.add("limits.max_amplitude", l.MaxAmplitude, "more than 0 in output.unit", "bad amplitude")
		}
	} else if !finite(l.MaxAmplitude) || (l.MinAmplitude != nil && !finite(*l.MinAmplitude)) {
		p.add("limits.max_amplitude", l.MaxAmplitude, "a finite level in dBm", "bad amplitude")
	}
	if l.MinAmplitude != nil && *l.MinAmplitude >= l.MaxAmplitude {
		p.add("limits.min_amplitude", *l.MinAmplitude, fmt.Sprintf("below limits.max_amplitude (%g)", l.MaxAmplitude), "empty amplitude range")
	}
	if len(p.errs) == 0 && g.MaxVrms() > maxProfileVrms {
		p.add("limits.max_amplitude", l.MaxAmplitude, fmt.Sprintf("at most the equivalent of %g Vrms at the DUT", maxProfileVrms), "amplitude limit too high")
	}
	c := g.Commands
	t := &g.T
	t.Init = compileList(p, "commands.init", c.Init)
	t.FunctionSine = compileTemplate(p, "commands.function_sine", c.FunctionSine, true)
	t.SetUnit = compileTemplate(p, "commands.set_unit", c.SetUnit, false, "unit")
	t.SetLoad = compileTemplate(p, "commands.set_load", c.SetLoad, false, "load")
	t.SetFrequency = compileTemplate(p, "commands.set_frequency", c.SetFrequency, true, "freq_hz")
	t.SetAmplitude = compileTemplate(p, "commands.set_amplitude", c.SetAmplitude, true, "amplitude")
	t.OutputOn = compileTemplate(p, "commands.output_on", c.OutputOn, true)
	t.OutputOff = compileTemplate(p, "commands.output_off", c.OutputOff, true)
}

// MinVrms and MaxVrms return the instrument's amplitude limits as Vrms at
// the DUT input.
func (g *Generator) MinVrms() float64 {
	if g.Limits.MinAmplitude == nil {
		return 0
	}
	return g.Output.DUTVrms(g.Output.FromUnit(*g.Limits.MinAmplitude))
}

// MaxVrms returns the instrument's maximum amplitude as Vrms at the DUT.
func (g *Generator) MaxVrms() float64 {
	return g.Output.DUTVrms(g.Output.FromUnit(g.Limits.MaxAmplitude))
}

// parseLoad reads a load value: "hi-z" or a positive number of ohms.
func parseLoad(p *problems, key string, v any) (float64, bool) {
	const allowed = `"hi-z" or a resistance in ohms (e.g. 50 or 600)`
	switch x := v.(type) {
	case nil:
		return math.Inf(1), true
	case string:
		if x == HiZ {
			return math.Inf(1), true
		}
	case int64:
		if x > 0 && x <= 1e9 {
			return float64(x), true
		}
	case float64:
		if finite(x) && x > 0 && x <= 1e9 {
			return x, true
		}
	}
	p.add(key, v, allowed, "bad load")
	return 0, false
}
