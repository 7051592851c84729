package plan_test

import (
	"strings"
	"testing"

	"rolloff/sweep/plan"
)

func TestUnitFields(t *testing.T) {
	doc := base + "\n"
	// Top-level keys must precede the tables: put them first.
	head := "unit = \"LD-0042\"\nbatch = \"proto-A\"\noperator = \"bench 3\"\nnotes = \"first line\\nsecond line\"\n"
	p, err := plan.DecodeTOML("u.toml", []byte(head+doc))
	if err != nil {
		t.Fatal(err)
	}
	if err := p.Validate(benchLim); err != nil {
		t.Fatal(err)
	}
	if p.Unit != "LD-0042" || p.Batch != "proto-A" || p.Operator != "bench 3" || p.Notes != "first line\nsecond line" {
		t.Errorf("decoded %q %q %q %q", p.Unit, p.Batch, p.Operator, p.Notes)
	}
	for _, c := range []struct{ head, field, why string }{
		{"unit = \"" + strings.Repeat("9", plan.MaxUnitBytes+1) + "\"\n", "unit", "at most 64 bytes"},
		{"batch = \"a\\u0007b\"\n", "batch", "control characters"},
		{"notes = \"" + strings.Repeat("n", plan.MaxNotesBytes+1) + "\"\n", "notes", "at most 2000 bytes"},
		{"notes = \"a\\u001bb\"\n", "notes", "control characters"},
	} {
		p, err := plan.DecodeTOML("u.toml", []byte(c.head+doc))
		if err != nil {
			t.Fatal(err)
		}
		err = p.Validate(benchLim)
		fes := plan.FieldErrors(err)
		if len(fes) != 1 || fes[0].Field != c.field || fes[0].Line != 1 || !strings.Contains(fes[0].Allowed, c.why) {
			t.Errorf("%s: got %v, want one error on %s at line 1 saying %q", c.field, err, c.field, c.why)
		}
	}
}

func TestPlanMask(t *testing.T) {
	good := base + "[mask]\nname = \"acceptance\"\nrelative = true\nupper = [[20, 0.5], [20000, 0.5]]\nlower = [[20, -1], [20000, -1]]\n"
	p, err := plan.DecodeTOML("m.toml", []byte(good))
	if err != nil {
		t.Fatal(err)
	}
	if err := p.Validate(benchLim); err != nil {
		t.Fatal(err)
	}
	m, err := p.LimitMask()
	if err != nil || m == nil || m.Name != "acceptance" || !m.Relative || len(m.Upper) != 2 || m.Lower[1] != [2]float64{20000, -1} {
		t.Fatalf("mask %+v, %v", m, err)
	}
	if v, ok := m.LowerAt(2000); !ok || v != -1 {
		t.Errorf("lower limit at 2 kHz: %v %v", v, ok)
	}
	for _, c := range []struct{ mask, why string }{
		{"upper = [[20, 0.5]]\n", "want at least 2"},
		{"lower = [[20, -1], [10, -1]]\n", "non-decreasing"},
		{"relative = true\n", "neither \"upper\" nor \"lower\""},
	} {
		p, err := plan.DecodeTOML("m.toml", []byte(base+"[mask]\n"+c.mask))
		if err != nil {
			t.Fatal(err)
		}
		fes := plan.FieldErrors(p.Validate(benchLim))
		if len(fes) != 1 || fes[0].Field != "mask" || fes[0].File != "m.toml" || fes[0].Line == 0 || !strings.Contains(fes[0].Allowed, c.why) {
			t.Errorf("%q: got %v, want an error on mask saying %q", c.mask, fes, c.why)
		}
	}
	if _, err := plan.DecodeTOML("m.toml", []byte(base+"[mask]\nuper = [[1, 2], [3, 4]]\n")); err == nil {
		t.Error("an unknown mask key was accepted")
	}
}
