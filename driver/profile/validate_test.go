package profile_test

import (
	"errors"
	"fmt"
	"strings"
	"testing"
	"testing/fstest"

	"rolloff/configs"
	"rolloff/configs/configstest"
	"rolloff/driver/profile"
	"rolloff/driver/sim"
)

// edit applies (old, new) replacements to an embedded file; every old
// text must be present.
func edit(t *testing.T, name string, edits ...string) string {
	t.Helper()
	data, err := configs.ReadFile(name)
	if err != nil {
		t.Fatal(err)
	}
	s := string(data)
	for i := 0; i+1 < len(edits); i += 2 {
		if !strings.Contains(s, edits[i]) {
			t.Fatalf("%s: %q not found", name, edits[i])
		}
		s = strings.Replace(s, edits[i], edits[i+1], 1)
	}
	return s
}

// fieldErrors flattens the FieldErrors of a (joined) error.
func fieldErrors(err error) []*profile.FieldError {
	var out []*profile.FieldError
	var walk func(error)
	walk = func(e error) {
		if e == nil {
			return
		}
		if fe, ok := e.(*profile.FieldError); ok {
			out = append(out, fe)
			return
		}
		if j, ok := e.(interface{ Unwrap() []error }); ok {
			for _, x := range j.Unwrap() {
				walk(x)
			}
			return
		}
		walk(errors.Unwrap(e))
	}
	walk(err)
	return out
}

// lineOf returns the 1-based line of the first line of text containing
// marker.
func lineOf(t *testing.T, text, marker string) int {
	t.Helper()
	lines := strings.Split(text, "\n")
	for i, l := range lines {
		if strings.TrimSpace(l) == marker {
			return i + 1
		}
	}
	for i, l := range lines {
		if strings.Contains(l, marker) {
			return i + 1
		}
	}
	t.Fatalf("marker %q not in the document", marker)
	return 0
}

type badCase struct {
	name  string
	file  string   // embedded file edited
	edits []string // old, new pairs
	key   string   // key the error must name
	line  string   // text on the line the error must name ("" = no line check)
	value string   // text the error must quote ("" = no check)
	errIn string   // file the error must name (default: file)
}

func checkBad(t *testing.T, c badCase, text string, err error) {
	t.Helper()
	if err == nil {
		t.Fatalf("accepted; want an error naming %s", c.key)
	}
	wantFile := c.errIn
	if wantFile == "" {
		wantFile = c.file
	}
	var found *profile.FieldError
	for _, fe := range fieldErrors(err) {
		if fe.Field == c.key && fe.File == wantFile {
			found = fe
			break
		}
	}
	if found == nil {
		t.Fatalf("error does not name %s key %q: %v", wantFile, c.key, err)
	}
	if c.line != "" {
		if want := lineOf(t, text, c.line); found.Line != want {
			t.Errorf("line %d, want %d: %v", found.Line, want, found)
		}
	}
	if c.value != "" && !strings.Contains(found.Error(), c.value) {
		t.Errorf("error %q does not quote %q", found, c.value)
	}
	t.Log(found)
	msg := found.Error()
	if !strings.HasPrefix(msg, wantFile) || !strings.Contains(msg, c.key) {
		t.Errorf("message %q does not start with the file and name the key", msg)
	}
}

// TestProfileValidation: each invalid profile is refused with an error
// naming the file, the key, its line and the bad value.
func TestProfileValidation(t *testing.T) {
	const gen, dmm, conv, sw = "generator-scpi.toml", "dmm-scpi.toml", "converter-10db.toml", "switch-scpi.toml"
	cases := []badCase{
		{name: "unknown top-level key", file: gen, edits: []string{"name = \"Generic", "colour = \"red\"\nname = \"Generic"}, key: "colour", line: "colour ="},
		{name: "unknown key in a table", file: gen, edits: []string{"unit = \"vrms\"", "unit = \"vrms\"\nunits = \"vrms\""}, key: "output.units", line: "units ="},
		{name: "unknown table", file: dmm, edits: []string{"[framing]", "[framing2]\nx = 1\n[framing]"}, key: "framing2", line: "[framing2]"},
		{name: "bad unit", file: gen, edits: []string{`unit = "vrms"`, `unit = "volts"`}, key: "output.unit", line: `unit = "volts"`, value: `"volts"`},
		{name: "template injection", file: gen, edits: []string{`set_frequency = "SOURce:FREQuency {freq_hz}"`, `set_frequency = "FREQ {freq_hz};*RST"`}, key: "commands.set_frequency", line: "set_frequency =", value: `FREQ {freq_hz};*RST`},
		{name: "quote in template", file: gen, edits: []string{`output_on = "OUTPut ON"`, `output_on = "OUTPut 'ON'"`}, key: "commands.output_on", line: "output_on ="},
		{name: "terminator in template", file: sw, edits: []string{`open_all = "ROUTe:OPEN:ALL"`, `open_all = "ROUTe:OPEN:ALL\n*RST"`}, key: "commands.open_all", line: "open_all ="},
		{name: "injection in an init list", file: gen, edits: []string{"init = []", `init = ["*RST", "*CLS;*RST"]`}, key: "commands.init[1]", line: "init = ["},
		{name: "unknown placeholder", file: gen, edits: []string{`set_amplitude = "SOURce:VOLTage {amplitude}"`, `set_amplitude = "SOURce:VOLTage {vrms}"`}, key: "commands.set_amplitude", line: "set_amplitude =", value: "{vrms}"},
		{name: "missing placeholder", file: sw, edits: []string{`close = "ROUTe:CLOSe (@{channel})"`, `close = "ROUTe:CLOSe (@1)"`}, key: "commands.close", line: "close ="},
		{name: "missing command", file: gen, edits: []string{`output_off = "OUTPut OFF"`, `output_off = ""`}, key: "commands.output_off", line: "output_off ="},
		{name: "bad terminator", file: gen, edits: []string{`write_terminator = "\n"`, `write_terminator = "\t"`}, key: "framing.write_terminator", line: "write_terminator ="},
		{name: "negative query time-out", file: dmm, edits: []string{"query_timeout_s = 5.0", "query_timeout_s = -1.0"}, key: "framing.query_timeout_s", line: "query_timeout_s =", value: "-1"},
		{name: "wrong kind", file: gen, edits: []string{`kind = "scpi-generator"`, `kind = "scpi-dmm"`}, key: "kind", line: "kind ="},
		{name: "dBm into a hi-z load", file: gen, edits: []string{`unit = "vrms"`, "unit = \"dbm\"\ndbm_reference = \"load\""}, key: "output.load", line: "load = \"hi-z\""},
		{name: "dBm without its reference", file: gen, edits: []string{`unit = "vrms"`, `unit = "dbm"`, `load = "hi-z"`, `load = 50`}, key: "output.dbm_reference"},
		{name: "bad dBm reference", file: gen, edits: []string{`unit = "vrms"`, "unit = \"dbm\"\ndbm_reference = \"50 ohm\""}, key: "output.dbm_reference", line: "dbm_reference =", value: `"50 ohm"`},
		{name: "dBm reference without dBm", file: gen, edits: []string{`unit = "vrms"`, "unit = \"vrms\"\ndbm_reference = 50"}, key: "output.dbm_reference", line: "dbm_reference ="},
		{name: "literal level in an apply command", file: gen, edits: []string{`set_frequency = "SOURce:FREQuency {freq_hz}"`, `set_frequency = "APPLy:SINusoid {freq_hz},9.9,0"`}, key: "commands.set_frequency", line: "set_frequency =", value: "9.9"},
		{name: "literal level in init", file: gen, edits: []string{"init = []", `init = ["*CLS", "SOURce1:VOLTage 5"]`}, key: "commands.init[1]", line: "init = ["},
		{name: "instrument-chosen level", file: gen, edits: []string{`output_on = "OUTPut ON"`, `output_on = "APPLy:SINusoid DEF,MAXimum"`}, key: "commands.output_on", line: "output_on ="},
		{name: "multiplier after a placeholder", file: gen, edits: []string{`set_frequency = "SOURce:FREQuency {freq_hz}"`, `set_frequency = "SOURce:FREQuency {freq_hz} KHZ"`}, key: "commands.set_frequency", line: "set_frequency ="},
		{name: "digits glued to a placeholder", file: gen, edits: []string{`set_amplitude = "SOURce:VOLTage {amplitude}"`, `set_amplitude = "SOURce:VOLTage {amplitude}0"`}, key: "commands.set_amplitude", line: "set_amplitude ="},
		{name: "offset never sent", file: gen, edits: []string{"offset_v = 0.0", "offset_v = 0.1"}, key: "output.offset_v", line: "offset_v ="},
		{name: "bad load", file: gen, edits: []string{`dut_load = "hi-z"`, `dut_load = "open"`}, key: "output.dut_load", line: "dut_load = \"open\"", value: `"open"`},
		{name: "negative load", file: gen, edits: []string{`load = "hi-z"`, `load = -50`}, key: "output.load", line: "load = -50"},
		{name: "string for a number", file: gen, edits: []string{"max_freq_hz = 20e6", `max_freq_hz = "fast"`}, key: "limits.max_freq_hz", line: "max_freq_hz ="},
		{name: "frequency range reversed", file: gen, edits: []string{"max_freq_hz = 20e6", "max_freq_hz = 0.0001"}, key: "limits.max_freq_hz", line: "max_freq_hz ="},
		{name: "DC ranges not ascending", file: dmm, edits: []string{"ranges_v = [0.1, 1.0, 10.0", "ranges_v = [1.0, 0.1, 10.0"}, key: "dc.ranges_v", line: "ranges_v ="},
		{name: "bad line frequency", file: dmm, edits: []string{"line_hz = 50", "line_hz = 55"}, key: "line_hz", line: "line_hz = 55", value: "55"},
		{name: "accuracy on no range", file: dmm, edits: []string{"range_v = 0.1\nreading_pct", "range_v = 0.2\nreading_pct"}, key: "dc.accuracy[0].range_v", line: "range_v = 0.2"},
		{name: "NPLC not ascending", file: dmm, edits: []string{"nplc = [0.02, 0.2, 1.0", "nplc = [0.2, 0.02, 1.0"}, key: "dc.nplc", line: "nplc = [0.2"},
		{name: "burst without a sample count", file: dmm, edits: []string{`set_sample_count = "SAMPle:COUNt {count}"`, `set_sample_count = ""`}, key: "set_sample_count", line: "set_sample_count ="},
		{name: "negative time constant", file: conv, edits: []string{"time_constant_s = 1.0", "time_constant_s = -2.0"}, key: "ranges[0].time_constant_s", line: "time_constant_s = -2.0", value: "-2"},
		{name: "ranges not ascending", file: conv, edits: []string{"full_scale_vrms = 0.0031622776601683794", "full_scale_vrms = 0.0009"}, key: "ranges[1].full_scale_vrms", line: "full_scale_vrms = 0.0009"},
		{name: "duplicate range name", file: conv, edits: []string{`name = "3.162 mV"`, `name = "1 mV"`}, key: "ranges[1].name"},
		{name: "unknown selection", file: conv, edits: []string{`selection = "operator"`, `selection = "auto"`}, key: "selection", line: `selection = "auto"`},
		{name: "remote without channels", file: conv, edits: []string{`selection = "operator"`, `selection = "remote"`}, key: "ranges[0].channel"},
		{name: "hold longer than its interval", file: conv, edits: []string{"hold_s = 0.5", "hold_s = 90.0"}, key: "hold_s", line: "hold_s = 90"},
		{name: "window below zero", file: conv, edits: []string{"under_fraction = 0.1", "under_fraction = -0.1"}, key: "under_fraction", line: "under_fraction = -0.1"},
		{name: "over-range below full scale", file: conv, edits: []string{"over_fraction = 1.05", "over_fraction = 0.9"}, key: "over_fraction", line: "over_fraction = 0.9"},
		{name: "accuracy names no range", file: conv, edits: []string{`ranges = ["1 mV", "3.162 mV"]`, `ranges = ["1 mV", "3 mV"]`}, key: "accuracy[0].ranges[1]", line: `ranges = ["1 mV", "3 mV"]`, value: `"3 mV"`},
		{name: "switch channels reversed", file: sw, edits: []string{"max_channel = 16", "max_channel = 0"}, key: "max_channel", line: "max_channel = 0"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			text := edit(t, c.file, c.edits...)
			var err error
			switch c.file {
			case gen:
				_, err = profile.DecodeGenerator(c.file, []byte(text))
			case dmm:
				_, err = profile.DecodeDMM(c.file, []byte(text))
			case conv:
				_, err = profile.DecodeConverter(c.file, []byte(text))
			case sw:
				_, err = profile.DecodeSwitch(c.file, []byte(text))
			}
			checkBad(t, c, text, err)
			if _, err2 := profile.Decode(c.file, []byte(text)); err2 == nil {
				t.Error("Decode (by kind) accepted it")
			}
		})
	}
}

// benchFS returns the embedded configs with edits applied to one file
// (pairs of old, new) and extra files added.
func benchFS(t *testing.T, file string, edits []string, extra map[string]string) fstest.MapFS {
	t.Helper()
	m := configstest.MapFS(t)
	if file != "" {
		m[file] = &fstest.MapFile{Data: []byte(edit(t, file, edits...))}
	}
	for n, s := range extra {
		m[n] = &fstest.MapFile{Data: []byte(s)}
	}
	return m
}

// TestBenchValidation: invalid bench files, and bench files naming
// invalid profiles, are refused naming the file and key.
func TestBenchValidation(t *testing.T) {
	const ex = "bench-example.toml"
	cases := []badCase{
		{name: "missing address", file: ex, edits: []string{`address = "tcp://192.0.2.20:5025"`, `address = ""`}, key: "generator.address", line: `address = ""`},
		{name: "no address key", file: ex, edits: []string{"address = \"tcp://192.0.2.21:5025\"\n", ""}, key: "voltmeter.address", line: "[voltmeter]"},
		{name: "bad address scheme", file: ex, edits: []string{`address = "tcp://192.0.2.20:5025"`, `address = "http://192.0.2.20"`}, key: "generator.address", line: `"http://`, value: "http://192.0.2.20"},
		{name: "bad port", file: ex, edits: []string{`address = "tcp://192.0.2.20:5025"`, `address = "tcp://192.0.2.20:99999"`}, key: "generator.address", line: ":99999"},
		{name: "sim address without [sim]", file: ex, edits: []string{`address = "tcp://192.0.2.20:5025"`, `address = "sim"`}, key: "generator.address", line: `address = "sim"`},
		{name: "time scale on a real bench", file: ex, edits: []string{`voltmeter_mode = "converter"`, "voltmeter_mode = \"converter\"\ntime_scale = 10.0"}, key: "time_scale", line: "time_scale = 10"},
		{name: "unknown key in a role", file: ex, edits: []string{"nplc = 1\n", "nplc = 1\nfilter = \"slow\"\n"}, key: "voltmeter.filter", line: "filter ="},
		{name: "unknown role", file: ex, edits: []string{"\n[converter]\n", "\n[scope]\nprofile = \"x.toml\"\n[converter]\n"}, key: "scope", line: "[scope]"},
		{name: "bad voltmeter mode", file: ex, edits: []string{`voltmeter_mode = "converter"`, `voltmeter_mode = "both"`}, key: "voltmeter_mode", line: "voltmeter_mode = \"both\""},
		{name: "no amplitude limit", file: ex, edits: []string{"max_vrms = 1.0", "max_vrms = 0.0"}, key: "limits.max_vrms", line: "max_vrms = 0.0"},
		{name: "NPLC the DMM lacks", file: ex, edits: []string{"nplc = 1\n", "nplc = 3\n"}, key: "voltmeter.nplc", line: "nplc = 3"},
		{name: "nplc and aperture", file: ex, edits: []string{"nplc = 1\n", "nplc = 1\naperture_s = 0.02\n"}, key: "voltmeter.aperture_s", line: "aperture_s ="},
		{name: "missing profile file", file: ex, edits: []string{`profile = "generator-scpi.toml"`, `profile = "no-such.toml"`}, key: "generator.profile", line: `"no-such.toml"`, value: "no-such.toml"},
		{name: "profile of the wrong kind", file: ex, edits: []string{`profile = "generator-scpi.toml"`, `profile = "dmm-scpi.toml"`}, key: "generator.profile", line: `profile = "dmm-scpi.toml"`},
		{name: "converter mode without voltmeter", file: "minimal.toml", key: "voltmeter"},
		{name: "minimal bench with a bad role address", file: "minimal.toml", edits: []string{"[converter]", "[voltmeter]\nprofile = \"dmm-scpi.toml\"\naddress = \"serial://dev/ttyS0\"\n[converter]"}, key: "voltmeter.address", line: `"serial://dev/ttyS0"`},
		{name: "ac-dmm mode with converter roles", file: ex, edits: []string{`voltmeter_mode = "converter"`, `voltmeter_mode = "ac-dmm"`}, key: "dmm"},
		{name: "unknown key in [sim]", file: "sim-bench.toml", edits: []string{"clip_v = 12.0", "clip_v = 12.0\nclip_volts = 12.0"}, key: "sim.dut.clip_volts", line: "clip_volts ="},
		{name: "value the simulator refuses", file: "sim-bench.toml", edits: []string{"gain_db = 20.0", "gain_db = 500.0"}, key: "sim.dut.gain_db", line: "gain_db = 500", value: "500"},
		{name: "bad simulated filter section", file: "sim-bench.toml", edits: []string{`kind = "highpass1"`, `kind = "notch"`}, key: "sim.dut.sections[0].kind", line: `kind = "notch"`},
		{name: "simulator ranges differ from the profile", file: "sim-bench.toml", edits: []string{"initial_range = 6\n", "initial_range = 0\n[[sim.converter.ranges]]\nname = \"1 V\"\nfull_scale_vrms = 1.0\ntime_constant_s = 0.5\n"}, key: "sim.converter.ranges", line: "[[sim.converter.ranges]]"},
		{name: "two time scales", file: "sim-bench.toml", edits: []string{"seed = 1\n", "seed = 1\ntime_scale = 20.0\n"}, key: "sim.time_scale", line: "time_scale = 20"},
		{name: "simulator line frequency disagrees", file: "sim-bench.toml", edits: []string{"seed = 1\n", "seed = 1\nline_hz = 60.0\n"}, key: "sim.line_hz", line: "line_hz = 60"},
		{name: "no simulated Vin", file: "sim-bench.toml", edits: []string{"\n[switch]\n", "\n[vin]\nprofile = \"dmm-scpi.toml\"\naddress = \"sim\" # vin\nrange_vrms = 1\n[switch]\n"}, key: "vin.address", line: `address = "sim" # vin`},
		{name: "remote converter without a switch", file: ex, edits: []string{`profile = "converter-10db.toml"`, `profile = "conv-remote.toml"`}, key: "switch"},
	}
	remote := edit(t, "converter-10db.toml", `selection = "operator"`, `selection = "remote"`)
	for i := 1; strings.Contains(remote, "[[ranges]]\nname"); i++ {
		remote = strings.Replace(remote, "[[ranges]]\nname", fmt.Sprintf("[[ranges]]\nchannel = %d\nname", i), 1)
	}
	const minimal = `voltmeter_mode = "converter"
[limits]
min_freq_hz = 10
max_freq_hz = 1000
max_vrms = 1
[generator]
profile = "generator-scpi.toml"
address = "tcp://127.0.0.1"
[converter]
profile = "converter-10db.toml"
`
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			extra := map[string]string{"conv-remote.toml": remote}
			var text string
			if c.file == "minimal.toml" {
				text = minimal
				for i := 0; i+1 < len(c.edits); i += 2 {
					text = strings.Replace(text, c.edits[i], c.edits[i+1], 1)
				}
				extra["minimal.toml"] = text
			} else {
				text = edit(t, c.file, c.edits...)
			}
			fsys := benchFS(t, "", nil, extra)
			fsys[c.file] = &fstest.MapFile{Data: []byte(text)}
			b, err := profile.LoadBenchFS(fsys, c.file)
			if err == nil && b.Sim != nil {
				// The [sim] table is the simulator's to check.
				_, err = sim.FromBenchFile(b)
			}
			checkBad(t, c, text, err)
		})
	}
	// A bad value inside a profile the bench names is reported in the
	// profile's file.
	t.Run("error inside a named profile", func(t *testing.T) {
		c := badCase{file: "generator-scpi.toml", edits: []string{`set_frequency = "SOURce:FREQuency {freq_hz}"`, `set_frequency = "FREQ {freq_hz};*RST"`}, key: "commands.set_frequency", line: "set_frequency ="}
		_, err := profile.LoadBenchFS(benchFS(t, c.file, c.edits, nil), ex)
		checkBad(t, c, edit(t, c.file, c.edits...), err)
	})
}

// TestBenchExampleResolved: the example bench resolves its profiles and
// derives the voltmeter configuration from the converter (1 V × 1.05
// over-range fits the DMM's 1 V range with 1.2 headroom).
func TestBenchExampleResolved(t *testing.T) {
	b, err := configs.LoadBench("bench-example.toml")
	if err != nil {
		t.Fatal(err)
	}
	if b.Sim != nil || b.TimeScale != 1 {
		t.Errorf("real bench: Sim %v, TimeScale %g", b.Sim, b.TimeScale)
	}
	if b.Converter.Spec == nil || b.Voltmeter.DMM == nil || b.Generator.Generator == nil {
		t.Fatal("profiles not resolved")
	}
	cfg := b.DCConfig()
	if cfg.RangeV != 1 || cfg.Aperture.NPLC != 1 {
		t.Errorf("DCConfig = %+v, want 1 V range, 1 NPLC", cfg)
	}
	if len(b.Raw) == 0 || !strings.Contains(string(b.Raw), "voltmeter_mode") {
		t.Error("Raw does not hold the bench file")
	}
}
