package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"rolloff/configs"
	"rolloff/driver/sim"
	"rolloff/driver/transport/replay"
	"rolloff/internal/scpitest"
)

// TestProbeRecord: --record writes the session in the replay format, and
// the transcript plays back the same exchanges byte for byte.
func TestProbeRecord(t *testing.T) {
	inst := probeInstrument("\n")
	addr := scpitest.Listen(t, inst)
	file := filepath.Join(t.TempDir(), "probe.txt")
	code, _, errOut := runCLI("probe", addr, "--record", file)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	tr, err := replay.Load(file)
	if err != nil {
		t.Fatal(err)
	}
	text := string(tr.Format())
	for _, want := range []string{"> *IDN?\n< rolloff,SIM-GEN,0001,1.0\n", "> SYST:ERR?\n< -113,\"Undefined header\"\n"} {
		if !strings.Contains(text, want) {
			t.Errorf("transcript lacks %q:\n%s", want, text)
		}
	}
}

// simPersonality serves a simulated bench whose voltmeter speaks the
// given personality and returns the voltmeter's address.
func simPersonality(t *testing.T, personality string) string {
	t.Helper()
	cfg := sim.DemoConfig()
	cfg.Voltmeter.Personality = personality
	b, err := sim.New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	if err := b.Start(t.Context()); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { b.Close() })
	return b.Addr(sim.RoleVoltmeter)
}

// TestProbeProfile: --profile checks one instrument against a profile:
// the suffixed family passes on the suffixed meter, the generic profile
// fails on it with a line saying what to put in [response].
func TestProbeProfile(t *testing.T) {
	addr := simPersonality(t, sim.PersonalitySuffixed)
	dir := t.TempDir()
	for _, n := range []string{"dmm-suffixed.toml", "dmm-scpi.toml"} {
		data, _ := configs.ReadFile(n)
		// The simulated voltmeter has no AC function.
		s := string(data)
		if i := strings.Index(s, "\n[ac]"); i >= 0 {
			s = s[:i+1]
		}
		if err := os.WriteFile(filepath.Join(dir, n), []byte(s), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	code, out, errOut := runCLI("probe", addr, "--profile", filepath.Join(dir, "dmm-suffixed.toml"))
	if code != 0 || !strings.Contains(out, "0 failed") {
		t.Fatalf("suffixed family: exit %d\n%s\n%s", code, out, errOut)
	}
	code, out, _ = runCLI("probe", addr, "--profile", filepath.Join(dir, "dmm-scpi.toml"))
	if code != 1 {
		t.Fatalf("generic profile on the suffixed meter: exit %d, want 1\n%s", code, out)
	}
	if !strings.Contains(out, "FAIL dmm       identity") || !strings.Contains(out, "lenient_identity") {
		t.Errorf("no clear line for the 3-field identity:\n%s", out)
	}
}

// TestProbeProfileNoAnswer: a read-back query the instrument does not
// answer is reported as "no answer" with a suggestion, and fails the
// check; the output is never switched on.
func TestProbeProfileNoAnswer(t *testing.T) {
	inst := &scpitest.Instrument{Replies: map[string]string{"*IDN?": "rolloff,SIM-GEN,0001,1.0", "*OPC?": "1"}}
	addr := scpitest.Listen(t, inst)
	data, _ := configs.ReadFile("generator-scpi.toml")
	s := strings.Replace(string(data), `query_frequency = ""`, `query_frequency = "SOURce:FREQuency?"`, 1)
	s = strings.Replace(s, "query_timeout_s = 2.0", "query_timeout_s = 0.3", 1)
	file := filepath.Join(t.TempDir(), "gen.toml")
	if err := os.WriteFile(file, []byte(s), 0o644); err != nil {
		t.Fatal(err)
	}
	code, out, _ := runCLI("probe", addr, "--profile", file)
	if code != 1 {
		t.Fatalf("exit %d, want 1\n%s", code, out)
	}
	var line string
	for _, l := range strings.Split(out, "\n") {
		if strings.Contains(l, "commands.query_frequency") {
			line = l
		}
	}
	if !strings.HasPrefix(line, "FAIL") || !strings.Contains(line, "no answer") || !strings.Contains(line, "query_timeout_s") {
		t.Errorf("query_frequency line %q in:\n%s", line, out)
	}
	for _, l := range inst.Received() {
		if strings.Contains(l, "OUTPut ON") {
			t.Errorf("the check switched the output on: %q", l)
		}
	}
}
