package sim

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"unicode"

	"rolloff/driver"
	"rolloff/driver/sim/model"
	"rolloff/internal/fielderr"
)

// Config describes a simulated bench. Its TOML keys are lower_snake_case
// and listed in the package documentation. Start from DemoConfig and
// decode a bench file's table over it so that omitted keys keep their
// demo values (lists are replaced whole).
type Config struct {
	// Seed seeds the noise: one PCG stream per instrument.
	Seed uint64 `toml:"seed"`
	// TimeScale is model seconds per wall second (50: a 1 s time
	// constant settles in 20 ms of wall time).
	TimeScale float64 `toml:"time_scale"`
	// LineHz is the power-line frequency NPLC apertures refer to.
	LineHz float64 `toml:"line_hz"`
	// ErrorQueueLen bounds each instrument's error/event queue.
	ErrorQueueLen int `toml:"error_queue_len"`
	// Systematic makes each instrument draw its systematic errors from
	// Spec, seeded by Seed, and keep them for its life (systematic.go).
	// Default off: an ideal bench.
	Systematic bool `toml:"systematic"`
	// DriftPPMPerHour and DriftWalkPPM drift the converter's gain in
	// model time: a linear drift at this rate and a seeded random walk
	// of this RMS after one hour (0 and 0: none).
	DriftPPMPerHour float64 `toml:"drift_ppm_per_hour"`
	DriftWalkPPM    float64 `toml:"drift_walk_ppm"`
	// Spec holds the specifications the systematic errors are drawn
	// from.
	Spec SpecConfig `toml:"spec"`

	Generator GeneratorConfig `toml:"generator"`
	DUT       DUTConfig       `toml:"dut"`
	Converter ConverterConfig `toml:"converter"`
	Voltmeter VoltmeterConfig `toml:"voltmeter"`
	DMM       DMMConfig       `toml:"dmm"`
	Switch    SwitchConfig    `toml:"switch"`
}

// GeneratorConfig is the signal generator: identity, limits, source
// impedance and its state after *RST.
type GeneratorConfig struct {
	IDN       string  `toml:"idn"`
	MinFreqHz float64 `toml:"min_freq_hz"`
	MaxFreqHz float64 `toml:"max_freq_hz"`
	MinVrms   float64 `toml:"min_vrms"` // amplitude limits, Vrms of the set waveform
	MaxVrms   float64 `toml:"max_vrms"`
	// SourceOhm is the output impedance (50 Ω typical).
	SourceOhm float64 `toml:"source_ohm"`
	// LoadOhm is the OUTPut:LOAD setting after *RST; 0 means INFinity
	// (the amplitude set is the open-circuit voltage).
	LoadOhm     float64 `toml:"load_ohm"`
	ResetFreqHz float64 `toml:"reset_freq_hz"`
	ResetVrms   float64 `toml:"reset_vrms"`
	ResetUnit   string  `toml:"reset_unit"` // VRMS, VPP or DBM
	// Harmonics is the number of harmonics synthesised for square and
	// triangle waves (1..2047).
	Harmonics int `toml:"harmonics"`
	// DBmReference is what DBM amplitudes refer to: "fixed" (power into
	// DBmFixedOhm whatever the load setting) or "load" (power into the
	// OUTPut:LOAD setting; DBM at INFinity is a settings conflict). Real
	// generators do either.
	DBmReference string  `toml:"dbm_reference"`
	DBmFixedOhm  float64 `toml:"dbm_fixed_ohm"`
	// Personality is the generator's SCPI dialect: "" (the full
	// command set), "apply-vpp" or "opc-mute" (see GeneratorPersonalities).
	Personality string `toml:"personality"`
}

// Section is one filter section of the DUT. Kind is one of
// "highpass1", "lowpass1" (first order at freq_hz), "highpass2",
// "lowpass2" (second order at freq_hz with quality factor q) and
// "butterworth-highpass", "butterworth-lowpass" (order order, -3 dB at
// freq_hz).
type Section struct {
	Kind   string  `toml:"kind"`
	FreqHz float64 `toml:"freq_hz"`
	Q      float64 `toml:"q"`
	Order  int     `toml:"order"`
}

// DUTConfig is the device under test.
type DUTConfig struct {
	GainDB   float64   `toml:"gain_db"`
	Sections []Section `toml:"sections"`
	// ClipV is the output rail: the output clips at ±ClipV (0: never).
	ClipV float64 `toml:"clip_v"`
	// NoiseVrms is the output noise; it adds in power.
	NoiseVrms float64 `toml:"noise_vrms"`
	// InputOhm is the input impedance loading the generator (0: high
	// impedance, no loading).
	InputOhm float64 `toml:"input_ohm"`
}

// Range is one converter range as the bench file writes it.
type Range struct {
	Name          string  `toml:"name"`            // as printed on the switch, e.g. "31.62 mV"
	FullScaleVrms float64 `toml:"full_scale_vrms"` // input for a full-scale DC output
	TimeConstantS float64 `toml:"time_constant_s"` // averaging time constant, physical seconds
}

// Driver returns the range as the driver contract describes it.
func (r Range) Driver() driver.Range {
	return driver.Range{Name: r.Name, FullScaleVrms: r.FullScaleVrms, TimeConstantS: r.TimeConstantS}
}

// ConverterConfig is the analog true-RMS converter with its DC output.
type ConverterConfig struct {
	Ranges       []Range `toml:"ranges"`
	DCFullScaleV float64 `toml:"dc_full_scale_v"`
	// SaturateFraction: the DC output saturates at this fraction of
	// dc_full_scale_v, and the converter reports overload beyond it.
	SaturateFraction float64 `toml:"saturate_fraction"`
	// FloorFraction is the input-referred noise floor as a fraction of
	// the range's full scale; it adds in power.
	FloorFraction float64 `toml:"floor_fraction"`
	// NoiseV is the RMS noise on the DC output within
	// NoiseBandwidthHz; an aperture T averages it to
	// NoiseV·√min(1, 1/(2·B·T)).
	NoiseV           float64 `toml:"noise_v"`
	NoiseBandwidthHz float64 `toml:"noise_bandwidth_hz"`
	// DroopHz is a first-order roll-off of the converter input (0: none).
	DroopHz float64 `toml:"droop_hz"`
	// Every HoldIntervalS the output is frozen for HoldS (0: never).
	HoldIntervalS float64 `toml:"hold_interval_s"`
	HoldS         float64 `toml:"hold_s"`
	// PostFilterS is the time constant of a first-order filter between
	// the averager and the DC output, physical seconds (0: none): a
	// second pole, whose output approaches a step as two exponentials.
	PostFilterS float64 `toml:"post_filter_s"`
	// InitialRange is the range index selected at power-on (-1: none).
	InitialRange int `toml:"initial_range"`
}

// VoltmeterConfig is the DC voltmeter reading the converter's output.
type VoltmeterConfig struct {
	IDN     string    `toml:"idn"`
	RangesV []float64 `toml:"ranges_v"`
	// OverRangeFraction: readings beyond range × (1 + this) answer the
	// overflow value 9.9E37.
	OverRangeFraction float64 `toml:"over_range_fraction"`
	// NoiseV is the reading noise (RMS) at an aperture of one line
	// cycle; it scales as 1/√aperture.
	NoiseV     float64 `toml:"noise_v"`
	ResetNPLC  float64 `toml:"reset_nplc"`
	MaxSamples int     `toml:"max_samples"`
	// Personality is the voltmeter's SCPI dialect: "" (the full command
	// set) or one of MeterPersonalities.
	Personality string `toml:"personality"`
	// QueryLatencyS is the model time a reading's answer takes after the
	// measurement (trigger, conversion, transfer); 0: none.
	QueryLatencyS float64 `toml:"query_latency_s"`
}

// DMMConfig is the AC DMM reading the DUT output's true RMS directly.
type DMMConfig struct {
	IDN               string    `toml:"idn"`
	RangesVrms        []float64 `toml:"ranges_vrms"`
	OverRangeFraction float64   `toml:"over_range_fraction"`
	// NoiseV is the reading noise (RMS) at one line cycle; it scales as
	// 1/√aperture.
	NoiseV float64 `toml:"noise_v"`
	// FloorVrms is the input-referred noise floor; it adds in power.
	FloorVrms float64 `toml:"floor_vrms"`
	// TimeConstantS is the DMM's RMS averaging time constant.
	TimeConstantS float64 `toml:"time_constant_s"`
	// BandwidthHz is a first-order roll-off of the DMM input (0: none).
	BandwidthHz float64 `toml:"bandwidth_hz"`
	ResetNPLC   float64 `toml:"reset_nplc"`
	MaxSamples  int     `toml:"max_samples"`
	// Personality is the DMM's SCPI dialect, as for the voltmeter.
	Personality string `toml:"personality"`
	// QueryLatencyS is as for the voltmeter.
	QueryLatencyS float64 `toml:"query_latency_s"`
	// Filters, when given, set the averaging time constant per frequency
	// band (see DMMFilter).
	Filters []DMMFilter `toml:"filters"`
}

// SwitchConfig is the relay instrument selecting the converter range;
// it has one channel per converter range.
type SwitchConfig struct {
	IDN string `toml:"idn"`
}

// Aperture limits of both meters.
const (
	MinNPLC      = 0.001
	MaxNPLC      = 100
	MinApertureS = 1e-5
	MaxApertureS = 10
)

// DemoConfig returns the demo bench: a line-driver prototype (+20 dB,
// first-order high-pass at 8 Hz, second-order Butterworth low-pass at
// 95 kHz, clipping at ±12 V, 20 µV output noise) driven by a 1 mHz-20 MHz
// generator and measured by a converter with twelve ranges in 10 dB steps
// (1 mV to 316.2 V full scale, 1 V DC out at full scale). The averaging
// time constant is 1 s on the 1 mV range, falling to 0.4 s from 100 mV up,
// as on analog meters whose low ranges need more filtering. TimeScale 50
// makes a 2 Hz-2 MHz sweep at 12 points per decade a matter of seconds.
func DemoConfig() Config {
	var ranges []Range
	names := []string{"1 mV", "3.162 mV", "10 mV", "31.62 mV", "100 mV", "316.2 mV",
		"1 V", "3.162 V", "10 V", "31.62 V", "100 V", "316.2 V"}
	taus := []float64{1.0, 0.8, 0.6, 0.5}
	for k, name := range names {
		tau := 0.4
		if k < len(taus) {
			tau = taus[k]
		}
		ranges = append(ranges, Range{
			Name:          name,
			FullScaleVrms: 1e-3 * math.Pow(10, float64(k)/2),
			TimeConstantS: tau,
		})
	}
	return Config{
		Seed:          1,
		TimeScale:     50,
		LineHz:        50,
		ErrorQueueLen: 20,
		Generator: GeneratorConfig{
			IDN:         "rolloff,SIM-GEN-1,0001,1.0",
			MinFreqHz:   1e-3,
			MaxFreqHz:   20e6,
			MinVrms:     1e-4,
			MaxVrms:     7,
			SourceOhm:   50,
			LoadOhm:     0,
			ResetFreqHz: 1000,
			ResetVrms:   0.1,
			ResetUnit:   "VRMS",
			Harmonics:   model.MaxHarmonics,
			// 50 Ω whatever the load setting.
			DBmReference: DBmFixed,
			DBmFixedOhm:  50,
		},
		DUT: DUTConfig{
			GainDB: 20,
			Sections: []Section{
				{Kind: model.HighPass1, FreqHz: 8},
				{Kind: model.ButterworthLowPass, FreqHz: 95e3, Order: 2},
			},
			ClipV:     12,
			NoiseVrms: 20e-6,
		},
		Converter: ConverterConfig{
			Ranges:           ranges,
			DCFullScaleV:     1,
			SaturateFraction: 1.2,
			FloorFraction:    5e-4,
			NoiseV:           20e-6,
			NoiseBandwidthHz: 10,
			DroopHz:          20e6,
			HoldIntervalS:    1,
			HoldS:            0.05,
			InitialRange:     6, // 1 V
		},
		Voltmeter: VoltmeterConfig{
			IDN:               "rolloff,SIM-DCV-1,0001,1.0",
			RangesV:           []float64{0.1, 1, 10, 100, 1000},
			OverRangeFraction: 0.25,
			NoiseV:            2e-6,
			ResetNPLC:         10,
			MaxSamples:        1000,
		},
		DMM: DMMConfig{
			IDN:               "rolloff,SIM-DMM-1,0001,1.0",
			RangesVrms:        []float64{0.1, 1, 10, 100, 750},
			OverRangeFraction: 0.2,
			NoiseV:            10e-6,
			FloorVrms:         20e-6,
			TimeConstantS:     0.1,
			BandwidthHz:       10e6,
			ResetNPLC:         10,
			MaxSamples:        1000,
		},
		Switch: SwitchConfig{IDN: "rolloff,SIM-SW-1,0001,1.0"},
		Spec:   demoSpec(),
	}
}

// ConfigError is one invalid setting: Field is the TOML key path in the
// [sim] table (e.g. "dut.sections[1].q"), Value the bad value, Allowed
// what is allowed. It is the program's one field-error type, the same as
// profile.FieldError.
type ConfigError = fielderr.Error

// ErrConfig is wrapped by every Validate error.
var ErrConfig = errors.New("sim: invalid config")

// msgRefused is what every *ConfigError says is wrong.
const msgRefused = "refused by the simulator"

// Validate checks every setting and returns ErrConfig wrapping all the
// problems joined; each is a *ConfigError naming the key path, value and
// allowed range.
func (c *Config) Validate() error {
	var errs []error
	bad := func(key string, v any, allowed string) {
		errs = append(errs, &ConfigError{Field: key, Value: fielderr.FormatValue(v), Msg: msgRefused, Allowed: allowed})
	}
	finite := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	between := func(key string, v, lo, hi float64) {
		if !finite(v) || v < lo || v > hi {
			bad(key, v, fmt.Sprintf("%g..%g", lo, hi))
		}
	}
	positive := func(key string, v, hi float64) {
		if !finite(v) || v <= 0 || v > hi {
			bad(key, v, fmt.Sprintf("> 0 and <= %g", hi))
		}
	}
	idn := func(key, s string) {
		if err := checkIDN(s); err != "" {
			bad(key, s, err)
		}
	}
	increasing := func(key string, vs []float64) {
		if len(vs) == 0 || len(vs) > 32 {
			bad(key, vs, "1..32 ranges")
			return
		}
		for i, v := range vs {
			if !finite(v) || v <= 0 || v > 1e4 || (i > 0 && v <= vs[i-1]) {
				bad(fmt.Sprintf("%s[%d]", key, i), v, "> 0, <= 10000 and increasing")
			}
		}
	}

	positive("time_scale", c.TimeScale, 1e6)
	between("line_hz", c.LineHz, 10, 1000)
	if c.ErrorQueueLen < 2 || c.ErrorQueueLen > 1000 {
		bad("error_queue_len", c.ErrorQueueLen, "2..1000")
	}

	g := &c.Generator
	idn("generator.idn", g.IDN)
	if !validPersonality(GeneratorPersonalities, g.Personality) {
		bad("generator.personality", g.Personality, personalitiesAllowed(GeneratorPersonalities))
	}
	if !validPersonality(MeterPersonalities, c.Voltmeter.Personality) {
		bad("voltmeter.personality", c.Voltmeter.Personality, personalitiesAllowed(MeterPersonalities))
	}
	if !validPersonality(MeterPersonalities, c.DMM.Personality) {
		bad("dmm.personality", c.DMM.Personality, personalitiesAllowed(MeterPersonalities))
	}
	positive("generator.min_freq_hz", g.MinFreqHz, 1e9)
	positive("generator.max_freq_hz", g.MaxFreqHz, 1e9)
	if g.MaxFreqHz <= g.MinFreqHz {
		bad("generator.max_freq_hz", g.MaxFreqHz, fmt.Sprintf("> generator.min_freq_hz (%g)", g.MinFreqHz))
	}
	positive("generator.min_vrms", g.MinVrms, 1e3)
	positive("generator.max_vrms", g.MaxVrms, 1e3)
	if g.MaxVrms <= g.MinVrms {
		bad("generator.max_vrms", g.MaxVrms, fmt.Sprintf("> generator.min_vrms (%g)", g.MinVrms))
	}
	between("generator.source_ohm", g.SourceOhm, 0, 1e6)
	if g.LoadOhm != 0 {
		between("generator.load_ohm", g.LoadOhm, minLoadOhm, maxLoadOhm)
	}
	between("generator.reset_freq_hz", g.ResetFreqHz, g.MinFreqHz, g.MaxFreqHz)
	between("generator.reset_vrms", g.ResetVrms, g.MinVrms, g.MaxVrms)
	if _, ok := unitByName(g.ResetUnit); !ok {
		bad("generator.reset_unit", g.ResetUnit, `"VRMS", "VPP" or "DBM"`)
	}
	if g.DBmReference != DBmFixed && g.DBmReference != DBmLoad {
		bad("generator.dbm_reference", g.DBmReference, `"fixed" (dbm_fixed_ohm) or "load" (the OUTPut:LOAD setting)`)
	}
	positive("generator.dbm_fixed_ohm", g.DBmFixedOhm, 1e6)
	if g.Harmonics < 1 || g.Harmonics > model.MaxHarmonics {
		bad("generator.harmonics", g.Harmonics, fmt.Sprintf("1..%d", model.MaxHarmonics))
	}

	d := &c.DUT
	between("dut.gain_db", d.GainDB, -200, 200)
	if len(d.Sections) > 64 {
		bad("dut.sections", len(d.Sections), "at most 64 sections")
	}
	for i, s := range d.Sections {
		ms := model.Section{Kind: s.Kind, FreqHz: s.FreqHz, Q: s.Q, Order: s.Order}
		if field, err := ms.Check(); err != nil {
			var v any
			allowed := err.Error()
			switch field {
			case "kind":
				v = s.Kind
			case "freq_hz":
				v = s.FreqHz
			case "q":
				v = s.Q
			case "order":
				v = s.Order
			}
			if k := strings.Index(allowed, "allowed "); k >= 0 {
				allowed = allowed[k+len("allowed "):]
			}
			bad(fmt.Sprintf("dut.sections[%d].%s", i, field), v, allowed)
		}
	}
	between("dut.clip_v", d.ClipV, 0, 1e4)
	between("dut.noise_vrms", d.NoiseVrms, 0, 10)
	between("dut.input_ohm", d.InputOhm, 0, 1e12)

	v := &c.Converter
	if len(v.Ranges) == 0 || len(v.Ranges) > 64 {
		bad("converter.ranges", len(v.Ranges), "1..64 ranges")
	}
	for i, r := range v.Ranges {
		key := fmt.Sprintf("converter.ranges[%d]", i)
		if r.Name == "" || len(r.Name) > 32 || strings.IndexFunc(r.Name, func(r rune) bool { return !unicode.IsPrint(r) }) >= 0 {
			bad(key+".name", r.Name, "1..32 printable characters")
		}
		if !finite(r.FullScaleVrms) || r.FullScaleVrms <= 0 || r.FullScaleVrms > 1e4 ||
			(i > 0 && r.FullScaleVrms <= v.Ranges[i-1].FullScaleVrms) {
			bad(key+".full_scale_vrms", r.FullScaleVrms, "> 0, <= 10000 V and increasing")
		}
		positive(key+".time_constant_s", r.TimeConstantS, 1000)
	}
	positive("converter.dc_full_scale_v", v.DCFullScaleV, 100)
	between("converter.saturate_fraction", v.SaturateFraction, 1, 10)
	if !finite(v.FloorFraction) || v.FloorFraction < 0 || v.FloorFraction >= 1 {
		bad("converter.floor_fraction", v.FloorFraction, "0 <= x < 1")
	}
	between("converter.noise_v", v.NoiseV, 0, 1)
	if v.NoiseV > 0 {
		positive("converter.noise_bandwidth_hz", v.NoiseBandwidthHz, 1e9)
	}
	between("converter.droop_hz", v.DroopHz, 0, 1e12)
	between("converter.hold_interval_s", v.HoldIntervalS, 0, 1e4)
	between("converter.post_filter_s", v.PostFilterS, 0, 1000)
	if !finite(v.HoldS) || v.HoldS < 0 || (v.HoldS > 0 && v.HoldS >= v.HoldIntervalS) {
		bad("converter.hold_s", v.HoldS, fmt.Sprintf(">= 0 and < converter.hold_interval_s (%g)", v.HoldIntervalS))
	}
	if v.InitialRange < -1 || v.InitialRange >= len(v.Ranges) {
		bad("converter.initial_range", v.InitialRange, fmt.Sprintf("-1..%d", len(v.Ranges)-1))
	}

	m := &c.Voltmeter
	idn("voltmeter.idn", m.IDN)
	increasing("voltmeter.ranges_v", m.RangesV)
	between("voltmeter.over_range_fraction", m.OverRangeFraction, 0, 1)
	between("voltmeter.noise_v", m.NoiseV, 0, 1)
	between("voltmeter.reset_nplc", m.ResetNPLC, MinNPLC, MaxNPLC)
	if m.MaxSamples < 1 || m.MaxSamples > 100000 {
		bad("voltmeter.max_samples", m.MaxSamples, "1..100000")
	}
	between("voltmeter.query_latency_s", m.QueryLatencyS, 0, maxQueryLatencyS)

	a := &c.DMM
	idn("dmm.idn", a.IDN)
	increasing("dmm.ranges_vrms", a.RangesVrms)
	between("dmm.over_range_fraction", a.OverRangeFraction, 0, 1)
	between("dmm.noise_v", a.NoiseV, 0, 1)
	between("dmm.floor_vrms", a.FloorVrms, 0, 1)
	positive("dmm.time_constant_s", a.TimeConstantS, 1000)
	between("dmm.bandwidth_hz", a.BandwidthHz, 0, 1e12)
	between("dmm.reset_nplc", a.ResetNPLC, MinNPLC, MaxNPLC)
	if a.MaxSamples < 1 || a.MaxSamples > 100000 {
		bad("dmm.max_samples", a.MaxSamples, "1..100000")
	}
	between("dmm.query_latency_s", a.QueryLatencyS, 0, maxQueryLatencyS)
	a.validateFilters(bad)

	idn("switch.idn", c.Switch.IDN)
	errs = append(errs, c.validateSystematic()...)
	if len(errs) == 0 {
		return nil
	}
	return fmt.Errorf("%w: %w", ErrConfig, errors.Join(errs...))
}

// checkIDN checks an *IDN? answer: four comma-separated non-empty fields
// of printable ASCII without quotes or semicolons (IEEE 488.2 §10.14).
func checkIDN(s string) string {
	const allowed = `four comma-separated non-empty fields of printable ASCII without ; or quotes, at most 200 characters`
	if len(s) > 200 || checkPrintable(s) != "" || strings.ContainsAny(s, `;"'`) {
		return allowed
	}
	parts := strings.Split(s, ",")
	if len(parts) != 4 {
		return allowed
	}
	for _, p := range parts {
		if strings.TrimSpace(p) == "" {
			return allowed
		}
	}
	return ""
}

func checkPrintable(s string) string {
	for _, r := range s {
		if r < 0x20 || r > 0x7e {
			return "printable ASCII"
		}
	}
	return ""
}
