package reliability

import (
	"bufio"
	"encoding/json"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"syscall"
	"testing"
	"time"

	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
)

// tornLine is the first half of a point record, as a crash in the middle
// of its write would leave it: no closing brace, no newline.
const tornLine = `{"seq":99,"index":17,"freq_hz":68129.20691308,"vin_vrms":0.05,"vout_vrms":0.4`

// planFreqs decodes a plan document and returns its frequencies.
func planFreqs(t *testing.T, text string) []plan.Freq {
	t.Helper()
	p, err := plan.DecodeTOML("plan.toml", []byte(text))
	if err != nil {
		t.Fatal(err)
	}
	p.Defaults()
	fs, err := p.Freqs()
	if err != nil {
		t.Fatal(err)
	}
	return fs
}

// tearPoints appends a torn record to a run's points.jsonl and returns the
// file's size before.
func tearPoints(t *testing.T, runDir string) int64 {
	t.Helper()
	path := filepath.Join(runDir, "points.jsonl")
	st, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	f, err := os.OpenFile(path, os.O_WRONLY|os.O_APPEND, 0)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := f.WriteString(tornLine); err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
	tally.faults.Add(1)
	return st.Size()
}

// checkTornCut checks that the torn record is gone from points.jsonl, and
// that the cut was reported somewhere the engineer can see it: the
// process's log or the run's events.
func checkTornCut(t *testing.T, runDir string, sizeBefore int64, log string) {
	t.Helper()
	path := filepath.Join(runDir, "points.jsonl")
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if strings.Contains(string(data), tornLine) {
		t.Errorf("points.jsonl still ends with the torn record")
	} else if int64(len(data)) < sizeBefore {
		t.Errorf("points.jsonl was cut to %d bytes, below the %d it had before the torn record", len(data), sizeBefore)
	}
	rf := readRunFiles(t, runDir)
	_, inEvents := rf.mentions("torn", "cut")
	inLog := regexp.MustCompile(`(?i)torn|cut \d+ bytes|bytes cut`).MatchString(log)
	if !inEvents && !inLog {
		t.Errorf("the torn end of points.jsonl (%d bytes) was cut silently: neither the log nor events.jsonl mention it (the store logs recoveries only through Store.SetLogger, which the commands never call)", len(tornLine))
	}
}

// loggedPoints returns the points a `rolloff run` or `rolloff resume`
// process logged (its non-terminal progress output: one JSON log line per
// stored point), by seq.
func loggedPoints(stderr string) map[int]float64 {
	out := map[int]float64{}
	sc := bufio.NewScanner(strings.NewReader(stderr))
	sc.Buffer(make([]byte, 1<<20), 1<<20)
	for sc.Scan() {
		var l struct {
			Message string   `json:"message"`
			Seq     *int     `json:"seq"`
			FreqHz  *float64 `json:"freq_hz"`
		}
		if json.Unmarshal(sc.Bytes(), &l) == nil && l.Message == "point" && l.Seq != nil && l.FreqHz != nil {
			out[*l.Seq] = *l.FreqHz
		}
	}
	return out
}

// checkLogged checks that every point a process reported is on disk.
func checkLogged(t *testing.T, runDir string, logged map[int]float64) {
	t.Helper()
	rf := readRunFiles(t, runDir)
	lost := 0
	for seq, hz := range logged {
		if seq >= len(rf.points) || rf.points[seq].FreqHz != hz {
			lost++
			t.Errorf("point seq %d at %g Hz was reported but is not on disk", seq, hz)
		}
	}
	tally.lost.Add(int64(lost))
}

// TestDaemonKilled kills `rolloff serve` with SIGKILL in the middle of a
// sweep, leaves a torn record at the end of points.jsonl as a crash in the
// middle of a write would, and restarts the daemon on the same store. The
// run must be listed interrupted with every point the live clients were
// told of present and unchanged, the torn record cut and reported, and
// resuming it must complete the plan with no frequency missing or twice.
func TestDaemonKilled(t *testing.T) {
	t.Parallel()
	safe(t, func(t *testing.T) {
		dir := t.TempDir()
		benchFile := writeSimBench(t, dir, 10)
		data := filepath.Join(dir, "runs")
		freqs := planFreqs(t, longPlanTOML)
		d1, api := startServe(t, "rolloff serve", benchFile, data)
		body, _ := json.Marshal(map[string]string{"plan_toml": longPlanTOML, "file_name": "plan.toml"})
		id := api.submit(body)
		lv := api.follow(id)
		lv.waitPoints(t, 5, 60*time.Second)
		d1.signal(syscall.SIGKILL)
		if !d1.wait(10 * time.Second) {
			t.Fatal("the daemon did not die of SIGKILL")
		}
		tally.faults.Add(1)
		select {
		case <-lv.closed:
		case <-time.After(5 * time.Second):
			t.Fatal("the live connection outlived the daemon")
		}
		acked := lv.seen()
		runDir := filepath.Join(data, id)
		if rf := readRunFiles(t, runDir); rf.metaState.Final() || len(rf.points) >= len(freqs) {
			t.Fatalf("the run had ended (%s, %d points) before the kill", rf.metaState, len(rf.points))
		}
		size := tearPoints(t, runDir)

		d2, api2 := startServe(t, "rolloff serve (restarted)", benchFile, data)
		found := false
		for _, in := range api2.runs() {
			if in.ID == id {
				found = true
				if in.State != event.Interrupted {
					t.Errorf("after the restart the run is listed %q, want interrupted", in.State)
				}
			}
		}
		if !found {
			t.Fatalf("run %s not listed after the restart", id)
		}
		got := api2.points(id)
		byseq := map[int]point.Point{}
		for _, p := range got {
			byseq[p.Seq] = p
		}
		for _, a := range acked {
			p, ok := byseq[a.Seq]
			ja, _ := json.Marshal(a)
			jp, _ := json.Marshal(p)
			if !ok || string(ja) != string(jp) {
				tally.lost.Add(1)
				t.Errorf("point seq %d told before the kill: after the restart %s, want %s", a.Seq, jp, ja)
			}
		}
		checkTornCut(t, runDir, size, d2.stderr.String())

		code, resp := api2.do("POST", "/api/runs/"+id+"/resume", []byte("{}"))
		if code != 200 {
			t.Fatalf("resume: %d %s", code, resp)
		}
		lv2 := api2.follow(id)
		in := api2.waitState(id, 90*time.Second, event.Done, event.Failed, event.Aborted, event.Interrupted)
		if in.State != event.Done {
			t.Errorf("resumed run ended %s: %s", in.State, in.Message)
		}
		d2.signal(syscall.SIGTERM)
		if !d2.wait(10 * time.Second) {
			t.Error("the daemon did not stop on SIGTERM")
		}
		all := append(acked, lv2.seen()...)
		verifyRun(t, runDir, expect{freqs: freqs, acked: dedupe(all), final: []event.State{event.Done}, note: logf(t, "daemon killed")})
		t.Logf("killed after %d points told; %d after resuming", len(acked), len(lv2.seen()))
	})
}

// dedupe keeps one copy of each point by seq (a replay re-sends stored
// points to a new live client).
func dedupe(pts []point.Point) []point.Point {
	seen := map[int]bool{}
	var out []point.Point
	for _, p := range pts {
		if !seen[p.Seq] {
			seen[p.Seq] = true
			out = append(out, p)
		}
	}
	return out
}

// TestCLIKilled kills `rolloff run` with SIGKILL in the middle of a sweep,
// tears the last record of points.jsonl, and continues with `rolloff
// resume RUNDIR`, which must complete the plan with every point reported
// before the kill intact and no frequency missing or twice.
func TestCLIKilled(t *testing.T) {
	t.Parallel()
	safe(t, func(t *testing.T) {
		dir := t.TempDir()
		benchFile := writeSimBench(t, dir, 10)
		planFile := filepath.Join(dir, "plan.toml")
		if err := os.WriteFile(planFile, []byte(longPlanTOML), 0o644); err != nil {
			t.Fatal(err)
		}
		freqs := planFreqs(t, longPlanTOML)
		out := filepath.Join(dir, "runs")
		r := startProc(t, "rolloff run", "run", planFile, "--bench", benchFile, "--out", out)
		var runDir string
		deadline := time.Now().Add(60 * time.Second)
		for {
			if ds := runDirs(out); len(ds) == 1 && countLines(filepath.Join(ds[0], "points.jsonl")) >= 4 {
				runDir = ds[0]
				break
			}
			if time.Now().After(deadline) || r.exited() {
				t.Fatalf("no run with 4 points (exited: %v, %v)\n%s", r.exited(), r.err, tail(r.stderr.String(), 2000))
			}
			time.Sleep(2 * time.Millisecond)
		}
		r.signal(syscall.SIGKILL)
		if !r.wait(10 * time.Second) {
			t.Fatal("rolloff run did not die of SIGKILL")
		}
		tally.faults.Add(1)
		logged := loggedPoints(r.stderr.String())
		if rf := readRunFiles(t, runDir); rf.metaState.Final() || len(rf.points) >= len(freqs) {
			t.Fatalf("the run had ended (%s, %d points) before the kill", rf.metaState, len(rf.points))
		}
		size := tearPoints(t, runDir)

		rs := startProc(t, "rolloff resume", "resume", runDir)
		if !rs.wait(90 * time.Second) {
			t.Fatal("rolloff resume did not finish within 90 s")
		}
		if rs.exitCode() != 0 {
			t.Errorf("rolloff resume exited %d: %s", rs.exitCode(), tail(rs.stderr.String(), 2000))
		}
		if !strings.Contains(rs.stdout.String(), "done: ") {
			t.Errorf("rolloff resume did not report the run done:\n%s", rs.stdout.String())
		}
		checkTornCut(t, runDir, size, rs.stderr.String())
		checkLogged(t, runDir, logged)
		checkLogged(t, runDir, loggedPoints(rs.stderr.String()))
		verifyRun(t, runDir, expect{freqs: freqs, final: []event.State{event.Done}, note: logf(t, "CLI killed")})
		t.Logf("killed after %d points reported", len(logged))
	})
}
