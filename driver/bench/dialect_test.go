package bench

import (
	"strings"
	"testing"

	"github.com/rs/zerolog"
)

// TestOpenAsTheProfileSays: the clear command and the error queue read
// at open follow the generator profile's [dialect] and check_errors
// (IEEE 488.2 §10.3 *CLS and SCPI-1999 SYSTem:ERRor? are sent only when
// the profile has them), and a halt without an operation-complete query
// is confirmed by reading the output state back.
func TestOpenAsTheProfileSays(t *testing.T) {
	cfg, err := loadBenchWith(t, []string{
		"check_errors = true", "check_errors = false",
		`query_amplitude = ""`, "query_amplitude = \"\"\nquery_output = \"OUTPut?\"",
		"[limits]", "[dialect]\nclear = \"\"\nerror_query = \"\"\nopc_query = \"\"\n\n[limits]",
	}, nil)
	if err != nil {
		t.Fatal(err)
	}
	b, err := Open(testCtx(t), cfg, zerolog.Nop())
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	got := strings.Join(b.Sim.Received(RoleGenerator), "\n")
	for _, never := range []string{"*CLS", "SYST:ERR?", "*OPC?"} {
		if strings.Contains(got, never) {
			t.Errorf("the generator received %s, which its profile does not have:\n%s", never, got)
		}
	}
	if !strings.HasPrefix(got, "OUTPut OFF\nOUTPut?") {
		t.Errorf("open did not start with the output off and read back:\n%s", got)
	}
	// The voltmeter's generic profile keeps both.
	vm := strings.Join(b.Sim.Received(RoleVoltmeter), "\n")
	if !strings.Contains(vm, "*CLS") || !strings.Contains(vm, "SYST:ERR?") {
		t.Errorf("voltmeter at open:\n%s", vm)
	}
}
