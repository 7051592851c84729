package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestPlanAndRunRefuseBenchMismatch: a plan naming a range the bench's
// converter does not have, or keeping an unknown range, exits with status
// 2 from `rolloff plan` and `rolloff run`, naming the file and field,
// before anything is opened.
func TestPlanAndRunRefuseBenchMismatch(t *testing.T) {
	for _, c := range []struct {
		name, ranging, bench, field string
	}{
		{"no such range", "[ranging]\nstrategy = \"remote\"\nstart = \"7 V\"\n", "../../configs/sim-bench.toml", "ranging.start"},
		{"fixed, range unknown", "[ranging]\nstrategy = \"fixed\"\n", "../../configs/bench-example.toml", "ranging.start"},
		{"remote without a switch", "[ranging]\nstrategy = \"remote\"\n", "../../configs/bench-example.toml", "ranging.strategy"},
	} {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			f := filepath.Join(dir, "bad.toml")
			if err := os.WriteFile(f, []byte("reference_hz = 100\n[frequencies]\nstart_hz = 10\nstop_hz = 1000\n[level]\nvrms = 0.05\n"+c.ranging), 0o644); err != nil {
				t.Fatal(err)
			}
			for _, cmd := range [][]string{{"plan", f, "--bench", c.bench}, {"run", f, "--bench", c.bench, "--out", dir}} {
				var stdout, stderr bytes.Buffer
				code := realMain(cmd, strings.NewReader(""), &stdout, &stderr)
				if code != 2 {
					t.Errorf("rolloff %s: exit %d, want 2 (%s)", cmd[0], code, stderr.String())
				}
				if msg := stderr.String(); !strings.Contains(msg, "bad.toml") || !strings.Contains(msg, c.field) {
					t.Errorf("rolloff %s: error does not name the file and %s: %s", cmd[0], c.field, msg)
				}
			}
			if runs, _ := filepath.Glob(filepath.Join(dir, "2*")); len(runs) != 0 {
				t.Errorf("a run directory was created for a refused plan: %v", runs)
			}
		})
	}
}
