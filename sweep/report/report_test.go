package report

import (
	"bytes"
	"encoding/xml"
	"flag"
	"image"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"rolloff/sweep/analysis"
)

var update = flag.Bool("update", false, "rewrite the golden images in testdata")

// needPoppler skips a test when Debian's poppler-utils are missing.
func needPoppler(t testing.TB) {
	t.Helper()
	for _, tool := range []string{"pdftotext", "pdftoppm"} {
		if _, err := exec.LookPath(tool); err != nil {
			t.Skipf("%s not found: apt-get install poppler-utils", tool)
		}
	}
}

// render loads the run in dir and writes its report, with the software
// version fixed so that the page does not depend on the build.
func render(t testing.TB, dir string, mask *analysis.Mask, paper Paper) string {
	t.Helper()
	in, err := Load(dir, Options{Mask: mask})
	if err != nil {
		t.Fatal(err)
	}
	in.Software = "rolloff test"
	var b bytes.Buffer
	if err := Write(&b, in, paper); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "report.pdf")
	if err := os.WriteFile(path, b.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

func pdfText(t testing.TB, path string) string {
	t.Helper()
	out, err := exec.Command("pdftotext", "-layout", path, "-").Output()
	if err != nil {
		t.Fatalf("pdftotext: %v", err)
	}
	return string(out)
}

// bboxDoc is pdftotext -bbox output: pages of words with their boxes in
// points.
type bboxDoc struct {
	Pages []struct {
		Width  float64 `xml:"width,attr"`
		Height float64 `xml:"height,attr"`
		Words  []struct {
			XMin float64 `xml:"xMin,attr"`
			YMin float64 `xml:"yMin,attr"`
			XMax float64 `xml:"xMax,attr"`
			YMax float64 `xml:"yMax,attr"`
			Text string  `xml:",chardata"`
		} `xml:"word"`
	} `xml:"body>doc>page"`
}

func pdfBoxes(t testing.TB, path string) bboxDoc {
	t.Helper()
	out, err := exec.Command("pdftotext", "-bbox", path, "-").Output()
	if err != nil {
		t.Fatalf("pdftotext -bbox: %v", err)
	}
	var d bboxDoc
	dec := xml.NewDecoder(bytes.NewReader(out))
	dec.Strict = false
	dec.AutoClose = xml.HTMLAutoClose
	dec.Entity = xml.HTMLEntity
	if err := dec.Decode(&d); err != nil {
		t.Fatalf("pdftotext -bbox output: %v", err)
	}
	return d
}

// checkLayout asserts that every word lies inside the page's margins
// (with half a millimetre of tolerance) and that no two words overlap;
// it returns the number of pages.
func checkLayout(t *testing.T, path string) int {
	t.Helper()
	d := pdfBoxes(t, path)
	if len(d.Pages) == 0 {
		t.Fatal("no pages")
	}
	m := (marginMM - 0.5) * 72 / 25.4
	for pi, p := range d.Pages {
		if len(p.Words) == 0 {
			t.Errorf("page %d: no text", pi+1)
		}
		for i, w := range p.Words {
			if w.XMin < m || w.XMax > p.Width-m || w.YMin < m*0.5 || w.YMax > p.Height-m*0.5 {
				t.Errorf("page %d: word %q at x %.1f..%.1f, y %.1f..%.1f pt leaves the margins of a %.0f × %.0f pt page",
					pi+1, w.Text, w.XMin, w.XMax, w.YMin, w.YMax, p.Width, p.Height)
			}
			for _, v := range p.Words[:i] {
				// Overlap by more than a quarter point either way.
				if w.XMin < v.XMax-0.25 && v.XMin < w.XMax-0.25 && w.YMin < v.YMax-0.25 && v.YMin < w.YMax-0.25 {
					t.Errorf("page %d: words %q and %q overlap", pi+1, v.Text, w.Text)
				}
			}
		}
	}
	return len(d.Pages)
}

func wantText(t *testing.T, text string, want ...string) {
	t.Helper()
	flat := strings.Join(strings.Fields(text), " ")
	for _, w := range want {
		if !strings.Contains(flat, w) {
			t.Errorf("report text lacks %q", w)
		}
	}
}

func TestReportText(t *testing.T) {
	needPoppler(t)
	dir := makeRun(t, demoFixture(80))
	mask := relMask("prototype acceptance", 30, 20e3, -0.6)
	path := render(t, dir, mask, A4)
	in, err := Load(dir, Options{Mask: mask})
	if err != nil {
		t.Fatal(err)
	}
	r := in.Result
	if r == nil || r.LowHz == nil || r.HighHz == nil {
		t.Fatalf("fixture has no corners: %+v", in.AnalysisErr)
	}
	// The corners are those of the transfer function (first-order
	// high-pass and Butterworth low-pass are 3.0103 dB down at their
	// corner frequency, by definition), within 1 %.
	if e := *r.LowHz/8 - 1; e > 0.01 || e < -0.01 {
		t.Errorf("low corner %g Hz, want 8 Hz within 1 %%", *r.LowHz)
	}
	if e := *r.HighHz/95e3 - 1; e > 0.01 || e < -0.01 {
		t.Errorf("high corner %g Hz, want 95 kHz within 1 %%", *r.HighHz)
	}
	text := pdfText(t, path)
	wantText(t, text,
		"PASS", "line-driver prototype", "LD-0042", "proto-A", "bench 3", "2026-11-30 09:15:00 UTC",
		"rolloff SIM-GEN-1, serial G-4711", "rolloff SIM-DCV-1, serial V-0815",
		"generator-scpi.toml", "dmm-scpi.toml", "converter-10db.toml", "Line-driver test bench",
		analysis.FormatWithU(*r.LowHz, *r.LowUHz)+" (k = 2)",
		analysis.FormatWithU(*r.HighHz, *r.HighUHz)+" (k = 2)",
		"prototype acceptance", "Worst margin", "output loaded with 600 ohm",
		"2 flagged and left out", "1 V (", "100 mV (",
		"Safety:", "rolloff test", "10 Hz", "1 kHz", "100 kHz", "1 MHz")
	if n := checkLayout(t, path); n != 1 {
		t.Errorf("%d pages, want 1", n)
	}
}

func TestReportFailingMask(t *testing.T) {
	needPoppler(t)
	dir := makeRun(t, demoFixture(60))
	// A lower limit of −0.2 dB up to 60 kHz cuts into the roll-off.
	path := render(t, dir, relMask("too tight", 20, 60e3, -0.2), A4)
	text := pdfText(t, path)
	wantText(t, text, "FAIL", "too tight", "lower limit", "worst margin −")
	if n := checkLayout(t, path); n != 1 {
		t.Errorf("%d pages, want 1", n)
	}
}

func TestReportNoCorners(t *testing.T) {
	needPoppler(t)
	// A flat amplifier swept well inside its band: no crossing at all.
	f := fixture{Name: "flat buffer", Unit: "FB-1", StartHz: 100, StopHz: 10e3, N: 30, GainDB: 6}
	dir := makeRun(t, f)
	path := render(t, dir, nil, Letter)
	text := pdfText(t, path)
	wantText(t, text, "NO MASK", "above the sweep", "No limit mask was checked")
	if regexp.MustCompile(`(^|\s)(low|high) [0-9]`).MatchString(text) {
		t.Error("corner labels drawn without corners")
	}
	if n := checkLayout(t, path); n != 1 {
		t.Errorf("%d pages, want 1", n)
	}
}

func TestReportThousandPoints(t *testing.T) {
	needPoppler(t)
	dir := makeRun(t, demoFixture(1000))
	path := render(t, dir, relMask("prototype acceptance", 30, 20e3, -0.6), A4)
	wantText(t, pdfText(t, path), "1000 measured", "PASS")
	if n := checkLayout(t, path); n != 1 {
		t.Errorf("%d pages, want 1", n)
	}
}

func TestReportLongText(t *testing.T) {
	needPoppler(t)
	f := demoFixture(50)
	f.Name = strings.Repeat("Balanced line driver with transformer output stage ", 4)[:200]
	f.Unit = strings.Repeat("SN", 32)
	f.Batch = strings.Repeat("B", 64)
	f.Operator = strings.Repeat("An operator with a long name ", 6)
	f.BenchName = strings.Repeat("A bench with a very long name ", 8)
	f.Notes = strings.Repeat("A long note about the fixture and the load. ", 20) + strings.Repeat("x", 300) + "\nlast line"
	dir := makeRun(t, f)
	path := render(t, dir, relMask("long", 30, 20e3, -0.6), A4)
	wantText(t, pdfText(t, path), "Balanced line driver", "Safety:")
	if n := checkLayout(t, path); n > 2 {
		t.Errorf("%d pages, want at most 2", n)
	}
}

func TestReportRunDir(t *testing.T) {
	// WriteRunDir, as the scheduler calls it, writes report.pdf in the run
	// directory; an analysis error is reported on the page.
	dir := makeRun(t, demoFixture(20))
	in, err := Load(dir, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if err := WriteRunDir(dir, in.Points, nil, analysis.ErrResponse, A4); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(filepath.Join(dir, FileReport))
	if err != nil || !bytes.HasPrefix(b, []byte("%PDF-")) {
		t.Fatalf("report.pdf: %v, %.8q", err, b)
	}
	if _, err := exec.LookPath("pdftotext"); err == nil {
		wantText(t, pdfText(t, filepath.Join(dir, FileReport)), "NO FIGURES", "No figures: "+analysis.ErrResponse.Error())
		if n := checkLayout(t, filepath.Join(dir, FileReport)); n != 1 {
			t.Errorf("%d pages, want 1", n)
		}
	}
}

func TestReportGolden(t *testing.T) {
	needPoppler(t)
	dir := makeRun(t, demoFixture(80))
	path := render(t, dir, relMask("prototype acceptance", 30, 20e3, -0.6), A4)
	out := filepath.Join(t.TempDir(), "page")
	if b, err := exec.Command("pdftoppm", "-r", "60", "-gray", "-png", "-singlefile", path, out).CombinedOutput(); err != nil {
		t.Fatalf("pdftoppm: %v %s", err, b)
	}
	got, err := os.ReadFile(out + ".png")
	if err != nil {
		t.Fatal(err)
	}
	golden(t, "report", got)
}

// golden compares a rendered page with testdata/name_golden.png,
// tolerating anti-aliasing differences (at most 0.5 % of the pixels off by
// more than 64 grey levels); -update rewrites it.
func golden(t *testing.T, name string, got []byte) {
	t.Helper()
	path := filepath.Join("testdata", name+"_golden.png")
	if *update {
		if err := os.MkdirAll("testdata", 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	wantB, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test -update to create it)", err)
	}
	gi, err1 := png.Decode(bytes.NewReader(got))
	wi, err2 := png.Decode(bytes.NewReader(wantB))
	if err1 != nil || err2 != nil {
		t.Fatal(err1, err2)
	}
	if gi.Bounds() != wi.Bounds() {
		t.Fatalf("%s: size %v, golden %v", name, gi.Bounds(), wi.Bounds())
	}
	bad := 0
	b := gi.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			if greyDiff(gi, wi, x, y) > 64 {
				bad++
			}
		}
	}
	if frac := float64(bad) / float64(b.Dx()*b.Dy()); frac > 0.005 {
		keep := filepath.Join(os.TempDir(), name+"_got.png")
		os.WriteFile(keep, got, 0o644)
		t.Errorf("%s: %.2f %% of pixels differ from the golden image (got written to %s)", name, 100*frac, keep)
	}
}

func greyDiff(a, b image.Image, x, y int) int {
	r1, g1, b1, _ := a.At(x, y).RGBA()
	r2, g2, b2, _ := b.At(x, y).RGBA()
	v := (int(r1+g1+b1) - int(r2+g2+b2)) / 3 >> 8
	if v < 0 {
		v = -v
	}
	return v
}

// TestLoadRecorded checks that the recorded figures and a mask checked on
// the rebuilt samples agree with analysing the run again.
func TestLoadRecorded(t *testing.T) {
	dir := makeRun(t, demoFixture(60))
	mask := relMask("tight", 20, 60e3, -0.2)
	a, err := Load(dir, Options{Mask: mask})
	if err != nil {
		t.Fatal(err)
	}
	b, err := LoadRecorded(dir, Options{Mask: mask})
	if err != nil {
		t.Fatal(err)
	}
	ra, rb := a.Result, b.Result
	if ra == nil || rb == nil || ra.LowHz == nil || rb.LowHz == nil || *ra.LowHz != *rb.LowHz || *ra.HighUHz != *rb.HighUHz ||
		ra.PeakingDB != rb.PeakingDB || rb.Mask == nil || ra.Mask.Pass != rb.Mask.Pass || ra.Mask.Failed != rb.Mask.Failed ||
		*ra.Mask.WorstMarginDB != *rb.Mask.WorstMarginDB || len(ra.Samples) != len(rb.Samples) {
		t.Fatalf("recorded %+v\nanalysed %+v", rb, ra)
	}
	if ra.Mask.Pass {
		t.Error("the tight mask passed: the comparison shows nothing")
	}
	// The recorded model is the analysed curve when it is accepted.
	if ra.Model == nil || !ra.Model.Accepted || rb.Model == nil {
		t.Fatal("fixture has no accepted model")
	}
	for _, f := range []float64{4, 8, 100, 1e4, 95e3, 1e6} {
		g, ok := ra.GainAt(f)
		if !ok {
			t.Fatalf("%g Hz outside the sweep", f)
		}
		if d := rb.Model.At(f) - g; d > 1e-9 || d < -1e-9 {
			t.Errorf("%g Hz: recorded model %g dB, analysed curve %g dB", f, rb.Model.At(f), g)
		}
	}
	if b.Mask != mask || a.Mask != mask {
		t.Error("the mask checked is not the one drawn")
	}
	// Without result.json the run is analysed.
	if err := os.Remove(filepath.Join(dir, "result.json")); err != nil {
		t.Fatal(err)
	}
	c, err := LoadRecorded(dir, Options{Mask: mask})
	if err != nil || c.Result == nil || *c.Result.LowHz != *ra.LowHz {
		t.Fatalf("without result.json: %v", err)
	}
	if _, ok := c.Result.GainAt(1000); !ok {
		t.Error("an analysed result has no curve")
	}
}

// TestReportPlanMask checks that a run whose plan carries a mask is
// reported against it, with or without the recorded figures.
func TestReportPlanMask(t *testing.T) {
	f := demoFixture(40)
	f.PlanTables = "[mask]\nname = \"plan limits\"\nrelative = true\nlower = [[10, -0.5], [20000, -0.5]]\n"
	dir := makeRun(t, f)
	for _, load := range []func(string, Options) (*Input, error){Load, LoadRecorded} {
		in, err := load(dir, Options{})
		if err != nil {
			t.Fatal(err)
		}
		// The 8 Hz corner is 3 dB down: −0.5 dB from 10 Hz fails.
		if v := in.Result.Mask; v == nil || v.Name != "plan limits" || v.Pass {
			t.Errorf("verdict %+v", v)
		}
	}
	// A mask given explicitly replaces the plan's.
	in, err := Load(dir, Options{Mask: relMask("loose", 100, 10e3, -1)})
	if err != nil || in.Result.Mask.Name != "loose" || !in.Result.Mask.Pass {
		t.Errorf("explicit mask: %v %+v", err, in.Result.Mask)
	}
}
