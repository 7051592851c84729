package sim

import (
	"strings"
	"testing"
)

// readingsFor runs one command sequence on a fresh bench and returns the
// burst of readings. The signal is settled and its ripple negligible, so
// the readings are the settled value plus seeded noise. The hold is off:
// a held output freezes the instantaneous value, ripple included, so
// with it the readings would depend on timing at the ripple's level
// (1e-6 here).
func readingsFor(t *testing.T, seed uint64, dmmToo bool) string {
	cfg := DemoConfig()
	cfg.Seed = seed
	cfg.TimeScale = 2000
	cfg.Converter.HoldS = 0
	b := startBench(t, cfg)
	g := dial(t, b.Addr(RoleGenerator))
	v := dial(t, b.Addr(RoleVoltmeter))
	d := dial(t, b.Addr(RoleDMM))
	g.do("FREQ 100kHz;VOLT 0.05;OUTP ON")
	waitModel(b, 60)
	v.do("CONF:VOLT:DC 1;:VOLT:NPLC 10;:SAMP:COUN 5")
	var out []string
	for i := 0; i < 3; i++ {
		if dmmToo {
			d.query("MEAS:VOLT:AC?")
		}
		out = append(out, v.query("READ?"))
	}
	return strings.Join(out, ";")
}

// Same seed and commands → same readings; another seed → other noise;
// DMM readings in between do not disturb the voltmeter's noise (one
// stream per instrument).
func TestSeededReproducibility(t *testing.T) {
	a := readingsFor(t, 7, false)
	b := readingsFor(t, 7, false)
	c := readingsFor(t, 8, false)
	d := readingsFor(t, 7, true)
	if a != b {
		t.Errorf("same seed, different readings:\n%s\n%s", a, b)
	}
	if a == c {
		t.Errorf("different seeds, same readings: %s", a)
	}
	if a != d {
		t.Errorf("DMM activity changed the voltmeter noise:\n%s\n%s", a, d)
	}
	// The readings do carry noise (all fifteen differ).
	seen := map[string]bool{}
	for _, r := range strings.FieldsFunc(a, func(r rune) bool { return r == ',' || r == ';' }) {
		seen[r] = true
	}
	if len(seen) != 15 {
		t.Errorf("%d distinct readings of 15: %s", len(seen), a)
	}
}
