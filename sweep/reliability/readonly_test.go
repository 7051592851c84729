package reliability

import (
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"rolloff/sweep/event"
	"rolloff/sweep/point"
	"rolloff/sweep/sched"
)

// bindReadOnly makes dir visible read-only at a new path (a read-only
// bind mount), or skips the test when the process may not mount.
func bindReadOnly(t *testing.T, dir string) string {
	t.Helper()
	ro := filepath.Join(t.TempDir(), "ro")
	if err := os.Mkdir(ro, 0o755); err != nil {
		t.Fatal(err)
	}
	if err := syscall.Mount(dir, ro, "", syscall.MS_BIND, ""); err != nil {
		t.Skipf("cannot bind-mount %s (needs root or CAP_SYS_ADMIN): %v", dir, err)
	}
	t.Cleanup(func() { syscall.Unmount(ro, syscall.MNT_DETACH) })
	if err := syscall.Mount("", ro, "", syscall.MS_REMOUNT|syscall.MS_BIND|syscall.MS_RDONLY, ""); err != nil {
		t.Skipf("cannot make the bind mount read-only: %v", err)
	}
	return ro
}

// TestReadOnlyStore puts an interrupted run on a read-only file system.
// Linux refuses to make a file system read-only while a file on it is
// open for writing (EBUSY), so the store's append descriptors cannot turn
// read-only in the middle of a run; what can happen is a store that is
// read-only when a run is resumed or created. Then `rolloff resume` and
// the daemon must refuse with an error saying so before a single command
// reaches an instrument, and the stored points must stay readable.
func TestReadOnlyStore(t *testing.T) {
	t.Parallel()
	if inMountNamespace(t) {
		return
	}
	safe(t, func(t *testing.T) {
		storeDir := filepath.Join(t.TempDir(), "runs")
		g := openRig(t, 100, storeDir, nil)
		p, freqs := loadPlan(t, "plan.toml", planTOML, g.b)
		ctx, cancel := context.WithCancel(context.Background())
		res := g.sweep(ctx, p, planTOML, sched.Opts{}, func(n int, _ point.Point, _ *sched.Run) {
			if n == 3 {
				cancel()
			}
		})
		cancel()
		if res.state != event.Interrupted {
			t.Fatalf("the first part of the run ended %s: %v", res.state, res.err)
		}
		id := filepath.Base(res.dir)
		ro := bindReadOnly(t, storeDir)
		tally.faults.Add(1)
		before := readRunFiles(t, filepath.Join(ro, id))
		verifyPoints(t, before, expect{freqs: freqs, acked: res.acked})

		// A fresh simulated bench that nothing has talked to yet.
		s := startSim(t, 100)
		dir := t.TempDir()
		benchFile := writeTCPBench(t, dir, s.Addr, "")

		rs := startProc(t, "rolloff resume (read-only store)", "resume", filepath.Join(ro, id), "--bench", benchFile)
		if !rs.wait(30 * time.Second) {
			t.Fatal("rolloff resume hung on a read-only store")
		}
		msg := rs.stderr.String()
		if rs.exitCode() == 0 {
			t.Errorf("rolloff resume succeeded on a read-only store:\n%s", rs.stdout.String())
		} else if !strings.Contains(msg, "read-only") {
			t.Errorf("rolloff resume refused without saying the store is read-only:\n%s", tail(msg, 2000))
		}
		for role, n := range received(s) {
			if n != 0 {
				t.Errorf("%s received %d commands from a resume that could not write its run: %q", role, n, s.Received(role))
			}
		}

		d, api := startServe(t, "rolloff serve (read-only store)", benchFile, ro)
		base := received(s)
		body, _ := json.Marshal(map[string]string{"plan_toml": planTOML, "file_name": "plan.toml"})
		code, data := api.do("POST", "/api/runs", body)
		if code < 400 {
			t.Errorf("POST /api/runs on a read-only store: %d %s", code, data)
		} else if !strings.Contains(string(data), "read-only") {
			t.Errorf("POST /api/runs on a read-only store: %d, without saying why: %s", code, data)
		}
		if after := received(s); !equalCounts(base, after) {
			t.Errorf("a run that could not be created reached the instruments: %v → %v", base, after)
		}
		if d.exited() {
			t.Errorf("the daemon exited: %v", d.err)
		}

		after := readRunFiles(t, filepath.Join(ro, id))
		verifyPoints(t, after, expect{freqs: freqs, acked: res.acked})
		if len(after.points) != len(before.points) {
			t.Errorf("%d points before, %d after", len(before.points), len(after.points))
		}
		if !t.Failed() {
			tally.stopped.Add(1)
		}
		t.Logf("resume: exit %d: %s; POST: %d %s", rs.exitCode(), strings.TrimSpace(tail(msg, 300)), code, strings.TrimSpace(string(data)))
	})
}
