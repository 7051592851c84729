package reliability

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"syscall"
	"testing"
	"time"

	"rolloff/driver/sim"
	"rolloff/sweep/event"
)

// startSimProc starts `rolloff sim` on a simulated bench file and returns
// the process and the address of every role it printed.
func startSimProc(t *testing.T, benchFile string) (*proc, map[string]string) {
	t.Helper()
	p := startProc(t, "rolloff sim", "sim", "--bench", benchFile)
	addrs := map[string]string{}
	for _, role := range sim.Roles {
		m := p.waitLine(regexp.MustCompile(`^`+role+` (tcp://127\.0\.0\.1:\d+)$`), 30*time.Second)
		addrs[role] = m[1]
	}
	return p, addrs
}

// TestSignals stops `rolloff run` and `rolloff serve` with SIGTERM and
// SIGINT in the middle of a point, the generator output on. The
// instruments are served by a separate `rolloff sim` process, so that the
// generator outlives the process under test and its output can be asked
// for with a raw SCPI query. The process must exit within 5 s, the
// output must be off, and the run must be on disk, interrupted, with its
// points intact.
func TestSignals(t *testing.T) {
	for _, which := range []string{"run", "serve"} {
		for name, sig := range map[string]syscall.Signal{"SIGTERM": syscall.SIGTERM, "SIGINT": syscall.SIGINT} {
			t.Run(fmt.Sprintf("%s/%s", which, name), func(t *testing.T) {
				t.Parallel()
				safe(t, func(t *testing.T) { signalCase(t, which, sig) })
			})
		}
	}
}

func signalCase(t *testing.T, which string, sig syscall.Signal) {
	dir := t.TempDir()
	simDir := filepath.Join(dir, "sim")
	if err := os.Mkdir(simDir, 0o755); err != nil {
		t.Fatal(err)
	}
	// Real time in the simulator as in the scheduler (a bench file without
	// [sim] runs at time scale 1).
	sp, addrs := startSimProc(t, writeSimBench(t, simDir, 1))
	gen := addrs[sim.RoleGenerator]
	benchFile := writeTCPBench(t, dir, func(role string) string { return addrs[role] }, "")
	freqs := planFreqs(t, planTOML)
	out := filepath.Join(dir, "runs")
	var p *proc
	var runDir string
	var logged map[int]float64
	switch which {
	case "run":
		planFile := filepath.Join(dir, "plan.toml")
		if err := os.WriteFile(planFile, []byte(planTOML), 0o644); err != nil {
			t.Fatal(err)
		}
		p = startProc(t, "rolloff run", "run", planFile, "--bench", benchFile, "--out", out)
		deadline := time.Now().Add(60 * time.Second)
		for {
			if ds := runDirs(out); len(ds) == 1 && countLines(filepath.Join(ds[0], "points.jsonl")) >= 1 {
				runDir = ds[0]
				break
			}
			if p.exited() || time.Now().After(deadline) {
				t.Fatalf("no point stored (exited %v: %v)\n%s", p.exited(), p.err, tail(p.stderr.String(), 2000))
			}
			time.Sleep(10 * time.Millisecond)
		}
	case "serve":
		var api *apiClient
		p, api = startServe(t, "rolloff serve", benchFile, out)
		body, _ := json.Marshal(map[string]string{"plan_toml": planTOML, "file_name": "plan.toml"})
		id := api.submit(body)
		runDir = filepath.Join(out, id)
		deadline := time.Now().Add(60 * time.Second)
		for api.run(id).Points < 1 {
			if time.Now().After(deadline) {
				t.Fatalf("no point after 60 s: %+v", api.run(id))
			}
			time.Sleep(20 * time.Millisecond)
		}
	}
	// The generator is driving the DUT: the next point is settling.
	deadline := time.Now().Add(10 * time.Second)
	for scpiQuery(t, gen, "OUTP?") != "1" {
		if time.Now().After(deadline) {
			t.Fatal("the generator output never came on")
		}
		time.Sleep(5 * time.Millisecond)
	}
	sent := p.signal(sig)
	tally.faults.Add(1)
	if !p.wait(5 * time.Second) {
		t.Errorf("rolloff %s still running 5 s after %v", which, sig)
		p.signal(syscall.SIGKILL)
		p.wait(5 * time.Second)
	}
	took := p.ended.Sub(sent)
	if which == "run" {
		logged = loggedPoints(p.stderr.String())
		checkLogged(t, runDir, logged)
	}
	outp := scpiQuery(t, gen, "OUTP?")
	verifyRun(t, runDir, expect{freqs: freqs, off: func() bool { return outp == "0" },
		final: []event.State{event.Interrupted}, cause: []string{"interrupted", "canceled", "shutting down", "stopped"},
		note: logf(t, which)})
	t.Logf("rolloff %s exited %d, %v after %v; OUTP? = %s", which, p.exitCode(), took.Round(time.Millisecond), sig, outp)
	if sp.exited() {
		t.Errorf("the simulator process exited: %v", sp.err)
	}
}
