//go:build unix

package store

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"rolloff/sweep/event"
)

// TestSpecialFiles: a FIFO, a directory or a symbolic link in a run
// directory is not a regular file: OpenFile, the run's reads and List
// answer at once (ErrNotRegular, which is ErrNotFound), and no error
// names the store's directory.
func TestSpecialFiles(t *testing.T) {
	dir := t.TempDir()
	st, err := Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	r, err := st.Create(CreateOpts{PlanFile: "p.toml", PlanData: []byte(testPlan)})
	if err != nil {
		t.Fatal(err)
	}
	if err := r.SetState(event.Done, "done"); err != nil {
		t.Fatal(err)
	}
	id := r.ID()
	r.Close()
	rd := filepath.Join(dir, id)
	if err := syscall.Mkfifo(filepath.Join(rd, "response.csv"), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := syscall.Mkfifo(filepath.Join(rd, FileResult), 0o644); err != nil {
		t.Fatal(err)
	}
	outside := filepath.Join(t.TempDir(), "elsewhere.png")
	if err := os.WriteFile(outside, []byte("x"), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.Symlink(outside, filepath.Join(rd, "response.png")); err != nil {
		t.Fatal(err)
	}
	if err := os.Mkdir(filepath.Join(rd, "response.svg"), 0o755); err != nil {
		t.Fatal(err)
	}
	done := make(chan struct{})
	go func() {
		defer close(done)
		run, err := st.OpenRun(id)
		if err != nil {
			t.Error(err)
			return
		}
		defer run.Close()
		for _, name := range []string{"response.csv", FileResult, "response.png", "response.svg"} {
			f, err := run.OpenFile(name)
			if err == nil {
				f.Close()
				t.Errorf("%s opened", name)
				continue
			}
			if !errors.Is(err, ErrNotRegular) || !errors.Is(err, ErrNotFound) {
				t.Errorf("%s: %v, want ErrNotRegular", name, err)
			}
			if strings.Contains(err.Error(), dir) {
				t.Errorf("%s: error names the directory: %v", name, err)
			}
		}
		if _, err := st.List(); err != nil {
			t.Error(err)
		}
	}()
	select {
	case <-done:
	case <-time.After(10 * time.Second):
		t.Fatal("reading a run with a FIFO in it hangs")
	}
}
