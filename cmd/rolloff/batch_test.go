package main

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// cloneRun copies a run directory under a new id with the plan's unit
// set, as a second unit measured with the same plan would be stored.
func cloneRun(t *testing.T, src, id, unit string) string {
	t.Helper()
	dst := filepath.Join(filepath.Dir(src), id)
	if err := os.Mkdir(dst, 0o755); err != nil {
		t.Fatal(err)
	}
	ents, _ := os.ReadDir(src)
	for _, e := range ents {
		b, err := os.ReadFile(filepath.Join(src, e.Name()))
		if err != nil {
			t.Fatal(err)
		}
		switch e.Name() {
		case "meta.json":
			var m map[string]any
			json.Unmarshal(b, &m)
			m["id"] = id
			b, _ = json.Marshal(m)
		case "plan.toml":
			b = regexp.MustCompile(`(?m)^name = `).ReplaceAll(b, []byte(fmt.Sprintf("unit = %q\nname = ", unit)))
		}
		os.WriteFile(filepath.Join(dst, e.Name()), b, 0o644)
	}
	return dst
}

func TestBatchCommand(t *testing.T) {
	out := t.TempDir()
	var stdout, stderr bytes.Buffer
	if code := realMain([]string{"--log-level", "warn", "demo", "--no-serve", "--out", out}, strings.NewReader(""), &stdout, &stderr); code != 0 {
		t.Fatalf("demo: exit %d\n%s", code, stderr.String())
	}
	dirs, _ := filepath.Glob(filepath.Join(out, "*line-driver*"))
	if len(dirs) != 1 {
		t.Fatalf("run directories: %v", dirs)
	}
	a := cloneRun(t, dirs[0], "20261201-000001-unit-a", "LD-0001")
	b := cloneRun(t, dirs[0], "20261201-000002-unit-b", "LD-0002")
	pass := filepath.Join(t.TempDir(), "pass.toml")
	os.WriteFile(pass, []byte("relative = true\nupper = [[30, 0.5], [20000, 0.5]]\nlower = [[30, -1], [20000, -1]]\n"), 0o644)
	dst := filepath.Join(t.TempDir(), "summary")
	stdout.Reset()
	if err := batchMain(&stdout, &stderr, []string{a, b, "--mask", pass, "--reference", dirs[0], "-o", dst}); err != nil {
		t.Fatalf("%v\n%s", err, stderr.String())
	}
	if !strings.Contains(stdout.String(), "2 units, 2 pass, yield 100.0 %") {
		t.Errorf("stdout: %s", stdout.String())
	}
	f, err := os.Open(filepath.Join(dst, "batch.csv"))
	if err != nil {
		t.Fatal(err)
	}
	rows, err := csv.NewReader(f).ReadAll()
	f.Close()
	if err != nil || len(rows) != 3 || rows[1][1] != "LD-0001" || rows[2][1] != "LD-0002" || rows[1][3] != "pass" {
		t.Fatalf("batch.csv: %v %v", rows, err)
	}
	// The clones are the reference's measurement: no difference.
	if rows[1][16] != "0" || rows[1][17] != "0" {
		t.Errorf("difference to the reference: %v", rows[1][16:])
	}
	if b, err := os.ReadFile(filepath.Join(dst, "batch-summary.pdf")); err != nil || !bytes.HasPrefix(b, []byte("%PDF-")) {
		t.Errorf("batch-summary.pdf: %v", err)
	}
	// A mask the demo's 8 Hz corner fails: exit status 3.
	fail := filepath.Join(t.TempDir(), "fail.toml")
	os.WriteFile(fail, []byte("relative = true\nlower = [[10, -0.5], [20000, -0.5]]\n"), 0o644)
	var ee *exitError
	if err := batchMain(&stdout, &stderr, []string{a, b, "--mask", fail, "-o", dst}); !errors.As(err, &ee) || ee.code != exitMaskFailed {
		t.Errorf("failing mask: %v, want exit status %d", err, exitMaskFailed)
	}
	if err := batchMain(&stdout, &stderr, []string{a}); !errors.As(err, &ee) || ee.code != 2 {
		t.Errorf("no -o: %v, want a usage error", err)
	}
}
