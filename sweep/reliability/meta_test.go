package reliability

import (
	"bufio"
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"rolloff/sweep/event"
	"rolloff/sweep/store"
)

// readMeta reads meta.json and checks that it is whole JSON naming run id.
func readMeta(path, id string) (event.State, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return "", err
	}
	var m struct {
		ID    string      `json:"id"`
		State event.State `json:"state"`
	}
	if err := json.Unmarshal(data, &m); err != nil {
		return "", fmt.Errorf("%d bytes, not valid JSON: %w", len(data), err)
	}
	if m.ID != id || m.State == "" {
		return "", fmt.Errorf("id %q, state %q; want id %q and a state", m.ID, m.State, id)
	}
	return m.State, nil
}

// temps lists the temporary files in dir.
func temps(dir string) []string {
	ents, _ := os.ReadDir(dir)
	var out []string
	for _, e := range ents {
		if strings.HasPrefix(e.Name(), ".") {
			out = append(out, e.Name())
		}
	}
	return out
}

// TestMetaAtomicUnderConcurrentReads replaces meta.json hundreds of times
// (every state change does) while readers read it as fast as they can:
// every read must find the whole file, valid JSON, never a half-written
// or missing one, and no temporary file may be left at the end.
func TestMetaAtomicUnderConcurrentReads(t *testing.T) {
	t.Parallel()
	safe(t, func(t *testing.T) {
		st, err := store.Open(t.TempDir())
		if err != nil {
			t.Fatal(err)
		}
		run, err := st.Create(store.CreateOpts{PlanFile: "plan.toml", PlanData: []byte(planTOML)})
		if err != nil {
			t.Fatal(err)
		}
		defer run.Close()
		path := filepath.Join(run.Dir(), store.FileMeta)
		var stop atomic.Bool
		var reads, bad atomic.Int64
		var wg sync.WaitGroup
		var firstBad atomic.Value
		for range 3 {
			wg.Add(1)
			go func() {
				defer wg.Done()
				for !stop.Load() {
					if _, err := readMeta(path, run.ID()); err != nil {
						if bad.Add(1) == 1 {
							firstBad.Store(err.Error())
						}
					}
					reads.Add(1)
				}
			}()
		}
		states := []event.State{event.Settling, event.Reading, event.Paused, event.Settling, event.Reading}
		const writes = 200
		for i := range writes {
			if err := run.SetState(states[i%len(states)], fmt.Sprintf("update %d of %d", i+1, writes)); err != nil {
				t.Fatal(err)
			}
		}
		if err := run.SetState(event.Done, "finished"); err != nil {
			t.Fatal(err)
		}
		stop.Store(true)
		wg.Wait()
		if n := bad.Load(); n > 0 {
			t.Errorf("%d of %d reads of meta.json found it broken, first: %v", n, reads.Load(), firstBad.Load())
		}
		if reads.Load() < writes {
			t.Errorf("only %d reads during %d writes", reads.Load(), writes)
		}
		if s, err := readMeta(path, run.ID()); err != nil || s != event.Done {
			t.Errorf("final meta.json: %q, %v", s, err)
		}
		if left := temps(run.Dir()); len(left) > 0 {
			t.Errorf("temporary files left: %v", left)
		}
		t.Logf("%d writes, %d concurrent reads, all whole", writes+1, reads.Load())
	})
}

// TestMetaWriterKilled kills, at random moments, a process that replaces
// meta.json in a loop: after each kill meta.json must be whole JSON (the
// old or the new state, nothing in between), and the next open must
// remove the temporary file the crash may have left.
func TestMetaWriterKilled(t *testing.T) {
	t.Parallel()
	safe(t, func(t *testing.T) {
		dir := t.TempDir()
		st, err := store.Open(dir)
		if err != nil {
			t.Fatal(err)
		}
		run, err := st.Create(store.CreateOpts{PlanFile: "plan.toml", PlanData: []byte(planTOML)})
		if err != nil {
			t.Fatal(err)
		}
		id := run.ID()
		run.Close()
		path := filepath.Join(dir, id, store.FileMeta)
		rng := rand.New(rand.NewPCG(7, 11))
		leftovers := 0
		for round := range 6 {
			cmd := exec.Command(os.Args[0], "-test.run=^TestMetaWriterProcess$", "-test.count=1")
			cmd.Env = append(os.Environ(), childEnv+"="+dir+"|"+id)
			stdout, err := cmd.StdoutPipe()
			if err != nil {
				t.Fatal(err)
			}
			cmd.Stderr = os.Stderr
			if err := cmd.Start(); err != nil {
				t.Fatal(err)
			}
			ready := make(chan bool, 1)
			go func() {
				sc := bufio.NewScanner(stdout)
				ok := false
				for sc.Scan() {
					if sc.Text() == "writing" {
						ok = true
						break
					}
				}
				ready <- ok
				for sc.Scan() {
				}
			}()
			select {
			case ok := <-ready:
				if !ok {
					cmd.Wait()
					t.Fatalf("round %d: the writer process did not start writing", round)
				}
			case <-time.After(20 * time.Second):
				cmd.Process.Kill()
				cmd.Wait()
				t.Fatalf("round %d: the writer process did not start", round)
			}
			time.Sleep(time.Duration(5+rng.IntN(60)) * time.Millisecond)
			if err := cmd.Process.Signal(syscall.SIGKILL); err != nil {
				t.Fatal(err)
			}
			cmd.Wait()
			tally.faults.Add(1)
			if _, err := readMeta(path, id); err != nil {
				t.Errorf("round %d: after the kill meta.json is broken: %v", round, err)
			}
			leftovers += len(temps(filepath.Join(dir, id)))
			r, err := st.OpenRun(id)
			if err != nil {
				t.Fatalf("round %d: reopening after the kill: %v", round, err)
			}
			if m := r.Meta(); m.State != event.Interrupted {
				t.Errorf("round %d: a run whose writer was killed mid-sweep reopens %q, want interrupted", round, m.State)
			}
			r.Close()
			if left := temps(filepath.Join(dir, id)); len(left) > 0 {
				t.Errorf("round %d: temporary files left after recovery: %v", round, left)
			}
		}
		t.Logf("6 kills; %d temporary files found after kills, all removed by recovery", leftovers)
	})
}

// TestMetaWriterProcess is the writer of TestMetaWriterKilled, run in a
// process of its own; it is skipped otherwise.
func TestMetaWriterProcess(t *testing.T) {
	arg := os.Getenv(childEnv)
	if arg == "" {
		t.Skip("the child process of TestMetaWriterKilled")
	}
	dir, id, _ := strings.Cut(arg, "|")
	st, err := store.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	r, err := st.OpenRun(id)
	if err != nil {
		t.Fatal(err)
	}
	if err := r.Lock(); err != nil {
		t.Fatal(err)
	}
	fmt.Println("writing")
	for i := 0; ; i++ {
		s := event.Settling
		if i%2 == 1 {
			s = event.Reading
		}
		if err := r.SetState(s, fmt.Sprintf("update %d", i)); err != nil {
			t.Fatal(err)
		}
	}
}
