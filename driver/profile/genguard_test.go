package profile

import (
	"strings"
	"testing"
)

// TestGeneratorLiterals: a number in a command header is a numeric
// suffix (SCPI-1999 vol. 1 §6.2.5.2) and allowed; a number, or a level
// the instrument picks, among the parameters is refused.
func TestGeneratorLiterals(t *testing.T) {
	for _, c := range []struct {
		text string
		ok   bool
	}{
		{"SOURce1:VOLTage {amplitude}", true},
		{"OUTPut2:STATe ON", true},
		{":VOLT {amplitude} VRMS", true},
		{"*RST", true},
		{"*OPC?", true},
		{"SOURce1:FREQuency?", true},
		{"APPLy:SINusoid {freq_hz},{amplitude},{offset_v}", true},
		{"APPLy:SINusoid {freq_hz}HZ, {amplitude}VPP, {offset_v}V", true},
		{"OUTPut:LOAD INFinity", true},
		{"APPLy:SINusoid {freq_hz},9.9,0", false},
		{"SOURce:VOLTage 1E-1", false},
		{"SOURce:VOLTage .5", false},
		{"SOURce:VOLTage:OFFSet -2", false},
		{"SOURce:VOLTage #H10", false},
		{"SOURce:VOLTage MAX", false},
		{"SOURce:VOLTage maximum", false},
		{"SOURce:VOLTage DEF", false},
		{"SOURce:VOLTage:OFFSet UP", false},
		{"SOURce:FREQuency {freq_hz} KHZ", false},
		{"SOURce:VOLTage {amplitude}0", false},
		{"SOURce:VOLTage -{amplitude}", false},
		{"SOURce:VOLTage {amplitude} MV", false},
		{"SOUR1VOLT:3X {amplitude}", false},
	} {
		p := newProblems("g.toml", nil)
		checkLiterals(p, "commands.x", c.text)
		if got := p.err() == nil; got != c.ok {
			t.Errorf("%q: accepted %v, want %v (%v)", c.text, got, c.ok, p.err())
		}
		if !c.ok && p.err() != nil && !strings.Contains(p.err().Error(), "commands.x") {
			t.Errorf("%q: error %q does not name the key", c.text, p.err())
		}
	}
}
