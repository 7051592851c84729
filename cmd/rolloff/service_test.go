package main

import (
	"context"
	"errors"
	"flag"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/rs/zerolog"
)

// TestServiceUnit checks configs/rolloff.service: its ExecStart is a
// `rolloff serve` command line whose every flag the daemon accepts;
// it runs as its own user with a state directory, restarts on failure
// and stops with SIGTERM (the signal the daemon switches the outputs
// off on). When systemd-analyze is installed, the unit also passes
// `systemd-analyze verify`.
func TestServiceUnit(t *testing.T) {
	data, err := os.ReadFile(filepath.Join("..", "..", "configs", "rolloff.service"))
	if err != nil {
		t.Fatal(err)
	}
	keys := map[string][]string{}
	var cont string
	for _, line := range strings.Split(string(data), "\n") {
		line = strings.TrimSpace(line)
		if cont != "" {
			line, cont = cont+" "+line, ""
		}
		if strings.HasSuffix(line, `\`) {
			cont = strings.TrimSuffix(line, `\`)
			continue
		}
		if line == "" || line[0] == '#' || line[0] == '[' {
			continue
		}
		k, v, ok := strings.Cut(line, "=")
		if !ok {
			t.Fatalf("rolloff.service: %q is not key=value", line)
		}
		keys[k] = append(keys[k], strings.TrimSpace(v))
	}
	for k, want := range map[string]string{"User": "rolloff", "StateDirectory": "rolloff", "Restart": "on-failure", "KillSignal": "SIGTERM"} {
		if len(keys[k]) != 1 || keys[k][0] != want {
			t.Errorf("%s = %v, want %s", k, keys[k], want)
		}
	}
	if len(keys["ExecStart"]) != 1 {
		t.Fatalf("ExecStart: %v", keys["ExecStart"])
	}
	args := strings.Fields(strings.NewReplacer("%S", "/var/lib", "%d", "/run/credentials/rolloff.service").Replace(keys["ExecStart"][0]))
	if len(args) < 2 || filepath.Base(args[0]) != "rolloff" || args[1] != "serve" {
		t.Fatalf("ExecStart %v: want rolloff serve …", args)
	}
	joined := strings.Join(args, " ")
	for _, f := range []string{"--broker ", "--bench ", "--data /var/lib/rolloff/runs", "--broker-password-file "} {
		if !strings.Contains(joined, f) {
			t.Errorf("ExecStart lacks %s", f)
		}
	}
	env := &cmdEnv{log: zerolog.Nop(), stdout: io.Discard, stderr: io.Discard, stdin: strings.NewReader("")}
	// Every flag is parsed before -h stops the command.
	if err := runServe(context.Background(), env, append(args[2:], "-h")); !errors.Is(err, flag.ErrHelp) {
		t.Errorf("rolloff serve refuses the unit's command line: %v", err)
	}
	if sa, err := exec.LookPath("systemd-analyze"); err == nil {
		self, _ := os.Executable()
		unit := filepath.Join(t.TempDir(), "rolloff.service")
		os.WriteFile(unit, []byte(strings.ReplaceAll(string(data), "/usr/local/bin/rolloff", self)), 0o644)
		if out, err := exec.Command(sa, "verify", unit).CombinedOutput(); err != nil {
			t.Errorf("systemd-analyze verify: %v\n%s", err, out)
		}
	} else {
		t.Log("systemd-analyze not installed: unit not verified by systemd")
	}
}
