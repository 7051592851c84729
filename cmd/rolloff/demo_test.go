package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"io"
	"math"
	"net/http"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/rs/zerolog"
)

// TestDemoNoServe runs `rolloff demo --no-serve` as a user would and checks
// what it promises: a complete run directory and corners within 0.5 % of
// the simulated DUT's analytic ones (the demo DUT: first-order high-pass
// at 8 Hz, second-order Butterworth low-pass at 95 kHz; the analytic
// crossings come from the model by root finding).
func TestDemoNoServe(t *testing.T) {
	out := t.TempDir()
	var stdout, stderr bytes.Buffer
	code := realMain([]string{"--log-level", "warn", "demo", "--no-serve", "--out", out}, strings.NewReader(""), &stdout, &stderr)
	if code != 0 {
		t.Fatalf("exit %d\nstdout:\n%s\nstderr:\n%s", code, stdout.String(), stderr.String())
	}
	re := regexp.MustCompile(`(?m)^(low|high) corner: measured .*, analytic .*, error ([-+][0-9.]+) %$`)
	m := re.FindAllStringSubmatch(stdout.String(), -1)
	if len(m) != 2 {
		t.Fatalf("want both corners compared, got:\n%s", stdout.String())
	}
	for _, c := range m {
		e, err := strconv.ParseFloat(c[2], 64)
		if err != nil || math.Abs(e) > 0.5 {
			t.Errorf("%s corner error %s %%, limit 0.5 %%", c[1], c[2])
		}
	}
	dirs, err := filepath.Glob(filepath.Join(out, "*line-driver*"))
	if err != nil || len(dirs) != 1 {
		t.Fatalf("run directories under %s: %v %v", out, dirs, err)
	}
	for _, name := range []string{"meta.json", "plan.toml", "bench.toml", "points.jsonl", "events.jsonl", "result.json", "response.csv", "response.png", "response.svg", "response.pdf"} {
		fi, err := os.Stat(filepath.Join(dirs[0], name))
		if err != nil || fi.Size() == 0 {
			t.Errorf("%s: %v", name, err)
		}
	}
	if !strings.Contains(stdout.String(), dirs[0]) {
		t.Errorf("the run directory %s is not printed:\n%s", dirs[0], stdout.String())
	}
}

// TestPlanCommand lists the demo plan on the simulated
// bench file: every point of the plan is printed with an estimate, and no
// instrument is opened (the bench's [sim] is never started, so nothing
// could have been switched on).
func TestPlanCommand(t *testing.T) {
	var stdout, stderr bytes.Buffer
	code := realMain([]string{"plan", "../../configs/demo-plan.toml", "--bench", "../../configs/sim-bench.toml"}, strings.NewReader(""), &stdout, &stderr)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr.String())
	}
	s := stdout.String()
	// 2 Hz to 2 MHz at 12 points per decade: 6 decades × 12 + 1 = 73.
	if !strings.Contains(s, "73 points at 0.05 Vrms") {
		t.Errorf("want 73 points at 0.05 Vrms, got:\n%s", s)
	}
	if !strings.Contains(s, "estimated duration") {
		t.Errorf("no estimate printed:\n%s", s)
	}
	if strings.Contains(stderr.String(), "instrument opened") {
		t.Errorf("plan opened an instrument: %s", stderr.String())
	}
}

// TestRunRefusesBadPlan: a plan with the amplitude above the bench's limit
// is refused before anything is opened, naming the file and the field.
func TestRunRefusesBadPlan(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "loud.toml")
	if err := os.WriteFile(bad, []byte("[frequencies]\nstart_hz = 10\nstop_hz = 1000\n[level]\nvrms = 5\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	var stdout, stderr bytes.Buffer
	code := realMain([]string{"run", bad, "--bench", "../../configs/sim-bench.toml", "--out", dir}, strings.NewReader(""), &stdout, &stderr)
	if code == 0 {
		t.Fatal("a plan above the bench's amplitude limit ran")
	}
	msg := stderr.String()
	if !strings.Contains(msg, "loud.toml") || !strings.Contains(msg, "level.vrms") {
		t.Errorf("error does not name the file and field: %s", msg)
	}
	if strings.Contains(msg, "instrument opened") {
		t.Errorf("instruments were opened for a refused plan: %s", msg)
	}
	if runs, _ := filepath.Glob(filepath.Join(dir, "2*")); len(runs) != 0 {
		t.Errorf("a run directory was created for a refused plan: %v", runs)
	}
}

// TestDemoServed runs the demo with its live page: the daemon owns the
// demo's run (the page can steer it), the corners are reported as in the
// headless demo, and cancelling stops the daemon.
func TestDemoServed(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	pr, pw := io.Pipe()
	env := &cmdEnv{log: newLogger(io.Discard, false, zerolog.WarnLevel), stdout: pw, stderr: io.Discard, stdin: strings.NewReader("")}
	done := make(chan error, 1)
	go func() {
		err := runDemoCmd(ctx, env, []string{"--out", t.TempDir(), "--addr", "127.0.0.1:0", "--time-scale", "50"})
		pw.Close()
		done <- err
	}()
	var url, runID string
	corners := 0
	sc := bufio.NewScanner(pr)
	for sc.Scan() {
		line := sc.Text()
		switch {
		case strings.HasPrefix(line, "live page: "):
			url = strings.TrimPrefix(line, "live page: ")
		case strings.HasPrefix(line, "run "):
			runID = strings.TrimSuffix(strings.Fields(line)[1], ":")
		case strings.Contains(line, "corner: measured"):
			corners++
		}
		if strings.HasPrefix(line, "serving the live page") {
			break
		}
	}
	go io.Copy(io.Discard, pr)
	if url == "" || runID == "" || corners != 2 {
		t.Fatalf("url %q, run %q, %d corner comparisons", url, runID, corners)
	}
	resp, err := http.Get(url + "api/runs/" + runID)
	if err != nil {
		t.Fatal(err)
	}
	var info struct {
		State    string `json:"state"`
		External bool   `json:"external"`
		Points   int    `json:"points"`
	}
	err = json.NewDecoder(resp.Body).Decode(&info)
	resp.Body.Close()
	if err != nil {
		t.Fatal(err)
	}
	if info.State != "done" || info.External || info.Points < 73 {
		t.Errorf("the demo's run as the daemon sees it: %+v (want done, owned by the daemon, ≥ 73 points)", info)
	}
	cancel()
	select {
	case err := <-done:
		if err != nil {
			t.Errorf("demo after cancel: %v", err)
		}
	case <-time.After(10 * time.Second):
		t.Fatal("the served demo did not stop within 10 s of cancellation")
	}
}
