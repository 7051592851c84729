package web

import (
	"bufio"
	"context"
	"fmt"
	"io"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"rolloff/configs"
	"rolloff/driver/bench"
	"rolloff/sweep/store"
)

// The test binary doubles as a daemon for the benchmarks that must see
// the daemon's own process: ROLLOFF_TEST_DAEMON is "source:POINTS:INTERVAL"
// (the fast point source) or "demo:SCALE" (the real scheduler on the
// simulated bench), ROLLOFF_TEST_DIR the store directory. It prints its
// URL on a line and serves until its standard input closes.
func TestMain(m *testing.M) {
	if mode := os.Getenv("ROLLOFF_TEST_DAEMON"); mode != "" {
		if err := runTestDaemon(mode, os.Getenv("ROLLOFF_TEST_DIR")); err != nil {
			fmt.Fprintln(os.Stderr, err)
			os.Exit(1)
		}
		os.Exit(0)
	}
	os.Exit(m.Run())
}

func runTestDaemon(mode, dir string) error {
	parts := strings.Split(mode, ":")
	var srv *Server
	var stop func()
	switch {
	case parts[0] == "source" && len(parts) == 3:
		n, _ := strconv.Atoi(parts[1])
		iv, err := time.ParseDuration(parts[2])
		if err != nil {
			return err
		}
		s, be, st, err := newSourceServer(n, iv, dir)
		if err != nil {
			return err
		}
		be.startDelay = 300 * time.Millisecond
		srv, stop = s, st
	case parts[0] == "demo" && len(parts) == 2:
		scale, _ := strconv.ParseFloat(parts[1], 64)
		cfg, err := configs.LoadBench(configs.SimBench)
		if err != nil {
			return err
		}
		cfg.TimeScale = scale
		b, err := bench.Open(context.Background(), cfg, zerolog.Nop())
		if err != nil {
			return err
		}
		if err := b.Sim.SelectRange(8); err != nil {
			return err
		}
		st, err := store.Open(dir)
		if err != nil {
			return err
		}
		s, err := New(Config{Addr: "127.0.0.1:0", Log: zerolog.Nop(), Bench: b, Store: st})
		if err != nil {
			return err
		}
		ctx, cancel := context.WithCancel(context.Background())
		served := make(chan error, 1)
		go func() { served <- s.Serve(ctx) }()
		srv, stop = s, func() { cancel(); <-served; b.Close() }
	default:
		return fmt.Errorf("ROLLOFF_TEST_DAEMON=%q: want source:N:INTERVAL or demo:SCALE", mode)
	}
	fmt.Println(strings.TrimSuffix(srv.URL(), "/"))
	_, _ = io.Copy(io.Discard, os.Stdin)
	stop()
	return nil
}

// testDaemon runs the test binary as a daemon subprocess.
type testDaemon struct {
	cmd   *exec.Cmd
	stdin io.WriteCloser
	base  string
	dir   string
}

func startTestDaemon(tb testing.TB, mode string) *testDaemon {
	tb.Helper()
	dir := tb.TempDir()
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	cmd.Env = append(os.Environ(), "ROLLOFF_TEST_DAEMON="+mode, "ROLLOFF_TEST_DIR="+dir)
	cmd.Stderr = os.Stderr
	in, err := cmd.StdinPipe()
	if err != nil {
		tb.Fatal(err)
	}
	out, err := cmd.StdoutPipe()
	if err != nil {
		tb.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		tb.Fatal(err)
	}
	line, err := bufio.NewReader(out).ReadString('\n')
	if err != nil {
		cmd.Process.Kill()
		tb.Fatalf("test daemon: %v", err)
	}
	return &testDaemon{cmd: cmd, stdin: in, base: strings.TrimSpace(line), dir: dir}
}

func (d *testDaemon) stop() {
	d.stdin.Close()
	done := make(chan struct{})
	go func() { d.cmd.Wait(); close(done) }()
	select {
	case <-done:
	case <-time.After(10 * time.Second):
		d.cmd.Process.Kill()
		<-done
	}
}

// rssMB reads a process's resident set size from /proc/PID/status.
func rssMB(pid int) float64 {
	data, err := os.ReadFile("/proc/" + strconv.Itoa(pid) + "/status")
	if err != nil {
		return 0
	}
	for _, l := range strings.Split(string(data), "\n") {
		if v, ok := strings.CutPrefix(l, "VmRSS:"); ok {
			kb, _ := strconv.ParseFloat(strings.TrimSuffix(strings.TrimSpace(v), " kB"), 64)
			return kb / 1024
		}
	}
	return 0
}
