package reliability

import (
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync/atomic"
	"syscall"
	"testing"
)

// nsEnv marks a re-executed test binary running one test inside its own
// user and mount namespace (see inMountNamespace); nsBinEnv passes it the
// rolloff binary, nsTallyEnv the file for its tally.
const (
	nsEnv      = "ROLLOFF_RELIABILITY_USERNS"
	nsBinEnv   = "ROLLOFF_RELIABILITY_BIN"
	nsTallyEnv = "ROLLOFF_RELIABILITY_TALLY"
)

// inMountNamespace lets a test that mounts (a small tmpfs to fill, a
// read-only bind mount) run without root. As root, or in the namespace
// already, it returns false and the test goes on. Otherwise it runs the
// test again in a child of this test binary inside a new user and mount
// namespace (user_namespaces(7): the child is root of its own namespace
// and may mount a tmpfs and bind mounts there, which no one else sees),
// reports the child's result as the test's own, adds the child's tally
// to this one, and returns true: the caller returns at once.
func inMountNamespace(t *testing.T) bool {
	t.Helper()
	if os.Geteuid() == 0 || os.Getenv(nsEnv) != "" {
		return false
	}
	tallyFile := filepath.Join(t.TempDir(), "tally")
	cmd := exec.Command(os.Args[0], "-test.run=^"+t.Name()+"$", "-test.v", "-test.count=1")
	bin := binPath
	if buildErr != nil {
		bin = "" // the child then fails the tests that need it, saying so
	}
	cmd.Env = append(os.Environ(), nsEnv+"=1", nsBinEnv+"="+bin, nsTallyEnv+"="+tallyFile)
	cmd.SysProcAttr = &syscall.SysProcAttr{
		Cloneflags:                 syscall.CLONE_NEWUSER | syscall.CLONE_NEWNS,
		UidMappings:                []syscall.SysProcIDMap{{ContainerID: 0, HostID: os.Getuid(), Size: 1}},
		GidMappings:                []syscall.SysProcIDMap{{ContainerID: 0, HostID: os.Getgid(), Size: 1}},
		GidMappingsEnableSetgroups: false,
	}
	out, err := cmd.CombinedOutput()
	text := string(out)
	checkNoPanic(t, t.Name()+" in its own mount namespace", text)
	if data, rerr := os.ReadFile(tallyFile); rerr == nil {
		addTally(t, string(data))
	}
	switch {
	case err != nil && len(out) == 0:
		t.Fatalf("cannot run %s in a user and mount namespace (unprivileged user namespaces disabled?): %v", t.Name(), err)
	case err != nil:
		t.Errorf("%s in its own mount namespace failed: %v\n%s", t.Name(), err, tail(text, 6000))
	case strings.Contains(text, "--- SKIP: "+t.Name()):
		t.Errorf("%s skipped in its own mount namespace:\n%s", t.Name(), tail(text, 3000))
	case !strings.Contains(text, "--- PASS: "+t.Name()):
		t.Errorf("%s did not run in its own mount namespace:\n%s", t.Name(), tail(text, 3000))
	default:
		t.Logf("ran in its own user and mount namespace:\n%s", tail(text, 1500))
	}
	return true
}

// tallyFields is the tally in the order writeTally writes it.
func tallyFields() []*atomic.Int64 {
	return []*atomic.Int64{&tally.faults, &tally.completed, &tally.stopped, &tally.lost, &tally.dups, &tally.rejected, &tally.panics}
}

// writeTally writes this process's tally for the parent that ran it.
func writeTally(path string) {
	var parts []string
	for _, c := range tallyFields() {
		parts = append(parts, fmt.Sprint(c.Load()))
	}
	_ = os.WriteFile(path, []byte(strings.Join(parts, " ")+"\n"), 0o644)
}

// addTally adds a child's tally to this one.
func addTally(t *testing.T, line string) {
	f := strings.Fields(line)
	cs := tallyFields()
	if len(f) != len(cs) {
		t.Errorf("child tally %q: want %d numbers", line, len(cs))
		return
	}
	for i, c := range cs {
		var n int64
		if _, err := fmt.Sscan(f[i], &n); err != nil {
			t.Errorf("child tally %q: %v", line, err)
			return
		}
		c.Add(n)
	}
}
