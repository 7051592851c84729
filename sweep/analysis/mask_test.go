package analysis

import (
	"errors"
	"math"
	"strings"
	"testing"
)

const maskTOML = `# test mask
name = "line driver"
relative = true
upper = [[20, 0.5], [20000, 0.5]]
lower = [[20, -0.5], [2000, -0.5], [20000, -1.5]]
`

func TestMaskDecode(t *testing.T) {
	m, err := DecodeMaskTOML("m.toml", []byte(maskTOML))
	if err != nil {
		t.Fatal(err)
	}
	if m.Name != "line driver" || !m.Relative || len(m.Upper) != 2 || len(m.Lower) != 3 {
		t.Fatalf("%+v", m)
	}
	// Piecewise linear in log f: half-way in log between 2 kHz and 20 kHz
	// (√(2000·20000) ≈ 6325 Hz) the lower limit is half-way, −1 dB.
	if v, ok := m.LowerAt(math.Sqrt(2000 * 20000)); !ok || math.Abs(v+1) > 1e-12 {
		t.Errorf("lower at 6.3 kHz: %v %v", v, ok)
	}
	if _, ok := m.UpperAt(30000); ok {
		t.Errorf("upper limit outside its span")
	}
	j, err := DecodeMaskJSON("m.json", []byte(`{"relative": true, "upper": [[20, 0.5], [20000, 0.5]]}`))
	if err != nil || len(j.Upper) != 2 || j.Lower != nil {
		t.Fatalf("json: %+v %v", j, err)
	}
	bad := []struct{ name, text, want string }{
		{"m.toml", "relative = true\nuper = [[1, 2], [3, 4]]\n", `m.toml:2: unknown key "uper"`},
		{"m.toml", "upper = [[1, 2, 3], [3, 4]]\n", "upper[0]: 3 numbers"},
		{"m.toml", "upper = [[10, 2], [3, 4]]\n", "upper[1]: frequency 3 Hz below"},
		{"m.toml", "lower = [[-10, 2], [3, 4]]\n", "lower[0]: frequency -10 Hz"},
		{"m.toml", "lower = [[10, 2]]\n", `"lower": 1 vertex`},
		{"m.toml", "name = \"x\"\n", "neither"},
		{"m.toml", "upper = \"high\"\n", "m.toml:1"},
		{"m.json", `{"upper": [[1, 2], [3, 4]], "extra": 1}`, `unknown field "extra"`},
		{"m.json", "{\n\"upper\": [[1, 2], [3, \"x\"]]}", "m.json:2"},
	}
	for _, b := range bad {
		var err error
		if strings.HasSuffix(b.name, ".json") {
			_, err = DecodeMaskJSON(b.name, []byte(b.text))
		} else {
			_, err = DecodeMaskTOML(b.name, []byte(b.text))
		}
		if !errors.Is(err, ErrMask) || !strings.Contains(err.Error(), b.want) {
			t.Errorf("%q: error %v, want it to contain %q", b.text, err, b.want)
		}
	}
}

func TestMaskCheck(t *testing.T) {
	m, err := DecodeMaskTOML("m.toml", []byte(maskTOML))
	if err != nil {
		t.Fatal(err)
	}
	// A second-order low-pass at 25 kHz, +6 dB, sampled at 10^(k/10) Hz:
	// its last point inside the mask, 19.95 kHz, is −10·log10(1+(f/fc)⁴)
	// ≈ −1.40 dB relative, against a lower limit of −0.5 − log10(f/2000)
	// ≈ −1.499 dB there (the line falls 1 dB per decade from 2 kHz): the
	// worst margin, about 0.1 dB.
	pts := synth(func(f float64) float64 { return butterworthDB(f, 25000, 2) + 6 }, 10, 1e5, 10)
	r, err := Analyze(pts, Options{Mask: m, RefHz: 100})
	if err != nil {
		t.Fatal(err)
	}
	v := r.Mask
	if !v.Pass || v.Failed != 0 || v.Checked != 30 {
		t.Fatalf("verdict pass %v failed %d checked %d", v.Pass, v.Failed, v.Checked)
	}
	fw := math.Pow(10, 43.0/10)
	want := butterworthDB(fw, 25000, 2) - (r.ReferenceGainDB - 6) - (-0.5 - math.Log10(fw/2000))
	if v.WorstHz == nil || math.Abs(*v.WorstHz/fw-1) > 1e-12 || v.WorstLimit != "lower" || math.Abs(*v.WorstMarginDB-want) > 1e-6 {
		t.Errorf("worst %v at %v (%s), want %v at %v lower", deref(v.WorstMarginDB), deref(v.WorstHz), v.WorstLimit, want, fw)
	}
	// The same mask taken as absolute fails: the response is at +6 dB.
	abs := *m
	abs.Relative = false
	r, _ = Analyze(pts, Options{Mask: &abs, RefHz: 100})
	if r.Mask.Pass || r.Mask.Failed != 30 || r.Mask.WorstLimit != "upper" {
		t.Errorf("absolute verdict %+v", r.Mask)
	}
	if !strings.Contains(r.Text(), "mask:         FAIL line driver") {
		t.Errorf("report:\n%s", r.Text())
	}
	// Batch: one passes, one (a lower corner at 15 kHz) fails.
	pts2 := synth(func(f float64) float64 { return butterworthDB(f, 15000, 2) }, 10, 1e5, 10)
	b := AnalyzeBatch([]Run{{"a", pts}, {"b", pts2}}, Options{Mask: m, RefHz: 100})
	if b.Pass || b.Failed != 1 || !b.Entries[0].Result.Mask.Pass || b.Entries[1].Result.Mask.Pass {
		t.Errorf("batch %+v", b)
	}
}
