package plan_test

import (
	"regexp"
	"strconv"
	"strings"
	"testing"

	"rolloff/sweep/plan"
)

// TestTinyStepBounded: a step of 1e-300 Hz is refused with a message of
// bounded length naming the field, the point limit and the least step.
func TestTinyStepBounded(t *testing.T) {
	for _, step := range []string{"1e-300", "5e-324", "0.001"} {
		doc := "[frequencies]\nspacing = \"linear\"\nstart_hz = 20\nstop_hz = 20000\nstep_hz = " + step + "\n[level]\nvrms = 1\n"
		p, err := plan.DecodeTOML("tiny.toml", []byte(doc))
		if err != nil {
			t.Fatal(err)
		}
		err = p.Validate(benchLim)
		if err == nil {
			t.Fatalf("step_hz = %s accepted", step)
		}
		msg := err.Error()
		if !strings.Contains(msg, "tiny.toml:5: frequencies.step_hz") || !strings.Contains(msg, "at most 100000") {
			t.Errorf("step_hz = %s: %q does not name the file, line, field and limit", step, msg)
		}
		// (20000-20)/(100000-2) = 0.19980... Hz, rounded up.
		if !strings.Contains(msg, "≥ 0.2 Hz") {
			t.Errorf("step_hz = %s: %q does not give the least step", step, msg)
		}
		if len(msg) > 200 || regexp.MustCompile(`\d{12}`).MatchString(msg) {
			t.Errorf("step_hz = %s: message not bounded: %d bytes: %.120q", step, len(msg), msg)
		}
	}
}

// TestElementLines: the line of a list element is where it stands, in
// both formats, for a document too large to rescan per element.
func TestElementLines(t *testing.T) {
	var tb, jb strings.Builder
	tb.WriteString("[frequencies]\nspacing = \"list\"\nfrequencies_hz = [\n")
	jb.WriteString("{\"frequencies\": {\"spacing\": \"list\", \"frequencies_hz\": [\n")
	const n = 5000
	for i := range n {
		v := strconv.Itoa(100 + i)
		if i == n-1 {
			v = "3e9" // above the generator's range
		}
		sep := ",\n"
		if i == n-1 {
			sep = "\n"
		}
		tb.WriteString(" " + v + sep)
		jb.WriteString(" " + v + sep)
	}
	tb.WriteString("]\n[level]\nvrms = 1\n")
	jb.WriteString("]}, \"level\": {\"vrms\": 1}}\n")
	for _, tc := range []struct {
		name string
		data string
		dec  func(string, []byte) (*plan.Plan, error)
		line string // of the last element: after 3 header lines in TOML, 1 in JSON
	}{{"l.toml", tb.String(), plan.DecodeTOML, "5003"}, {"l.json", jb.String(), plan.DecodeJSON, "5001"}} {
		p, err := tc.dec(tc.name, []byte(tc.data))
		if err != nil {
			t.Fatal(err)
		}
		if len(p.Frequencies.ListHz) != n {
			t.Fatalf("%s: %d frequencies", tc.name, len(p.Frequencies.ListHz))
		}
		err = p.Validate(benchLim)
		want := tc.name + ":" + tc.line + ": frequencies.frequencies_hz[4999]"
		if err == nil || !strings.Contains(err.Error(), want) {
			t.Errorf("%s: got %v, want %q", tc.name, err, want)
		}
	}
}
