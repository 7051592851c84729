//go:build unix

package store_test

import (
	"bufio"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"

	"rolloff/sweep/analysis"
	"rolloff/sweep/event"
	"rolloff/sweep/export"
	"rolloff/sweep/point"
	"rolloff/sweep/store"
)

const crashPlan = "name = \"line driver\"\n[frequencies]\nstart_hz = 10\nstop_hz = 100000\n[level]\nvrms = 0.5\n"

// TestHelperCrashMidExport is the child process of TestCrashMidExport: it
// stores a run's points, then writes its exports and is killed with
// SIGKILL while response.svg is a synced temporary file not yet renamed.
func TestHelperCrashMidExport(t *testing.T) {
	dir := os.Getenv("ROLLOFF_STORE_CRASH_EXPORT")
	if dir == "" {
		t.Skip("helper process only")
	}
	fail := func(err error) {
		fmt.Println("error", err)
		os.Exit(2)
	}
	s, err := store.Open(dir)
	if err != nil {
		fail(err)
	}
	r, err := s.Create(store.CreateOpts{PlanFile: "p.toml", PlanData: []byte(crashPlan)})
	if err != nil {
		fail(err)
	}
	if err := r.SetState(event.Reading, ""); err != nil {
		fail(err)
	}
	// A first-order low-pass with its corner at 20 kHz:
	// |H| = 1/√(1+(f/fc)²) (handbook formula).
	for i := range 41 {
		f := 10 * math.Pow(10, float64(i)/10)
		g := 1 / math.Sqrt(1+(f/20e3)*(f/20e3))
		p := point.Point{Seq: i, Index: i, FreqHz: f, VinVrms: 0.5, VoutVrms: 0.5 * g, GainDB: 20 * math.Log10(g),
			Readings: 4, StdRel: 1e-4, ConvAccRel: 1e-3}
		if err := r.AppendPoint(p); err != nil {
			fail(err)
		}
	}
	pts, err := r.Points()
	if err != nil {
		fail(err)
	}
	res, err := analysis.Analyze(pts, analysis.Options{})
	if err != nil {
		fail(err)
	}
	fmt.Println("id", r.ID())
	store.SetTestHookTempWritten(func(tmp string) {
		if strings.HasPrefix(filepath.Base(tmp), ".tmp-"+store.FileResponseSVG) {
			fmt.Println("tmp", tmp)
			os.Stdout.Sync()
			syscall.Kill(os.Getpid(), syscall.SIGKILL)
			select {}
		}
	})
	fail(fmt.Errorf("exports written without a crash: %v", export.WriteAll(r, pts, res)))
}

// TestCrashMidExport kills a process in the middle of writing a run's
// exports and checks that the temporary file it leaves is the store's, and
// that the store's recovery removes it, keeping the points and the result
// files written before.
func TestCrashMidExport(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "runs")
	cmd := exec.Command(os.Args[0], "-test.run=^TestHelperCrashMidExport$", "-test.count=1")
	cmd.Env = append(os.Environ(), "ROLLOFF_STORE_CRASH_EXPORT="+dir)
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	defer cmd.Process.Kill()
	var id, tmp string
	sc := bufio.NewScanner(out)
	for sc.Scan() {
		f := strings.Fields(sc.Text())
		switch {
		case len(f) == 2 && f[0] == "id":
			id = f[1]
		case len(f) == 2 && f[0] == "tmp":
			tmp = f[1]
		case len(f) > 0 && f[0] == "error":
			t.Fatal(sc.Text())
		}
	}
	err = cmd.Wait()
	if ws, ok := cmd.ProcessState.Sys().(syscall.WaitStatus); !ok || !ws.Signaled() || ws.Signal() != syscall.SIGKILL {
		t.Fatalf("helper did not die of SIGKILL: %v", err)
	}
	if id == "" || tmp == "" {
		t.Fatalf("helper gave run id %q, temporary file %q", id, tmp)
	}
	runDir := filepath.Join(dir, id)
	if filepath.Dir(tmp) != runDir {
		t.Fatalf("temporary file %s outside the run directory %s", tmp, runDir)
	}
	if _, err := os.Stat(tmp); err != nil {
		t.Fatalf("the crash left no temporary file: %v", err)
	}
	s, err := store.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	r, err := s.OpenRun(id)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if rec := r.Recovery(); rec.TempsRemoved != 1 || !rec.Interrupted {
		t.Errorf("recovery %+v, want one temporary file removed and the run interrupted", rec)
	}
	ents, err := os.ReadDir(runDir)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, e := range ents {
		names = append(names, e.Name())
	}
	want := "events.jsonl lock meta.json plan.toml points.jsonl response.csv response.png result.json"
	if got := strings.Join(names, " "); got != want {
		t.Errorf("run directory after recovery: %s, want %s", got, want)
	}
	if pts, err := r.Points(); err != nil || len(pts) != 41 {
		t.Errorf("%d points after the crash, %v", len(pts), err)
	}
}
