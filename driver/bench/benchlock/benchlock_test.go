package benchlock

import (
	"bufio"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"strings"
	"syscall"
	"testing"
	"time"
)

// The helper process: with ROLLOFF_LOCK_HELPER set, TestMain takes the
// lock of the addresses listed in it, prints "held", and waits for its
// standard input to close (or to be killed).
func TestMain(m *testing.M) {
	if addrs := os.Getenv("ROLLOFF_LOCK_HELPER"); addrs != "" {
		l, err := Acquire(strings.Split(addrs, " "), Holder{Command: "helper", RunID: "run-helper"})
		if err != nil {
			fmt.Println("refused:", err)
			os.Exit(3)
		}
		fmt.Println("held")
		_, _ = bufio.NewReader(os.Stdin).ReadString('\n')
		l.Release()
		os.Exit(0)
	}
	os.Exit(m.Run())
}

// helper starts a process holding addrs and waits until it holds them.
func helper(t *testing.T, dir string, addrs ...string) (*exec.Cmd, func()) {
	t.Helper()
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	cmd.Env = append(os.Environ(), "ROLLOFF_LOCK_HELPER="+strings.Join(addrs, " "), "ROLLOFF_LOCK_DIR="+dir)
	in, err := cmd.StdinPipe()
	if err != nil {
		t.Fatal(err)
	}
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	line, err := bufio.NewReader(out).ReadString('\n')
	if err != nil || strings.TrimSpace(line) != "held" {
		t.Fatalf("helper: %q, %v", line, err)
	}
	return cmd, func() { in.Close(); _ = cmd.Wait() }
}

// TestSecondProcessRefused: another process holds an instrument (named
// differently: host case, default port); this one is refused, told the
// holder's pid, run and start, and gets the lock once the holder exits.
func TestSecondProcessRefused(t *testing.T) {
	dir := t.TempDir()
	t.Setenv("ROLLOFF_LOCK_DIR", dir)
	cmd, stop := helper(t, dir, "tcp://Bench-Gen.local", "tcp://192.0.2.21:5025")
	_, err := Acquire([]string{"tcp://192.0.2.30:5025", "tcp://bench-gen.local:5025"}, Holder{Command: "test"})
	var he *HeldError
	if !errors.Is(err, ErrHeld) || !errors.As(err, &he) {
		stop()
		t.Fatalf("Acquire = %v; want ErrHeld", err)
	}
	if he.Holder.PID != cmd.Process.Pid || he.Holder.RunID != "run-helper" || he.Holder.Since.IsZero() || he.Address != "tcp://bench-gen.local:5025" {
		t.Errorf("holder %+v at %s", he.Holder, he.Address)
	}
	for _, s := range []string{fmt.Sprint(cmd.Process.Pid), "run-helper", "since", "bench-gen.local:5025"} {
		if !strings.Contains(err.Error(), s) {
			t.Errorf("error %q does not name %q", err, s)
		}
	}
	// The refused Acquire released the address it had taken first.
	l2, err := Acquire([]string{"tcp://192.0.2.30"}, Holder{})
	if err != nil {
		t.Errorf("an address left locked by a refused Acquire: %v", err)
	} else {
		l2.Release()
	}
	stop()
	l, err := Acquire([]string{"tcp://bench-gen.local:5025"}, Holder{Command: "test"})
	if err != nil {
		t.Fatalf("after the holder exited: %v", err)
	}
	if err := l.SetRun("run-2"); err != nil {
		t.Fatal(err)
	}
	l.Release()
}

// TestCrashedHolderRecovered: a holder killed with SIGKILL leaves its lock
// file; the kernel dropped its flock, so the next Acquire succeeds.
func TestCrashedHolderRecovered(t *testing.T) {
	dir := t.TempDir()
	t.Setenv("ROLLOFF_LOCK_DIR", dir)
	cmd, stop := helper(t, dir, "tcp://192.0.2.20:5025")
	defer stop()
	if _, err := Acquire([]string{"tcp://192.0.2.20"}, Holder{}); !errors.Is(err, ErrHeld) {
		t.Fatalf("while held: %v", err)
	}
	if err := cmd.Process.Signal(syscall.SIGKILL); err != nil {
		t.Fatal(err)
	}
	_, _ = cmd.Process.Wait()
	deadline := time.Now().Add(5 * time.Second)
	for {
		l, err := Acquire([]string{"tcp://192.0.2.20"}, Holder{})
		if err == nil {
			l.Release()
			return
		}
		if time.Now().After(deadline) {
			t.Fatalf("after SIGKILL of the holder: %v", err)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// TestSameProcessTwice: two locks of one process on one address conflict
// too (the daemon's queue and a demo in one process).
func TestSameProcessTwice(t *testing.T) {
	t.Setenv("ROLLOFF_LOCK_DIR", t.TempDir())
	l, err := Acquire([]string{"usbtmc:///dev/usbtmc0", "usbtmc:///dev/usbtmc0"}, Holder{})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := Acquire([]string{"usbtmc:///dev/usbtmc0"}, Holder{}); !errors.Is(err, ErrHeld) {
		t.Errorf("second lock in one process: %v", err)
	}
	l.Release()
	if l, err := Acquire([]string{"usbtmc:///dev/usbtmc0"}, Holder{}); err != nil {
		t.Errorf("after Release: %v", err)
	} else {
		l.Release()
	}
}

func TestNormalize(t *testing.T) {
	for in, want := range map[string]string{
		"tcp://192.0.2.20":                    "tcp://192.0.2.20:5025",
		"tcp://LAB-GEN:5025/":                 "tcp://lab-gen:5025",
		"tcp://localhost:6000":                "tcp://127.0.0.1:6000",
		"tcp://[::1]:5025":                    "tcp://[::1]:5025",
		"serial:///dev/nonexist0?baud=115200": "dev:///dev/nonexist0",
	} {
		got, err := Normalize(in)
		if err != nil || got != want {
			t.Errorf("Normalize(%q) = %q, %v; want %q", in, got, err, want)
		}
	}
	if addressOf(fileName("tcp://[::1]:5025")) != "tcp://[::1]:5025" {
		t.Error("lock file name does not decode to its address")
	}
}
