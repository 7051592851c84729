package bench

import (
	"fmt"
	"math"
	"strings"
	"testing"
	"testing/fstest"

	"github.com/rs/zerolog"

	"rolloff/configs/configstest"
	"rolloff/driver"
	"rolloff/driver/profile"
)

// genCase is one way of driving the generator: the profile's unit and dBm
// reference, and the convention the simulated generator really follows.
type genCase struct {
	name    string
	edits   []string // edits of generator-scpi.toml
	simDBm  string   // [sim.generator] dbm_reference
	simOhm  float64  // [sim.generator] dbm_fixed_ohm
	dbmLoad bool     // the profile's dBm refer to the load setting
}

var genCases = []genCase{
	{name: "vrms", simDBm: "fixed", simOhm: 50},
	{name: "vpp", edits: []string{`unit = "vrms"`, `unit = "vpp"`, "max_amplitude = 7.07", "max_amplitude = 20.0"}, simDBm: "fixed", simOhm: 50},
	{name: "dbm-load", edits: []string{`unit = "vrms"`, "unit = \"dbm\"\ndbm_reference = \"load\"", "min_amplitude = 0.0", "min_amplitude = -60.0", "max_amplitude = 7.07", "max_amplitude = 23.0"}, simDBm: "load", dbmLoad: true},
	{name: "dbm-50", edits: []string{`unit = "vrms"`, "unit = \"dbm\"\ndbm_reference = 50", "min_amplitude = 0.0", "min_amplitude = -60.0", "max_amplitude = 7.07", "max_amplitude = 23.0"}, simDBm: "fixed", simOhm: 50},
	{name: "dbm-600", edits: []string{`unit = "vrms"`, "unit = \"dbm\"\ndbm_reference = 600", "min_amplitude = 0.0", "min_amplitude = -60.0", "max_amplitude = 7.07", "max_amplitude = 23.0"}, simDBm: "fixed", simOhm: 600},
}

// loadBenchWith loads the simulated bench file with the generator profile
// and the bench text edited.
func loadBenchWith(t *testing.T, genEdits, benchEdits []string) (*profile.BenchFile, error) {
	t.Helper()
	m := configstest.MapFS(t)
	m["generator-scpi.toml"].Data = []byte(editText(t, string(m["generator-scpi.toml"].Data), genEdits))
	m["test-bench.toml"] = &fstest.MapFile{Data: []byte(simBenchText(t, benchEdits...))}
	return profile.LoadBenchFS(m, "test-bench.toml")
}

func editText(t *testing.T, s string, edits []string) string {
	t.Helper()
	for i := 0; i+1 < len(edits); i += 2 {
		if !strings.Contains(s, edits[i]) {
			t.Fatalf("%q not in the text", edits[i])
		}
		s = strings.Replace(s, edits[i], edits[i+1], 1)
	}
	return s
}

// loadEdit returns the generator-profile edits for a load setting and a
// DUT input ("hi-z" or ohms).
func loadEdit(load, dut string) []string {
	q := func(s string) string {
		if s == "hi-z" {
			return `"hi-z"`
		}
		return s
	}
	return []string{`load = "hi-z"`, "load = " + q(load), `dut_load = "hi-z"`, "dut_load = " + q(dut)}
}

// TestAmplitudeEveryUnitLoadConvention drives the simulated generator in
// every unit (Vrms, Vpp, dBm referred to the load setting, to 50 Ω and to
// 600 Ω) with every load setting (50 Ω, hi-z, 10 Ω) into a hi-z and a
// 50 Ω DUT, and checks the Vrms the simulator puts into the DUT (its own
// physics: level, unit, convention, source and load impedances) against
// the Vrms asked for. The formulas are the handbook ones: dBm =
// 10·log10(V²/R / 1 mW) and the voltage divider V = E·R/(R + Rs).
func TestAmplitudeEveryUnitLoadConvention(t *testing.T) {
	const want = 0.5 // Vrms at the DUT, under the bench's 1 Vrms
	for _, gc := range genCases {
		for _, load := range []string{"50", "hi-z", "10"} {
			for _, dut := range []string{"hi-z", "50"} {
				t.Run(fmt.Sprintf("%s/load=%s/dut=%s", gc.name, load, dut), func(t *testing.T) {
					simEdits := []string{"dbm_reference = \"fixed\"\ndbm_fixed_ohm = 50\n", fmt.Sprintf("dbm_reference = %q\ndbm_fixed_ohm = %g\n", gc.simDBm, math.Max(gc.simOhm, 50))}
					if dut != "hi-z" {
						simEdits = append(simEdits, "input_ohm = 0", "input_ohm = "+dut)
					}
					cfg, err := loadBenchWith(t, append(append([]string{}, gc.edits...), loadEdit(load, dut)...), simEdits)
					if gc.dbmLoad && load == "hi-z" {
						// dBm into an open circuit means nothing: refused,
						// naming the key.
						if err == nil || !strings.Contains(err.Error(), "output.load") {
							t.Fatalf("dBm referred to a hi-z load accepted (err %v)", err)
						}
						return
					}
					if err != nil {
						t.Fatal(err)
					}
					ctx := testCtx(t)
					b, err := Open(ctx, cfg, zerolog.Nop())
					if err != nil {
						t.Fatal(err)
					}
					defer b.Close()
					g := b.Generator
					if err := g.SetAmplitude(ctx, want); err != nil {
						t.Fatal(err)
					}
					if err := g.SetFrequency(ctx, 1000); err != nil {
						t.Fatal(err)
					}
					if err := g.SetOutput(ctx, true); err != nil {
						t.Fatal(err)
					}
					// The instrument receives the amplitude rounded to
					// the profile's 6 significant digits toward the
					// lower level: what it puts on the DUT is the value
					// sent, reported by the driver, never above what was
					// asked and at most one step of the 6th digit under
					// it (1e-5 relative in Vrms or Vpp; 1e-4 dB, 1.2e-5
					// in voltage, for a dBm level of 10 to 99).
					sent := g.(driver.SentSettings).SentAmplitudeVrms()
					if sent > want*(1+1e-12) || sent < want*(1-1.2e-5) {
						t.Errorf("sent %g Vrms at the DUT, asked %g", sent, want)
					}
					got := b.Sim.DUTInputVrms()
					if math.Abs(got/sent-1) > 1e-9 {
						t.Errorf("DUT input %g Vrms, sent %g (asked %g)", got, sent, want)
					}
					if pk := b.Sim.PeakDUTInputVrms(); math.Abs(pk/sent-1) > 1e-9 {
						t.Errorf("recorded peak %g Vrms, sent %g", pk, sent)
					}
				})
			}
		}
	}
}

// TestDBmConventionMismatch is the old fault: a profile whose dBm refer to
// its 10 Ω load setting driving a generator whose dBm refer to 50 Ω. The
// voltage ratio is √(50/10) = 2.236 (dBm definition); the simulator
// records it. The fix is that the profile must say which reference its
// instrument uses (output.dbm_reference, no default).
func TestDBmConventionMismatch(t *testing.T) {
	gen := append(append([]string{}, genCases[2].edits...), loadEdit("10", "hi-z")...) // dBm into the load setting
	cfg, err := loadBenchWith(t, gen, []string{"dbm_fixed_ohm = 50\n", "dbm_fixed_ohm = 50\n"})
	if err != nil {
		t.Fatal(err)
	}
	ctx := testCtx(t)
	b, err := Open(ctx, cfg, zerolog.Nop())
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	const want = 0.5
	for _, err := range []error{b.Generator.SetAmplitude(ctx, want), b.Generator.SetFrequency(ctx, 1000), b.Generator.SetOutput(ctx, true)} {
		if err != nil {
			t.Fatal(err)
		}
	}
	// Against the value sent (6 significant digits; the profile's
	// own conversion, so the ratio is the convention's alone).
	ratio := b.Sim.PeakDUTInputVrms() / b.Generator.(driver.SentSettings).SentAmplitudeVrms()
	t.Logf("wrong dBm reference: %.4g × the asked amplitude at the DUT", ratio)
	if math.Abs(ratio-math.Sqrt(50.0/10)) > 1e-9 {
		t.Errorf("ratio %g, want √5 = %g", ratio, math.Sqrt(5))
	}
}
