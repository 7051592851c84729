package reliability

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"sync/atomic"
	"syscall"
	"testing"

	"rolloff/sweep/event"
	"rolloff/sweep/point"
	"rolloff/sweep/sched"
)

// mountTmpfs mounts a small tmpfs on a new directory, or skips the test
// with the reason when the process may not mount (not root, no
// CAP_SYS_ADMIN, no tmpfs).
func mountTmpfs(t *testing.T, size string) string {
	t.Helper()
	dir := t.TempDir()
	mnt := filepath.Join(dir, "disk")
	if err := os.Mkdir(mnt, 0o755); err != nil {
		t.Fatal(err)
	}
	if err := syscall.Mount("tmpfs", mnt, "tmpfs", syscall.MS_NOSUID|syscall.MS_NODEV, "size="+size+",mode=0755"); err != nil {
		t.Skipf("cannot mount a %s tmpfs to fill (needs root or CAP_SYS_ADMIN): %v", size, err)
	}
	t.Cleanup(func() {
		if err := syscall.Unmount(mnt, syscall.MNT_DETACH); err != nil {
			t.Errorf("unmount %s: %v", mnt, err)
		}
	})
	return mnt
}

// fill writes a file until the file system is full and returns its path.
func fill(t *testing.T, dir string) string {
	t.Helper()
	path := filepath.Join(dir, "filler")
	f, err := os.OpenFile(path, os.O_WRONLY|os.O_CREATE|os.O_TRUNC, 0o644)
	if err != nil {
		t.Fatalf("filler: %v", err)
	}
	defer f.Close()
	buf := make([]byte, 512)
	for {
		if _, err := f.Write(buf); err != nil {
			if !errors.Is(err, syscall.ENOSPC) {
				t.Fatalf("filling %s: %v, want ENOSPC", dir, err)
			}
			return path
		}
	}
}

// TestDiskFull fills the run store's file system in the middle of a
// sweep. A point that cannot be stored must fail the run (not let it
// carry on measuring points it cannot keep), the generator must go off,
// no one may be told of a point that is not on disk, and every point
// already written must stay readable, with no partial line. Once space is
// freed the run is found interrupted and resumes to completion with no
// point missing or repeated.
func TestDiskFull(t *testing.T) {
	t.Parallel()
	if inMountNamespace(t) {
		return
	}
	safe(t, func(t *testing.T) {
		mnt := mountTmpfs(t, "1m")
		g := openRig(t, 100, filepath.Join(mnt, "runs"), nil)
		p, freqs := loadPlan(t, "plan.toml", longPlanTOML, g.b)
		var filler atomic.Value
		res := g.sweep(context.Background(), p, longPlanTOML, sched.Opts{}, func(n int, _ point.Point, _ *sched.Run) {
			if n == 4 {
				filler.Store(fill(t, mnt))
			}
		})
		fp, _ := filler.Load().(string)
		if fp == "" {
			t.Fatalf("the disk was never filled: run %s, %v", res.state, res.err)
		}
		tally.faults.Add(1)
		rf := readRunFiles(t, res.dir)
		if len(rf.points) == len(freqs) {
			st, _ := os.Stat(filepath.Join(res.dir, "points.jsonl"))
			t.Fatalf("every point was stored on the full disk (points.jsonl %d bytes): the appends never needed a new page", st.Size())
		}
		if res.err == nil || !strings.Contains(res.err.Error(), "no space left") {
			t.Errorf("Wait = %v, want the failed point write (no space left on device)", res.err)
		}
		if res.state != event.Failed {
			t.Errorf("the scheduler ended %q, want failed", res.state)
		}
		if !g.outputOff() {
			t.Error("generator output on after the disk filled")
		}
		// Still full: what was written is readable and whole.
		verifyPoints(t, rf, expect{freqs: freqs, acked: res.acked})
		if len(rf.points) < 4 {
			t.Errorf("%d points stored, want at least the 4 before the disk filled", len(rf.points))
		}
		if _, ok := rf.mentions("no space left"); ok {
			t.Logf("the cause reached events.jsonl")
		} else {
			t.Logf("events.jsonl could not record the cause (full disk); meta.json says %q", rf.metaState)
		}
		ro, err := g.st.OpenRun(filepath.Base(res.dir))
		if err != nil {
			t.Fatalf("reopening the run on the full disk: %v", err)
		}
		pts, err := ro.Points()
		ro.Close()
		if err != nil || len(pts) != len(rf.points) {
			t.Errorf("reading back on the full disk: %d points, %v; on disk %d", len(pts), err, len(rf.points))
		}
		// Space freed: the run is interrupted (or failed) and resumes.
		if err := os.Remove(fp); err != nil {
			t.Fatal(err)
		}
		run, err := g.st.OpenRun(filepath.Base(res.dir))
		if err != nil {
			t.Fatal(err)
		}
		if m := run.Meta(); m.State != event.Interrupted && m.State != event.Failed {
			t.Errorf("after freeing space the run is %q, want interrupted or failed", m.State)
		} else {
			tally.stopped.Add(1)
		}
		if err := run.Lock(); err != nil {
			t.Fatal(err)
		}
		res2 := g.sweepRun(context.Background(), run, p, sched.Opts{Resume: true}, nil)
		if res2.err != nil {
			t.Errorf("resume: %v", res2.err)
		}
		verifyRun(t, res.dir, expect{freqs: freqs, acked: append(res.acked, res2.acked...), off: g.outputOff,
			final: []event.State{event.Done}, note: logf(t, "disk full")})
	})
}

// TestDiskFullAtTheEnd fills the disk after the last point is stored and
// before the run is recorded done, so that its final state cannot be
// recorded: the scheduler must not
// report a completed run that the store does not hold as done.
func TestDiskFullAtTheEnd(t *testing.T) {
	t.Parallel()
	if inMountNamespace(t) {
		return
	}
	safe(t, func(t *testing.T) {
		mnt := mountTmpfs(t, "1m")
		g := openRig(t, 100, filepath.Join(mnt, "runs"), nil)
		p, freqs := loadPlan(t, "plan.toml", planTOML, g.b)
		filled := false
		// Finish runs after the last point is stored and before the done
		// state is recorded.
		opts := sched.Opts{Finish: func(ctx context.Context, pts []point.Point) ([]byte, error) {
			fill(t, mnt)
			filled = true
			return nil, nil
		}}
		res := g.sweep(context.Background(), p, planTOML, opts, nil)
		if !filled {
			t.Fatalf("the run never finished: %s, %v", res.state, res.err)
		}
		tally.faults.Add(1)
		rf := readRunFiles(t, res.dir)
		verifyPoints(t, rf, expect{freqs: freqs, acked: res.acked})
		if !g.outputOff() {
			t.Error("generator output on")
		}
		if res.err == nil && rf.metaState != event.Done {
			t.Errorf("the scheduler reports the run done (Wait = nil, state %q), but its final state could not be stored: meta.json says %q; the next open will call it interrupted", res.state, rf.metaState)
		}
		t.Logf("Wait = %v; scheduler state %q; meta.json %q", res.err, res.state, rf.metaState)
	})
}
