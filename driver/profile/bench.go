package profile

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path"
	"path/filepath"
	"strings"

	"rolloff/driver"
	"rolloff/driver/transport"
)

// Voltmeter modes of a bench.
const (
	// ModeConverter reads an analog true-RMS converter's DC output with a
	// DC voltmeter and scales it by the selected range.
	ModeConverter = "converter"
	// ModeACDMM reads true RMS directly with an AC DMM.
	ModeACDMM = "ac-dmm"
)

// AddressSim is the address of the in-process simulated instrument for a
// role; it needs a [sim] table in the bench file.
const AddressSim = "sim"

// BenchFile is a decoded and validated bench file: which instrument plays
// which role, at which address, with its profile resolved, and the
// bench's own limits.
type BenchFile struct {
	File string `toml:"-"` // bench file name as given
	Raw  []byte `toml:"-"` // bench file bytes as read

	Name string `toml:"name"`
	// VoltmeterMode is "converter" (DC voltmeter + converter) or "ac-dmm".
	VoltmeterMode string `toml:"voltmeter_mode"`
	// TimeScale speeds the simulated bench up: simulated seconds per real
	// second. Only allowed with [sim]; 1 when absent (the [sim] table may
	// then give its own, see sim.FromBenchFile).
	TimeScale float64     `toml:"time_scale"`
	Limits    BenchLimits `toml:"limits"`

	Generator *InstrumentRole `toml:"generator"`
	Voltmeter *DCMeterRole    `toml:"voltmeter"`
	Converter *ConverterRole  `toml:"converter"`
	Switch    *InstrumentRole `toml:"switch"`
	DMM       *ACMeterRole    `toml:"dmm"`
	// Vin is an optional second voltmeter measuring the generator's
	// output at the DUT input, so the gain uses measured Vin.
	Vin *ACMeterRole `toml:"vin"`

	// Sim is the [sim] table as written, nil when there is none: the
	// simulated bench (DUT, instruments) for "sim" addresses. This
	// package only notes that it is there; the simulator decodes and
	// checks it against the profiles (sim.FromBenchFile), with
	// DecodeTable, Listed, Line and KeyError.
	Sim map[string]any `toml:"sim"`

	lines keyLines // where each key is written
}

// BenchLimits protect the DUT. MaxVrms is the largest amplitude the
// generator may put on the DUT input.
type BenchLimits struct {
	MinFreqHz float64 `toml:"min_freq_hz"`
	MaxFreqHz float64 `toml:"max_freq_hz"`
	MinVrms   float64 `toml:"min_vrms"`
	MaxVrms   float64 `toml:"max_vrms"`
}

// Driver returns the limits as driver.GeneratorLimits.
func (l BenchLimits) Driver() driver.GeneratorLimits {
	return driver.GeneratorLimits{MinFreqHz: l.MinFreqHz, MaxFreqHz: l.MaxFreqHz, MinVrms: l.MinVrms, MaxVrms: l.MaxVrms}
}

// InstrumentRole is a SCPI instrument on the bench.
type InstrumentRole struct {
	// Profile is the instrument profile's path, relative to the bench file.
	Profile string `toml:"profile"`
	// Address is tcp://host[:port], serial:///dev/X?..., usbtmc:///dev/X
	// or "sim".
	Address string `toml:"address"`

	Generator *Generator `toml:"-"` // resolved profile, generator role
	Switch    *Switch    `toml:"-"` // resolved profile, switch role
}

// DCMeterRole is the DC voltmeter reading the converter's output.
type DCMeterRole struct {
	Profile string `toml:"profile"`
	Address string `toml:"address"`
	// RangeV is the DC range; 0 picks the smallest range holding the
	// converter's over-range output.
	RangeV float64 `toml:"range_v"`
	// NPLC or ApertureS is the integration time (at most one of them).
	// Default 1 NPLC (whole line cycles reject hum on the DC output)
	// where the profile can set NPLC (see DefaultNPLC); else the
	// instrument's own.
	NPLC      float64 `toml:"nplc"`
	ApertureS float64 `toml:"aperture_s"`

	DMM *DMM `toml:"-"`
}

// ACMeterRole is an AC DMM reading true RMS.
type ACMeterRole struct {
	Profile   string  `toml:"profile"`
	Address   string  `toml:"address"`
	RangeVrms float64 `toml:"range_vrms"` // required
	// NPLC or ApertureS is the integration time, where the profile can set
	// it; neither keeps the instrument's own.
	NPLC      float64 `toml:"nplc"`
	ApertureS float64 `toml:"aperture_s"`

	DMM *DMM `toml:"-"`
}

// ConverterRole is the analog converter (no address: it is read through
// the voltmeter, and switched through the switch when remote).
type ConverterRole struct {
	Profile string `toml:"profile"`

	Spec *Converter `toml:"-"`
}

// DCConfig returns the voltmeter configuration the bench asks for.
func (b *BenchFile) DCConfig() driver.DCConfig {
	v := b.Voltmeter
	if v == nil {
		return driver.DCConfig{}
	}
	def := 1.0 // before the profile is resolved
	if v.DMM != nil {
		def = DefaultNPLC(v.DMM.DC.NPLC)
	}
	cfg := driver.DCConfig{RangeV: v.RangeV, Aperture: aperture(v.NPLC, v.ApertureS, def)}
	if cfg.RangeV == 0 && v.DMM != nil && b.Converter != nil && b.Converter.Spec != nil {
		c := b.Converter.Spec
		cfg.RangeV, _ = PickRange(v.DMM.DC.RangesV, c.DCFullScaleV*c.OverFraction, v.DMM.RangeHeadroom)
	}
	return cfg
}

// ACConfig returns the configuration of an AC meter role.
func (r *ACMeterRole) ACConfig() driver.ACConfig {
	return driver.ACConfig{RangeVrms: r.RangeVrms, Aperture: aperture(r.NPLC, r.ApertureS, 0)}
}

// aperture returns the integration time given, or defNPLC (0: leave the
// instrument's own).
func aperture(nplc, s, defNPLC float64) driver.Aperture {
	if s > 0 {
		return driver.Aperture{Seconds: s}
	}
	if nplc == 0 {
		nplc = defNPLC
	}
	return driver.Aperture{NPLC: nplc}
}

// ReadFunc reads a profile named by a bench file. name is the profile
// path already joined to the bench file's directory.
type ReadFunc func(name string) ([]byte, error)

// LoadBench reads and validates a bench file and the profiles it names
// from disk; profile paths are relative to the bench file.
func LoadBench(file string) (*BenchFile, error) {
	data, err := os.ReadFile(file)
	if err != nil {
		return nil, &FieldError{File: file, Msg: "cannot read bench file", Err: err}
	}
	dir := filepath.Dir(file)
	return DecodeBench(file, data, func(name string) ([]byte, error) { return os.ReadFile(name) }, func(rel string) string {
		if filepath.IsAbs(rel) {
			return rel
		}
		return filepath.Join(dir, filepath.FromSlash(rel))
	})
}

// LoadBenchFS is LoadBench on a file system such as the embedded configs.
func LoadBenchFS(fsys fs.FS, name string) (*BenchFile, error) {
	data, err := fs.ReadFile(fsys, name)
	if err != nil {
		return nil, &FieldError{File: name, Msg: "cannot read bench file", Err: err}
	}
	dir := path.Dir(name)
	return DecodeBench(name, data, func(n string) ([]byte, error) { return fs.ReadFile(fsys, n) }, func(rel string) string {
		return path.Join(dir, rel)
	})
}

// DecodeBench decodes and validates a bench file. read reads a profile by
// the name resolve gives for the path written in the bench file.
func DecodeBench(file string, data []byte, read ReadFunc, resolve func(rel string) string) (*BenchFile, error) {
	b := &BenchFile{File: file, Raw: append([]byte(nil), data...)}
	if err := decodeStrict(file, data, b); err != nil {
		return nil, err
	}
	p := newProblems(file, data)
	b.lines = p.lines
	if !p.lines.has("sim") {
		b.Sim = nil
	} else if b.Sim == nil {
		b.Sim = map[string]any{}
	}
	b.validate(p)
	if err := p.err(); err != nil {
		return nil, err
	}
	// Profiles, each named by the role key that refers to it.
	var errs []error
	load := func(key, rel, kind string, into func(name string, data []byte) error) {
		if rel == "" {
			return
		}
		name := resolve(rel)
		d, err := read(name)
		if err != nil {
			errs = append(errs, &FieldError{File: file, Line: p.lines.line(key), Field: key, Value: formatValue(rel), Msg: "cannot read profile", Err: err})
			return
		}
		k, err := kindOf(name, d)
		if err != nil {
			errs = append(errs, err)
			return
		}
		if k != kind {
			errs = append(errs, &FieldError{File: file, Line: p.lines.line(key), Field: key, Value: formatValue(rel),
				Msg: fmt.Sprintf("profile %s has kind %q", name, k), Allowed: fmt.Sprintf("a profile of kind %q", kind)})
			return
		}
		if err := into(name, d); err != nil {
			errs = append(errs, err)
		}
	}
	if r := b.Generator; r != nil {
		load("generator.profile", r.Profile, KindGenerator, func(n string, d []byte) (err error) {
			r.Generator, err = DecodeGenerator(n, d)
			return err
		})
	}
	if r := b.Voltmeter; r != nil {
		load("voltmeter.profile", r.Profile, KindDMM, func(n string, d []byte) (err error) {
			r.DMM, err = DecodeDMM(n, d)
			return err
		})
	}
	if r := b.Converter; r != nil {
		load("converter.profile", r.Profile, KindConverter, func(n string, d []byte) (err error) {
			r.Spec, err = DecodeConverter(n, d)
			return err
		})
	}
	if r := b.Switch; r != nil {
		load("switch.profile", r.Profile, KindSwitch, func(n string, d []byte) (err error) {
			r.Switch, err = DecodeSwitch(n, d)
			return err
		})
	}
	for _, m := range []struct {
		key string
		r   *ACMeterRole
	}{{"dmm", b.DMM}, {"vin", b.Vin}} {
		if m.r == nil {
			continue
		}
		r := m.r
		load(m.key+".profile", r.Profile, KindDMM, func(n string, d []byte) (err error) {
			r.DMM, err = DecodeDMM(n, d)
			return err
		})
	}
	if len(errs) > 0 {
		return nil, errors.Join(errs...)
	}
	p = newProblems(file, data)
	b.crossCheck(p)
	if err := p.err(); err != nil {
		return nil, err
	}
	return b, nil
}

// BenchFile bounds.
const (
	maxTimeScale = 1e6
	maxBenchVrms = 100.0
)

func (b *BenchFile) validate(p *problems) {
	switch b.VoltmeterMode {
	case ModeConverter, ModeACDMM:
	default:
		p.add("voltmeter_mode", b.VoltmeterMode, `"converter" (DC voltmeter + converter) or "ac-dmm"`, "unknown voltmeter mode")
	}
	if b.TimeScale != 0 {
		if b.Sim == nil {
			p.add("time_scale", b.TimeScale, "only with a [sim] table (a real bench runs in real time)", "time scale on a real bench")
		} else if !finite(b.TimeScale) || b.TimeScale < 1 || b.TimeScale > maxTimeScale {
			p.add("time_scale", b.TimeScale, fmt.Sprintf("1 to %g", maxTimeScale), "bad time scale")
		}
	}
	if b.TimeScale == 0 {
		b.TimeScale = 1
	}
	l := b.Limits
	if !finite(l.MinFreqHz) || l.MinFreqHz <= 0 {
		p.add("limits.min_freq_hz", l.MinFreqHz, "more than 0 Hz", "bad frequency limit")
	}
	if !finite(l.MaxFreqHz) || l.MaxFreqHz <= l.MinFreqHz || l.MaxFreqHz > maxProfileFreqHz {
		p.add("limits.max_freq_hz", l.MaxFreqHz, fmt.Sprintf("above limits.min_freq_hz (%g), at most %g Hz", l.MinFreqHz, maxProfileFreqHz), "bad frequency limit")
	}
	if !finite(l.MaxVrms) || l.MaxVrms <= 0 || l.MaxVrms > maxBenchVrms {
		p.add("limits.max_vrms", l.MaxVrms, fmt.Sprintf("more than 0, at most %g Vrms: the largest amplitude the DUT may receive", maxBenchVrms), "bad amplitude limit")
	}
	if !finite(l.MinVrms) || l.MinVrms < 0 || l.MinVrms >= l.MaxVrms {
		p.add("limits.min_vrms", l.MinVrms, "0 or more, below limits.max_vrms", "bad amplitude limit")
	}
	checkRole := func(sect string, present bool, prof, addr string, needAddr bool) {
		if !present {
			return
		}
		if strings.TrimSpace(prof) == "" {
			p.add(sect+".profile", prof, "the path of an instrument profile, relative to the bench file", "missing profile")
		}
		if !needAddr {
			return
		}
		b.checkAddress(p, sect+".address", addr)
	}
	checkRole("generator", b.Generator != nil, roleProfile(b.Generator), roleAddress(b.Generator), true)
	checkRole("switch", b.Switch != nil, roleProfile(b.Switch), roleAddress(b.Switch), true)
	if v := b.Voltmeter; v != nil {
		checkRole("voltmeter", true, v.Profile, v.Address, true)
		checkMeter(p, "voltmeter", v.RangeV, "range_v", v.NPLC, v.ApertureS, false)
	}
	if c := b.Converter; c != nil {
		checkRole("converter", true, c.Profile, "", false)
	}
	for _, m := range []struct {
		key string
		r   *ACMeterRole
	}{{"dmm", b.DMM}, {"vin", b.Vin}} {
		if m.r == nil {
			continue
		}
		checkRole(m.key, true, m.r.Profile, m.r.Address, true)
		checkMeter(p, m.key, m.r.RangeVrms, "range_vrms", m.r.NPLC, m.r.ApertureS, true)
		if m.key == "vin" && m.r.Address == AddressSim {
			p.add("vin.address", m.r.Address, "a real instrument address (the simulated bench has no Vin channel)", "no simulated Vin channel")
		}
	}
	if b.Generator == nil {
		p.add("generator", nil, "a [generator] table with profile and address", "missing role")
	}
	switch b.VoltmeterMode {
	case ModeConverter:
		if b.Voltmeter == nil {
			p.add("voltmeter", nil, `a [voltmeter] table when voltmeter_mode = "converter"`, "missing role")
		}
		if b.Converter == nil {
			p.add("converter", nil, `a [converter] table when voltmeter_mode = "converter"`, "missing role")
		}
		if b.DMM != nil {
			p.add("dmm", nil, `no [dmm] when voltmeter_mode = "converter"`, "role not used in this mode")
		}
	case ModeACDMM:
		if b.DMM == nil {
			p.add("dmm", nil, `a [dmm] table when voltmeter_mode = "ac-dmm"`, "missing role")
		}
		for _, r := range []struct {
			key     string
			present bool
		}{{"voltmeter", b.Voltmeter != nil}, {"converter", b.Converter != nil}, {"switch", b.Switch != nil}} {
			if r.present {
				p.add(r.key, nil, `no [`+r.key+`] when voltmeter_mode = "ac-dmm"`, "role not used in this mode")
			}
		}
	}
}

func (b *BenchFile) checkAddress(p *problems, key, addr string) {
	if addr == "" {
		p.add(key, addr, "tcp://host[:port], serial:///dev/X?baud=.., usbtmc:///dev/usbtmcN or \"sim\"", "missing address")
		return
	}
	if addr == AddressSim {
		if b.Sim == nil {
			p.add(key, addr, "\"sim\" only with a [sim] table", "no simulated bench")
		}
		return
	}
	if _, err := transport.ParseAddress(addr); err != nil {
		p.addErr(key, addr, "", "bad address", err)
	}
}

func checkMeter(p *problems, sect string, rng float64, rangeKey string, nplc, apS float64, needRange bool) {
	if !finite(rng) || rng < 0 || (needRange && rng == 0) {
		allowed := "0 (chosen from the converter) or a range of the profile"
		if needRange {
			allowed = "a range of the profile"
		}
		p.add(sect+"."+rangeKey, rng, allowed, "bad range")
	}
	if !finite(nplc) || nplc < 0 {
		p.add(sect+".nplc", nplc, "more than 0 power-line cycles", "bad NPLC")
	}
	if !finite(apS) || apS < 0 {
		p.add(sect+".aperture_s", apS, "more than 0 seconds", "bad aperture")
	}
	if nplc > 0 && apS > 0 {
		p.add(sect+".aperture_s", apS, "either nplc or aperture_s, not both", "two integration times")
	}
}

// crossCheck checks the bench against its resolved profiles.
func (b *BenchFile) crossCheck(p *problems) {
	if g := b.Generator; g != nil && g.Generator != nil {
		gp := g.Generator
		if b.Limits.MinFreqHz < gp.Limits.MinFreqHz || b.Limits.MaxFreqHz > gp.Limits.MaxFreqHz {
			// Allowed but narrowed; the tighter limits apply. Refuse only
			// a bench range wholly outside the instrument.
			if b.Limits.MinFreqHz >= gp.Limits.MaxFreqHz || b.Limits.MaxFreqHz <= gp.Limits.MinFreqHz {
				p.add("limits", nil, fmt.Sprintf("a frequency range overlapping the generator's %g to %g Hz", gp.Limits.MinFreqHz, gp.Limits.MaxFreqHz), "no usable frequency")
			}
		}
	}
	if c := b.Converter; c != nil && c.Spec != nil {
		if c.Spec.Selection == SelectRemote && b.Switch == nil {
			p.add("switch", nil, fmt.Sprintf("a [switch] table: converter profile %s selects its range remotely", c.Spec.File), "missing role")
		}
		if s := b.Switch; s != nil && s.Switch != nil {
			for i, r := range c.Spec.Ranges {
				if r.Channel != 0 && (r.Channel < s.Switch.MinChannel || r.Channel > s.Switch.MaxChannel) {
					p.add("converter.profile", c.Profile, fmt.Sprintf("channels %d to %d of switch profile %s", s.Switch.MinChannel, s.Switch.MaxChannel, s.Switch.File),
						fmt.Sprintf("ranges[%d].channel %d is not on the switch", i, r.Channel))
				}
			}
		}
		if c.Spec.Selection == SelectOperator && b.Switch != nil {
			p.add("switch", nil, fmt.Sprintf("no [switch]: converter profile %s is operator-selected", c.Spec.File), "role not used")
		}
	}
	if v := b.Voltmeter; v != nil && v.DMM != nil {
		checkMeterProfile(p, "voltmeter", v.RangeV, "range_v", v.NPLC, v.ApertureS, DefaultNPLC(v.DMM.DC.NPLC), v.DMM.DC.RangesV, v.DMM.DC.NPLC, v.DMM.DC.MinApertureS, v.DMM.DC.MaxApertureS)
		if v.RangeV == 0 && b.Converter != nil && b.Converter.Spec != nil {
			c := b.Converter.Spec
			if _, ok := PickRange(v.DMM.DC.RangesV, c.DCFullScaleV*c.OverFraction, v.DMM.RangeHeadroom); !ok {
				p.add("voltmeter.range_v", v.RangeV, fmt.Sprintf("a DC range holding %g V (converter over-range output)", c.DCFullScaleV*c.OverFraction), "no DC range is large enough")
			}
		}
	}
	for _, m := range []struct {
		key string
		r   *ACMeterRole
	}{{"dmm", b.DMM}, {"vin", b.Vin}} {
		if m.r == nil || m.r.DMM == nil {
			continue
		}
		ac := m.r.DMM.AC
		if ac == nil {
			p.add(m.key+".profile", m.r.Profile, "a DMM profile with an [ac] table", "profile cannot measure AC")
			continue
		}
		checkMeterProfile(p, m.key, m.r.RangeVrms, "range_vrms", m.r.NPLC, m.r.ApertureS, 0, ac.RangesVrms, ac.NPLC, ac.MinApertureS, ac.MaxApertureS)
	}
}

func checkMeterProfile(p *problems, sect string, rng float64, rangeKey string, nplc, apS, defNPLC float64, ranges, nplcs []float64, minAp, maxAp float64) {
	if rng > 0 && !contains(ranges, rng) {
		p.add(sect+"."+rangeKey, rng, "one of "+formatValue(ranges), "not a range of the profile")
	}
	if apS > 0 && (apS < minAp || apS > maxAp) {
		p.add(sect+".aperture_s", apS, fmt.Sprintf("%g to %g s", minAp, maxAp), "aperture not available")
	}
	if apS == 0 {
		n := nplc
		if n == 0 {
			n = defNPLC
		}
		if n > 0 && len(nplcs) == 0 {
			p.add(sect+".nplc", n, "absent: the profile sets no NPLC (the instrument's own integration time is used)", "NPLC not available")
		} else if n > 0 && !contains(nplcs, n) {
			p.add(sect+".nplc", n, "one of "+formatValue(nplcs), "NPLC not available")
		}
	}
}

func roleProfile(r *InstrumentRole) string {
	if r == nil {
		return ""
	}
	return r.Profile
}

func roleAddress(r *InstrumentRole) string {
	if r == nil {
		return ""
	}
	return r.Address
}
