package main

import (
	"bytes"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// TestReportCommand runs the demo, which leaves report.pdf in its run
// directory, and writes the report again on letter paper with a mask.
func TestReportCommand(t *testing.T) {
	out := t.TempDir()
	var stdout, stderr bytes.Buffer
	if code := realMain([]string{"--log-level", "warn", "demo", "--no-serve", "--out", out}, strings.NewReader(""), &stdout, &stderr); code != 0 {
		t.Fatalf("demo: exit %d\n%s", code, stderr.String())
	}
	dirs, _ := filepath.Glob(filepath.Join(out, "*line-driver*"))
	if len(dirs) != 1 {
		t.Fatalf("run directories: %v", dirs)
	}
	if b, err := os.ReadFile(filepath.Join(dirs[0], "report.pdf")); err != nil || !bytes.HasPrefix(b, []byte("%PDF-")) {
		t.Fatalf("the finished run has no report.pdf: %v", err)
	}
	mask := filepath.Join(t.TempDir(), "m.toml")
	// The demo DUT's high-pass corner is at 8 Hz: a −0.5 dB lower limit
	// from 10 Hz must fail.
	os.WriteFile(mask, []byte("name = \"demo acceptance\"\nrelative = true\nlower = [[10, -0.5], [20000, -0.5]]\n"), 0o644)
	pdf := filepath.Join(t.TempDir(), "again.pdf")
	stdout.Reset()
	if err := reportMain(&stdout, &stderr, []string{dirs[0], "-o", pdf, "--paper", "letter", "--mask", mask}); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(stdout.String(), pdf) {
		t.Errorf("output not named: %q", stdout.String())
	}
	if _, err := exec.LookPath("pdftotext"); err == nil {
		b, err := exec.Command("pdftotext", "-bbox", pdf, "-").Output()
		if err != nil {
			t.Fatal(err)
		}
		if !strings.Contains(string(b), `width="612.000000" height="792.000000"`) {
			t.Error("the page is not letter size")
		}
		txt, err := exec.Command("pdftotext", pdf, "-").Output()
		if err != nil {
			t.Fatal(err)
		}
		for _, w := range []string{"FAIL", "SIM-GEN-1, serial 0001", `against "demo acceptance"`} {
			if !strings.Contains(string(txt), w) {
				t.Errorf("report lacks %q", w)
			}
		}
	}
	var ee *exitError
	if err := reportMain(&stdout, &stderr, []string{dirs[0], "--paper", "a5"}); !errors.As(err, &ee) || ee.code != 2 {
		t.Errorf("--paper a5: %v, want a usage error", err)
	}
	if err := reportMain(&stdout, &stderr, []string{t.TempDir()}); err == nil || !strings.Contains(err.Error(), "not a run directory") {
		t.Errorf("empty directory: %v", err)
	}
}
