package main

import (
	"bytes"
	"context"
	"encoding/json"
	"io"
	"net/http"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"rolloff/sweep/point"
	"rolloff/sweep/publish"
	"rolloff/sweep/publish/brokertest"
	"rolloff/web/lab"
)

// lockedBuffer is a bytes.Buffer safe for one writer and one reader.
type lockedBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (l *lockedBuffer) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.Write(p)
}

func (l *lockedBuffer) String() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.String()
}

// TestDemoPublishesToLab runs `rolloff lab` and `rolloff demo --no-serve
// --broker … --bench-id …` against a real mosquitto: the lab's view of
// the demo run holds every stored point once, the final state and the
// result, and the bench is shown offline after the demo exits (a clean
// stop).
func TestDemoPublishesToLab(t *testing.T) {
	br := brokertest.Start(t, brokertest.Opts{})
	var labOut lockedBuffer
	env := &cmdEnv{log: zerolog.Nop(), stdout: &labOut, stderr: io.Discard, stdin: strings.NewReader("")}
	ctx, cancel := context.WithCancel(context.Background())
	labDone := make(chan error, 1)
	go func() { labDone <- runLab(ctx, env, []string{"--broker", br.URL(), "--addr", "127.0.0.1:0"}) }()
	defer func() {
		cancel()
		if err := <-labDone; err != nil {
			t.Errorf("rolloff lab: %v", err)
		}
	}()
	re := regexp.MustCompile(`serving (http://127\.0\.0\.1:[0-9]+/)`)
	var url string
	deadline := time.Now().Add(10 * time.Second)
	for url == "" && time.Now().Before(deadline) {
		if m := re.FindStringSubmatch(labOut.String()); m != nil {
			url = m[1]
		}
		time.Sleep(20 * time.Millisecond)
	}
	if url == "" {
		t.Fatalf("no lab address printed: %q", labOut.String())
	}
	snapshot := func() lab.Snapshot {
		resp, err := http.Get(url + "api/lab")
		if err != nil {
			t.Fatal(err)
		}
		defer resp.Body.Close()
		var s lab.Snapshot
		if err := json.NewDecoder(resp.Body).Decode(&s); err != nil {
			t.Fatal(err)
		}
		return s
	}
	for time.Now().Before(deadline) && !snapshot().Broker {
		time.Sleep(20 * time.Millisecond)
	}

	out := t.TempDir()
	var stdout, stderr bytes.Buffer
	code := realMain([]string{"--log-level", "warn", "demo", "--no-serve", "--out", out, "--broker", br.URL(), "--bench-id", "line-driver-1"}, strings.NewReader(""), &stdout, &stderr)
	if code != 0 {
		t.Fatalf("demo: exit %d\n%s\n%s", code, stdout.String(), stderr.String())
	}
	dirs, _ := filepath.Glob(filepath.Join(out, "*line-driver*"))
	if len(dirs) != 1 {
		t.Fatalf("run directories: %v", dirs)
	}
	runID := filepath.Base(dirs[0])
	data, err := os.ReadFile(filepath.Join(dirs[0], "points.jsonl"))
	if err != nil {
		t.Fatal(err)
	}
	var stored []point.Point
	for _, line := range strings.Split(strings.TrimSpace(string(data)), "\n") {
		var p point.Point
		if err := json.Unmarshal([]byte(line), &p); err != nil {
			t.Fatal(err)
		}
		stored = append(stored, p)
	}
	// The demo flushed before exiting: the lab has it all, or soon.
	var run *lab.Run
	var bench *lab.Bench
	for end := time.Now().Add(5 * time.Second); time.Now().Before(end); time.Sleep(50 * time.Millisecond) {
		run, bench = nil, nil
		for _, b := range snapshot().Benches {
			if b.ID != "line-driver-1" {
				continue
			}
			bench = b
			for _, r := range b.Runs {
				if r.ID == runID {
					run = r
				}
			}
		}
		if run != nil && len(run.Points) == len(stored) && len(run.Result) > 0 && bench.Status != nil && !bench.Status.Online {
			break
		}
	}
	if run == nil {
		t.Fatalf("run %s not in the lab", runID)
	}
	if len(run.Points) != len(stored) {
		t.Fatalf("lab holds %d points, points.jsonl %d", len(run.Points), len(stored))
	}
	for i, p := range run.Points {
		if p.Seq != stored[i].Seq || p.Point.FreqHz != stored[i].FreqHz || p.Point.GainDB != stored[i].GainDB {
			t.Fatalf("point %d: lab seq %d %g Hz %g dB, stored seq %d %g Hz %g dB", i, p.Seq, p.Point.FreqHz, p.Point.GainDB, stored[i].Seq, stored[i].FreqHz, stored[i].GainDB)
		}
	}
	if run.State == nil || run.State.State != "done" {
		t.Errorf("lab state %+v, want done", run.State)
	}
	result, err := os.ReadFile(filepath.Join(dirs[0], "result.json"))
	if err != nil {
		t.Fatal(err)
	}
	var a, b any
	if json.Unmarshal(result, &a) != nil || json.Unmarshal(run.Result, &b) != nil || !jsonEqual(a, b) {
		t.Errorf("the lab's result differs from result.json")
	}
	if bench.Status == nil || bench.Status.Online || bench.Status.Reason != "stopped" {
		t.Errorf("bench status after the demo exited: %+v, want offline (stopped)", bench.Status)
	}
}

func jsonEqual(a, b any) bool {
	x, _ := json.Marshal(a)
	y, _ := json.Marshal(b)
	return bytes.Equal(x, y)
}

// TestServePublishesStatus runs `rolloff serve --bench demo --broker …`:
// the lab shows the daemon online, and offline ("stopped") once the
// daemon has been stopped as SIGTERM stops it.
func TestServePublishesStatus(t *testing.T) {
	br := brokertest.Start(t, brokertest.Opts{})
	l, err := lab.New(lab.Config{Broker: publishBroker(br.URL()), Addr: "127.0.0.1:0", Log: zerolog.Nop()})
	if err != nil {
		t.Fatal(err)
	}
	lctx, lcancel := context.WithCancel(context.Background())
	defer lcancel()
	go l.Serve(lctx)
	status := func() (online bool, reason string, found bool) {
		for _, b := range l.Snapshot().Benches {
			if b.ID == "daemon-1" && b.Status != nil {
				return b.Status.Online, b.Status.Reason, true
			}
		}
		return false, "", false
	}
	ctx, cancel := context.WithCancel(context.Background())
	var out lockedBuffer
	env := &cmdEnv{log: zerolog.Nop(), stdout: &out, stderr: io.Discard, stdin: strings.NewReader("")}
	served := make(chan error, 1)
	go func() {
		served <- runServe(ctx, env, []string{"--bench", "demo", "--data", t.TempDir(), "--addr", "127.0.0.1:0", "--broker", br.URL(), "--bench-id", "daemon-1"})
	}()
	deadline := time.Now().Add(20 * time.Second)
	for {
		if on, _, ok := status(); ok && on && strings.Contains(out.String(), "rolloff serving") {
			break
		}
		if time.Now().After(deadline) {
			cancel()
			t.Fatalf("the daemon is not shown online: %v", <-served)
		}
		time.Sleep(20 * time.Millisecond)
	}
	cancel() // what SIGTERM does (main's signal context)
	if err := <-served; err != nil {
		t.Fatalf("serve: %v", err)
	}
	for deadline = time.Now().Add(5 * time.Second); time.Now().Before(deadline); time.Sleep(20 * time.Millisecond) {
		if on, reason, _ := status(); !on {
			if reason != "stopped" {
				t.Errorf("offline reason %q, want stopped (a clean stop, not the last will)", reason)
			}
			return
		}
	}
	t.Fatal("the stopped daemon is still shown online")
}

func publishBroker(url string) publish.Broker { return publish.Broker{URL: url} }
