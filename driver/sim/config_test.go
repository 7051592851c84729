package sim

import (
	"errors"
	"math"
	"strings"
	"testing"

	"github.com/pelletier/go-toml/v2"
)

func TestDemoConfigValid(t *testing.T) {
	c := DemoConfig()
	if err := c.Validate(); err != nil {
		t.Fatal(err)
	}
	// 10 dB steps from 1 mV to 316.2 V.
	r := c.Converter.Ranges
	if len(r) != 12 || r[0].FullScaleVrms != 1e-3 || r[11].Name != "316.2 V" {
		t.Fatalf("ranges %v", r)
	}
	for i := 1; i < len(r); i++ {
		if got := r[i].FullScaleVrms / r[i-1].FullScaleVrms; got < 3.16227 || got > 3.16228 {
			t.Errorf("step %d: ratio %g, want √10 (10 dB)", i, got)
		}
	}
}

func TestValidateNamesKey(t *testing.T) {
	for _, tc := range []struct {
		mutate func(*Config)
		key    string
	}{
		{func(c *Config) { c.TimeScale = 0 }, "time_scale"},
		{func(c *Config) { c.DUT.Sections[1].Kind = "lowpass2"; c.DUT.Sections[1].Q = -1 }, "dut.sections[1].q"},
		{func(c *Config) { c.DUT.Sections[0].Kind = "bandstop" }, "dut.sections[0].kind"},
		{func(c *Config) { c.DUT.Sections[1].Order = 0 }, "dut.sections[1].order"},
		{func(c *Config) { c.Converter.Ranges[2].FullScaleVrms = 1e-4 }, "converter.ranges[2].full_scale_vrms"},
		{func(c *Config) { c.Converter.Ranges[0].TimeConstantS = 0 }, "converter.ranges[0].time_constant_s"},
		{func(c *Config) { c.Converter.HoldS = 2 }, "converter.hold_s"},
		{func(c *Config) { c.Converter.PostFilterS = -0.1 }, "converter.post_filter_s"},
		{func(c *Config) { c.Converter.PostFilterS = math.NaN() }, "converter.post_filter_s"},
		{func(c *Config) { c.Converter.InitialRange = 12 }, "converter.initial_range"},
		{func(c *Config) { c.Generator.ResetUnit = "AMPS" }, "generator.reset_unit"},
		{func(c *Config) { c.Generator.IDN = "no commas" }, "generator.idn"},
		{func(c *Config) { c.Generator.MaxFreqHz = 1e-4 }, "generator.max_freq_hz"},
		{func(c *Config) { c.Voltmeter.RangesV = []float64{1, 0.1} }, "voltmeter.ranges_v[1]"},
		{func(c *Config) { c.DMM.TimeConstantS = -1 }, "dmm.time_constant_s"},
		{func(c *Config) { c.Switch.IDN = "a,b,c,d\n" }, "switch.idn"},
	} {
		c := DemoConfig()
		tc.mutate(&c)
		err := c.Validate()
		var ce *ConfigError
		if !errors.As(err, &ce) || !errors.Is(err, ErrConfig) {
			t.Errorf("%s: error %v", tc.key, err)
			continue
		}
		if ce.Field != tc.key || ce.Allowed == "" || !strings.Contains(err.Error(), tc.key) {
			t.Errorf("error %q names %q, want %q", err, ce.Field, tc.key)
		}
		if _, err := New(c); err == nil {
			t.Errorf("%s: New accepted the bad config", tc.key)
		}
	}
}

// A bench file's [sim] table decodes into Config with a strict decoder:
// every key documented is a field, and unknown keys are refused.
func TestDecodeTOML(t *testing.T) {
	doc := `
seed = 42
time_scale = 20
[generator]
max_vrms = 2.5
load_ohm = 50
[dut]
gain_db = 6
clip_v = 0
[[dut.sections]]
kind = "butterworth-highpass"
freq_hz = 20
order = 3
[[dut.sections]]
kind = "lowpass2"
freq_hz = 30000
q = 0.7071
[converter]
hold_s = 0
[[converter.ranges]]
name = "1 V"
full_scale_vrms = 1
time_constant_s = 0.5
[voltmeter]
ranges_v = [1, 10]
[dmm]
bandwidth_hz = 0
[switch]
idn = "rolloff,SIM-SW-2,0002,1.1"
`
	c := DemoConfig()
	c.Converter.InitialRange = 0
	dec := toml.NewDecoder(strings.NewReader(doc))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&c); err != nil {
		t.Fatal(err)
	}
	if err := c.Validate(); err != nil {
		t.Fatal(err)
	}
	if c.Seed != 42 || c.TimeScale != 20 || c.Generator.LoadOhm != 50 || c.DUT.Sections[1].Q != 0.7071 ||
		c.DUT.Sections[0].Order != 3 || len(c.Converter.Ranges) != 1 || c.Converter.Ranges[0].TimeConstantS != 0.5 ||
		c.Switch.IDN != "rolloff,SIM-SW-2,0002,1.1" || c.LineHz != 50 {
		t.Errorf("decoded %+v", c)
	}
	bad := toml.NewDecoder(strings.NewReader("[dut]\ngain = 3\n"))
	bad.DisallowUnknownFields()
	if err := bad.Decode(&c); err == nil {
		t.Errorf("unknown key accepted")
	}
}
