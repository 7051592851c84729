package reliability

import (
	"flag"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"runtime/debug"
	"strings"
	"sync/atomic"
	"testing"
	"time"
)

// tally is what the suite observed, summed over every test. The tests
// increment it; TestMain prints it as the one summary line.
var tally struct {
	faults    atomic.Int64 // faults that took effect (the simulator's counts, plus kills, signals, torn lines, full disks, unplugged ports)
	completed atomic.Int64 // runs that ended done with every plan point stored once
	stopped   atomic.Int64 // runs that ended failed/interrupted/aborted with the output off and the cause recorded
	lost      atomic.Int64 // points a subscriber or the API was told of that are not on disk (or plan points missing from a done run)
	dups      atomic.Int64 // points stored twice for one plan index or one frequency
	rejected  atomic.Int64 // bad inputs refused with an error naming the exact field
	panics    atomic.Int64 // panics recovered in a test, or found in a subprocess's output
}

// summaryLine formats the tally.
func summaryLine() string {
	return fmt.Sprintf("reliability: faults injected %d, runs completed %d, runs stopped safely %d, points lost %d, duplicate points %d, inputs rejected with a clear error %d, panics %d",
		tally.faults.Load(), tally.completed.Load(), tally.stopped.Load(), tally.lost.Load(),
		tally.dups.Load(), tally.rejected.Load(), tally.panics.Load())
}

// SummaryEnv names a file that receives the summary line instead of
// standard output, so that `make reliability` can print it last.
const SummaryEnv = "ROLLOFF_RELIABILITY_SUMMARY"

// childEnv marks a re-executed test binary that plays a child process
// (see TestMetaWriterProcess).
const childEnv = "ROLLOFF_RELIABILITY_CHILD"

// binPath is the rolloff binary built for the crash tests; buildErr says
// why there is none.
var (
	binPath  string
	buildErr error
)

func TestMain(m *testing.M) {
	flag.Parse()
	if os.Getenv(childEnv) != "" {
		os.Exit(m.Run())
	}
	if os.Getenv(nsEnv) != "" {
		// One test in its own mount namespace (inMountNamespace): the
		// parent built the binary and sums the tally.
		binPath = os.Getenv(nsBinEnv)
		if binPath == "" {
			buildErr = fmt.Errorf("no rolloff binary passed in %s", nsBinEnv)
		}
		code := m.Run()
		if f := os.Getenv(nsTallyEnv); f != "" {
			writeTally(f)
		}
		os.Exit(code)
	}
	dir, err := os.MkdirTemp("", "rolloff-reliability-")
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(2)
	}
	binPath = filepath.Join(dir, "rolloff")
	buildErr = build(binPath)
	code := m.Run()
	os.RemoveAll(dir)
	line := summaryLine()
	if f := os.Getenv(SummaryEnv); f != "" {
		if err := os.WriteFile(f, []byte(line+"\n"), 0o644); err != nil {
			fmt.Println(line)
		}
	} else {
		fmt.Println(line)
	}
	os.Exit(code)
}

// build compiles the rolloff command into path.
func build(path string) error {
	start := time.Now()
	cmd := exec.Command("go", "build", "-o", path, "rolloff/cmd/rolloff")
	out, err := cmd.CombinedOutput()
	if err != nil {
		return fmt.Errorf("go build rolloff/cmd/rolloff: %w\n%s", err, out)
	}
	if testing.Verbose() {
		fmt.Printf("built %s in %v\n", path, time.Since(start).Round(time.Millisecond))
	}
	return nil
}

// needBinary fails the test when the rolloff binary could not be built.
func needBinary(t *testing.T) string {
	t.Helper()
	if buildErr != nil {
		t.Fatalf("no rolloff binary: %v", buildErr)
	}
	return binPath
}

// safe runs f, turning a panic into a counted test failure.
func safe(t *testing.T, f func(t *testing.T)) {
	t.Helper()
	defer func() {
		if r := recover(); r != nil {
			tally.panics.Add(1)
			t.Errorf("panic: %v\n%s", r, debug.Stack())
		}
	}()
	f(t)
}

// checkNoPanic counts and reports a Go panic or fatal runtime error in a
// subprocess's output.
func checkNoPanic(t *testing.T, who, output string) {
	t.Helper()
	for _, marker := range []string{"panic: ", "fatal error: ", "goroutine 1 [running]"} {
		if strings.Contains(output, marker) {
			tally.panics.Add(1)
			t.Errorf("%s panicked:\n%s", who, tail(output, 4000))
			return
		}
	}
}

// tail returns the last n bytes of s.
func tail(s string, n int) string {
	if len(s) <= n {
		return s
	}
	return "…" + s[len(s)-n:]
}
