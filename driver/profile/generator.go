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
	Dialect  Dialect                  `toml:"dialect"`
	Response Response                 `toml:"response"`
	Limits   GeneratorInstrumentLimit `toml:"limits"`
	Output   GeneratorOutput          `toml:"output"`
	Commands GeneratorCommands        `toml:"commands"`
	// Accuracy is the amplitude specification (see spec.go); nil when the
	// profile gives none.
	Accuracy *GeneratorAccuracy `toml:"accuracy"`

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
	UnitDBm  = "dbm"  // dB re 1 mW into the reference resistance R (output.dbm_reference): 10·log10(Vrms²/R / 1 mW)
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
	// DBmReference is the resistance the instrument's dBm refer to:
	// "load" (its load setting, Load) or a fixed number of ohms (e.g. 50,
	// whatever the load setting). Required when Unit is dbm, refused
	// otherwise: generators differ on this and a wrong guess puts
	// √(R_wrong/R_right) times the planned voltage on the DUT.
	DBmReference any `toml:"dbm_reference"`
	// OffsetV is the DC offset the instrument is set to, volts as it
	// shows them across its load setting (default 0). It is sent through
	// {offset_v} and counted against the bench limit: the RMS at the DUT
	// is √(Vac² + Vdc²).
	OffsetV float64 `toml:"offset_v"`

	loadOhms, dutOhms float64 // +Inf for hi-z
	dbmRefOhms        float64 // resolved dBm reference, ohms
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

// DBmRefOhms returns the resistance dBm amplitudes refer to (the load
// setting or the fixed output.dbm_reference); 0 when the unit is not dBm.
func (o *GeneratorOutput) DBmRefOhms() float64 { return o.dbmRefOhms }

// ToUnit converts a shown Vrms (sine) to the instrument's unit. A dBm
// level is the power the shown Vrms would deliver into the dBm reference
// resistance R: 10·log10(Vrms²/R / 1 mW) (definition of dBm).
func (o *GeneratorOutput) ToUnit(shownVrms float64) float64 {
	switch o.Unit {
	case UnitVpp:
		return 2 * math.Sqrt2 * shownVrms
	case UnitDBm:
		return 10 * math.Log10(shownVrms*shownVrms/o.dbmRefOhms/1e-3)
	}
	return shownVrms
}

// FromUnit converts an amplitude in the instrument's unit to shown Vrms.
func (o *GeneratorOutput) FromUnit(v float64) float64 {
	switch o.Unit {
	case UnitVpp:
		return v / (2 * math.Sqrt2)
	case UnitDBm:
		return math.Sqrt(math.Pow(10, v/10) * 1e-3 * o.dbmRefOhms)
	}
	return v
}

// DUTOffsetV returns the DC offset at the DUT input for the offset
// setting: the source impedance divides DC as it divides the sine.
func (o *GeneratorOutput) DUTOffsetV() float64 {
	return o.DUTVrms(o.OffsetV)
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
	FunctionSine Cmds `toml:"function_sine"`
	// SetUnit selects the amplitude unit; {unit} is VRMS, VPP or DBM.
	// Optional: without it the instrument must already use Output.Unit.
	SetUnit Cmds `toml:"set_unit"`
	// SetLoad tells the instrument its load; {load} is the number of ohms
	// or INFinity for hi-z. Optional.
	SetLoad Cmds `toml:"set_load"`
	// SetFrequency sets the frequency; {freq_hz} in hertz. It may also
	// carry {amplitude} and {offset_v} (an apply-style command setting
	// them together): rolloff fills them with the amplitude it last set
	// (or the smallest it may set, before the first) and the offset.
	SetFrequency Cmds `toml:"set_frequency"`
	// SetAmplitude sets the amplitude; {amplitude} in Output.Unit. It may
	// also carry {freq_hz} and {offset_v}.
	SetAmplitude Cmds `toml:"set_amplitude"`
	// SetOffset sets the DC offset; {offset_v} is Output.OffsetV.
	// Optional; sent once at set-up.
	//
	// Every command may be one command or a list sent in order, and may
	// carry any of {freq_hz}, {amplitude} and {offset_v}, filled with the
	// settings last sent (before the first amplitude, the smallest the
	// limits allow). An apply-style command (APPLy..., or one carrying
	// two of them) must carry all three, or the profile is refused.
	SetOffset Cmds `toml:"set_offset"`
	// QueryFrequency and QueryAmplitude read the frequency (hertz) and
	// the amplitude (in Output.Unit) back. Optional: where given, every
	// setting is read back and a difference beyond ReadbackTolerance
	// switches the output off and fails the run.
	QueryFrequency Cmds `toml:"query_frequency"`
	QueryAmplitude Cmds `toml:"query_amplitude"`
	// ReadbackTolerance is the relative difference allowed between a
	// setting and its read-back (default 2e-3, which covers an instrument
	// rounding dBm to 0.01 dB; 1e-9 to 0.1).
	ReadbackTolerance float64 `toml:"readback_tolerance"`
	// OutputOn and OutputOff switch the output. No placeholders.
	OutputOn  Cmds `toml:"output_on"`
	OutputOff Cmds `toml:"output_off"`
	// QueryOutput reads the output state back (1 or ON when on).
	// Optional: where the instrument has no operation-complete query,
	// a halt is confirmed by reading the output state back with it.
	QueryOutput Cmds `toml:"query_output"`
	// CheckErrors reads the error queue (SYSTem:ERRor?) after
	// configuring; an entry there fails the configuration.
	CheckErrors bool `toml:"check_errors"`
}

// GeneratorTemplates are the compiled GeneratorCommands. Optional
// templates are nil when absent.
type GeneratorTemplates struct {
	Init         []*scpi.Template
	FunctionSine *scpi.Seq
	SetUnit      *scpi.Seq
	SetLoad      *scpi.Seq
	SetFrequency *scpi.Seq
	SetAmplitude *scpi.Seq
	SetOffset    *scpi.Seq
	QueryFreq    *scpi.Seq
	QueryAmpl    *scpi.Seq
	OutputOn     *scpi.Seq
	OutputOff    *scpi.Seq
	QueryOutput  *scpi.Seq
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
	g.Dialect.validate(p, g.Commands.CheckErrors)
	g.Response.validate(p)
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
	g.validateDBm(p)
	if !finite(o.OffsetV) || math.Abs(o.OffsetV) > maxProfileVrms {
		p.add("output.offset_v", o.OffsetV, fmt.Sprintf("-%g to %g V", maxProfileVrms, maxProfileVrms), "bad offset")
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
	t.FunctionSine = compileGenSeq(p, "commands.function_sine", c.FunctionSine, true, nil)
	t.SetUnit = compileGenSeq(p, "commands.set_unit", c.SetUnit, false, []string{"unit"})
	t.SetLoad = compileGenSeq(p, "commands.set_load", c.SetLoad, false, []string{"load"})
	t.SetFrequency = compileGenSeq(p, "commands.set_frequency", c.SetFrequency, true, []string{"freq_hz"})
	t.SetAmplitude = compileGenSeq(p, "commands.set_amplitude", c.SetAmplitude, true, []string{"amplitude"})
	t.SetOffset = compileGenSeq(p, "commands.set_offset", c.SetOffset, false, []string{"offset_v"})
	t.QueryFreq = compileGenQuery(p, "commands.query_frequency", c.QueryFrequency)
	t.QueryAmpl = compileGenQuery(p, "commands.query_amplitude", c.QueryAmplitude)
	t.QueryOutput = compileGenQuery(p, "commands.query_output", c.QueryOutput)
	t.OutputOn = compileGenSeq(p, "commands.output_on", c.OutputOn, true, nil)
	t.OutputOff = compileGenSeq(p, "commands.output_off", c.OutputOff, true, nil)
	g.checkGeneratorTemplates(p)
	g.validateSpec(p)
	if c.ReadbackTolerance != 0 && (!finite(c.ReadbackTolerance) || c.ReadbackTolerance < 1e-9 || c.ReadbackTolerance > 0.1) {
		p.add("commands.readback_tolerance", c.ReadbackTolerance, "1e-9 to 0.1 (relative), or 0 for the default 2e-3", "bad read-back tolerance")
	}
	if o.OffsetV != 0 && !g.sendsOffset() {
		p.add("output.offset_v", o.OffsetV, "0, or a commands.set_offset (or {offset_v} in set_frequency/set_amplitude) to send it", "offset never sent")
	}
}

// ReadbackTol returns the relative read-back tolerance, defaulted.
func (g *Generator) ReadbackTol() float64 {
	if g.Commands.ReadbackTolerance == 0 {
		return 2e-3
	}
	return g.Commands.ReadbackTolerance
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
