package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"rolloff/configs"
)

// dialectBench writes the shipped configs to a directory with bench.toml:
// the demo simulated bench with the given generator and voltmeter
// profiles and personalities. It returns the bench file's path.
func dialectBench(t *testing.T, genProfile, vmProfile, genPers, vmPers string) string {
	t.Helper()
	dir := t.TempDir()
	for _, n := range configs.Names() {
		data, err := configs.ReadFile(n)
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, n), data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	data, _ := configs.ReadFile(configs.SimBench)
	b := string(data)
	for _, r := range [][2]string{
		{`profile = "generator-scpi.toml"`, `profile = "` + genProfile + `"`},
		{`profile = "dmm-scpi.toml"`, `profile = "` + vmProfile + `"`},
		{"[sim.generator]\n", "[sim.generator]\npersonality = \"" + genPers + "\"\n"},
		{"[sim.voltmeter]\n", "[sim.voltmeter]\npersonality = \"" + vmPers + "\"\n"},
	} {
		if !strings.Contains(b, r[0]) {
			t.Fatalf("sim-bench.toml: %q not found", r[0])
		}
		b = strings.Replace(b, r[0], r[1], 1)
	}
	if vm, _ := configs.ReadFile(vmProfile); strings.Contains(string(vm), "\nnplc = []") {
		// A meter with a fixed integration time: the bench names none.
		b = strings.Replace(b, "range_v = 0\nnplc = 1\n", "range_v = 0\n", 1)
	}
	p := filepath.Join(dir, "bench.toml")
	if err := os.WriteFile(p, []byte(b), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// TestCheckPersonalities: `rolloff check` passes on every simulated
// personality described by its shipped profile family, and never
// switches the output on.
func TestCheckPersonalities(t *testing.T) {
	for _, c := range []struct{ name, gen, vm, genPers, vmPers string }{
		{"plain", "generator-scpi.toml", "dmm-plain.toml", "", "plain"},
		{"initfetch", "generator-scpi.toml", "dmm-initfetch.toml", "", "initfetch"},
		{"measure", "generator-scpi.toml", "dmm-measure.toml", "", "measure"},
		{"suffixed", "generator-scpi.toml", "dmm-suffixed.toml", "", "suffixed"},
		{"slow", "generator-scpi.toml", "dmm-slow.toml", "", "slow"},
		{"apply-vpp", "generator-apply-vpp.toml", "dmm-scpi.toml", "apply-vpp", ""},
		{"opc-mute", "generator-opc.toml", "dmm-scpi.toml", "opc-mute", ""},
	} {
		t.Run(c.name, func(t *testing.T) {
			bench := dialectBench(t, c.gen, c.vm, c.genPers, c.vmPers)
			code, out, errOut := runCLI("check", bench)
			if code != 0 {
				t.Fatalf("exit %d\n%s\n%s", code, out, errOut)
			}
			if !strings.Contains(out, "0 failed; the generator output was never switched on") || strings.Contains(out, "FAIL") {
				t.Errorf("output:\n%s", out)
			}
			if !strings.Contains(out, "commands.output_on: not sent") {
				t.Errorf("output_on not reported as not sent:\n%s", out)
			}
		})
	}
}

// TestCheckWrongProfile: the generic DMM profile on the plain meter,
// which has no sample count: the check fails with exit 1 and a line
// naming the key, the instrument's error and a suggestion.
func TestCheckWrongProfile(t *testing.T) {
	bench := dialectBench(t, "generator-scpi.toml", "dmm-scpi.toml", "", "plain")
	code, out, errOut := runCLI("check", bench)
	if code != 1 {
		t.Fatalf("exit %d, want 1\n%s\n%s", code, out, errOut)
	}
	var line string
	for _, l := range strings.Split(out, "\n") {
		if strings.HasPrefix(l, "FAIL") && strings.Contains(l, "set_sample_count") {
			line = l
		}
	}
	// SCPI-1999 Vol 2 §21.8.9: -113 is "Undefined header".
	if line == "" || !strings.Contains(line, "refused") || !strings.Contains(line, "-113") || !strings.Contains(line, "does not know this header") {
		t.Fatalf("no clear line for set_sample_count:\n%s", out)
	}
	// The apply-style generator spoken to with the generic profile: the
	// frequency command is refused.
	bench = dialectBench(t, "generator-scpi.toml", "dmm-scpi.toml", "apply-vpp", "")
	code, out, _ = runCLI("check", bench)
	if code != 1 || !strings.Contains(out, "FAIL generator commands.set_frequency") {
		t.Fatalf("exit %d, want 1 and a failed set_frequency:\n%s", code, out)
	}
}
