package reliability

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"testing"

	"rolloff/configs"
	"rolloff/driver/sim"
)

// profiles are the shipped instrument profiles a bench file names.
var profiles = []string{"generator-scpi.toml", "dmm-scpi.toml", "converter-10db-relay.toml", "converter-10db.toml", "switch-scpi.toml"}

// writeProfiles copies the shipped profiles into dir.
func writeProfiles(t *testing.T, dir string) {
	t.Helper()
	for _, name := range profiles {
		data, err := configs.ReadFile(name)
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, name), data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
}

// timeScaleLine matches the top-level time_scale of the shipped sim bench.
var timeScaleLine = regexp.MustCompile(`(?m)^time_scale = [0-9.e+]+$`)

// writeSimBench writes the shipped simulated bench file (every role
// "sim", the simulator in-process) at a time scale into dir, with its
// profiles, and returns its path.
func writeSimBench(t *testing.T, dir string, scale float64) string {
	t.Helper()
	writeProfiles(t, dir)
	data, err := configs.ReadFile(configs.SimBench)
	if err != nil {
		t.Fatal(err)
	}
	if !timeScaleLine.Match(data) {
		t.Fatalf("%s has no top-level time_scale line", configs.SimBench)
	}
	data = timeScaleLine.ReplaceAll(data, []byte(fmt.Sprintf("time_scale = %g", scale)))
	path := filepath.Join(dir, "sim-bench.toml")
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// writeTCPBench writes a bench file for instruments served elsewhere (by a
// simulator in the test process or a `rolloff sim` process): the demo
// bench's roles at the given addresses, no [sim] table (so the scheduler
// runs in real time). genAddr overrides the generator's address when not
// empty.
func writeTCPBench(t *testing.T, dir string, addr func(role string) string, genAddr string) string {
	t.Helper()
	writeProfiles(t, dir)
	if genAddr == "" {
		genAddr = addr(sim.RoleGenerator)
	}
	text := fmt.Sprintf(`name = "reliability bench"
voltmeter_mode = "converter"

[limits]
min_freq_hz = 1
max_freq_hz = 2e6
min_vrms = 0.0001
max_vrms = 1.0

[generator]
profile = "generator-scpi.toml"
address = %q

[voltmeter]
profile = "dmm-scpi.toml"
address = %q
range_v = 0
nplc = 1

[converter]
profile = "converter-10db-relay.toml"

[switch]
profile = "switch-scpi.toml"
address = %q
`, genAddr, addr(sim.RoleVoltmeter), addr(sim.RoleSwitch))
	path := filepath.Join(dir, "tcp-bench.toml")
	if err := os.WriteFile(path, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// startSim starts the demo simulated bench (as the shipped sim bench file
// configures it) in the test process at a time scale.
func startSim(t *testing.T, scale float64) *sim.Bench {
	t.Helper()
	cfg := simBench(t, scale)
	sc, err := sim.FromBenchFile(cfg)
	if err != nil {
		t.Fatal(err)
	}
	s, err := sim.New(*sc)
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Start(context.Background()); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { s.Close() })
	return s
}
