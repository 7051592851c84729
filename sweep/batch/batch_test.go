package batch

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"math"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"rolloff/sweep/analysis"
	"rolloff/sweep/internal/runfixture"
	"rolloff/sweep/report"
)

// TestCpkWorkedExample checks Cpk against the worked example of the
// NIST/SEMATECH e-Handbook of Statistical Methods, §6.1.6 (from memory):
// USL = 20, LSL = 8, mean 16, σ = 2 give Cp = 1.0, Cpu = 0.667,
// Cpl = 1.333 and Cpk = 0.667.
func TestCpkWorkedExample(t *testing.T) {
	lsl, usl := 8.0, 20.0
	near := func(got, want float64) bool { return math.Abs(got-want) < 5e-4 }
	if got, ok := Cpk(16, 2, &lsl, &usl); !ok || !near(got, 0.6667) {
		t.Errorf("Cpk = %v, %v; want 0.6667", got, ok)
	}
	if got, _ := Cpk(16, 2, nil, &usl); !near(got, 0.6667) {
		t.Errorf("Cpu = %v, want 0.6667", got)
	}
	if got, _ := Cpk(16, 2, &lsl, nil); !near(got, 1.3333) {
		t.Errorf("Cpl = %v, want 1.3333", got)
	}
	// Cp = (USL − LSL)/(6σ) = 1: a centred process has Cpk = Cp.
	if got, _ := Cpk(14, 2, &lsl, &usl); !near(got, 1) {
		t.Errorf("centred Cpk = %v, want Cp = 1", got)
	}
	if _, ok := Cpk(16, 0, &lsl, &usl); ok {
		t.Error("Cpk with σ = 0 reported")
	}
	if _, ok := Cpk(16, 2, nil, nil); ok {
		t.Error("Cpk without limits reported")
	}
}

// TestSummarize checks the statistics on a set computed by hand: mean 5,
// Σ(x − mean)² = 32, sample standard deviation √(32/7) (n − 1 in the
// denominator, NIST/SEMATECH e-Handbook §1.3.5.6).
func TestSummarize(t *testing.T) {
	s := Summarize([]float64{2, 4, 4, 4, 5, 5, 7, 9, math.NaN()})
	if s.N != 8 || s.Mean != 5 || math.Abs(s.SD-math.Sqrt(32.0/7)) > 1e-12 || s.Min != 2 || s.Max != 9 {
		t.Errorf("got %+v", s)
	}
	if s := Summarize([]float64{3}); s.N != 1 || s.Mean != 3 || !math.IsNaN(s.SD) {
		t.Errorf("one value: %+v", s)
	}
}

// TestLimits derives corner limits from a mask whose crossings of the
// level are computed by hand: lines linear in log frequency, so a
// crossing halfway in level is at the geometric mean of the vertices.
func TestLimits(t *testing.T) {
	m := &analysis.Mask{Relative: true,
		Lower: [][2]float64{{20, -0.5}, {20000, -0.5}, {40000, -6.5}},
		Upper: [][2]float64{{10, 0.5}, {200000, 0.5}, {400000, -9.5}}}
	l := limitsFor(m, 1000, -3.5)
	check := func(name string, got *float64, want float64) {
		t.Helper()
		if got == nil || math.Abs(*got/want-1) > 1e-9 {
			t.Errorf("%s = %v, want %v", name, got, want)
		}
	}
	// −3.5 is half way from −0.5 to −6.5: √(20000·40000).
	check("high LSL", l.HighLSL, math.Sqrt(20000*40000))
	// −3.5 is 0.4 of the way from 0.5 to −9.5: 200 kHz · 2^0.4.
	check("high USL", l.HighUSL, 200000*math.Pow(2, 0.4))
	// The lower line is above the level from its first vertex on.
	check("low USL", l.LowUSL, 20)
	if l.LowLSL != nil {
		t.Errorf("low LSL = %v, want none (the upper line is above the level below the reference)", *l.LowLSL)
	}
	check("peaking USL", l.PeakingUSL, 0.5)
	// An absolute mask limits the reference gain at the reference frequency.
	a := &analysis.Mask{Lower: [][2]float64{{10, 19}, {1e5, 19}}, Upper: [][2]float64{{10, 21}, {1e5, 21}}}
	la := limitsFor(a, 1000, 17)
	check("reference LSL", la.RefLSL, 19)
	check("reference USL", la.RefUSL, 21)
	if la.PeakingUSL != nil {
		t.Error("an absolute mask limited the peaking")
	}
}

// unitFixture is unit i of a batch of the line-driver prototype, with
// corners and gain spread deterministically; unit 3 has its low corner at
// 14 Hz, which the acceptance mask fails.
func unitFixture(store string, i int) runfixture.Fixture {
	f := runfixture.Demo(60)
	f.Store = store
	f.Flagged = 0
	f.Unit = fmt.Sprintf("LD-%04d", i)
	f.Batch = "B-2026-48"
	f.Created = time.Date(2026, 11, 30, 8, 0, 0, 0, time.UTC).Add(time.Duration(i) * time.Minute)
	f.LowHz = 8 * (1 + 0.03*math.Sin(float64(i)))
	f.HighHz = 95e3 * (1 + 0.02*math.Cos(1.7*float64(i)))
	f.GainDB = 20 + 0.1*math.Sin(2.1*float64(i))
	if i == 3 {
		f.LowHz = 14
	}
	return f
}

// acceptance is the batch's mask: within +0.5/−1 dB of the reference from
// 20 Hz to 30 kHz.
func acceptance() *analysis.Mask {
	return &analysis.Mask{Name: "line driver acceptance", Relative: true,
		Upper: [][2]float64{{20, 0.5}, {30000, 0.5}},
		Lower: [][2]float64{{20, -1}, {30000, -1}}}
}

func TestBatch(t *testing.T) {
	st := filepath.Join(t.TempDir(), "runs")
	var dirs []string
	for i := range 12 {
		dirs = append(dirs, runfixture.Make(t, unitFixture(st, i)))
	}
	refF := unitFixture(st, 100)
	refF.LowHz, refF.HighHz, refF.GainDB, refF.Unit = 8, 95e3, 20, "LD-REF"
	ref := runfixture.Make(t, refF)
	mask := acceptance()
	b, err := Load(dirs, Options{Mask: mask, Reference: ref})
	if err != nil {
		t.Fatal(err)
	}
	if len(b.Units) != 12 || b.Passed != 11 || b.Yield != 11.0/12 {
		t.Fatalf("%d units, %d passed, yield %v; want 12, 11, 11/12", len(b.Units), b.Passed, b.Yield)
	}
	// Each verdict is the one the unit's own analysis gives.
	for _, u := range b.Units {
		in, err := report.Load(u.Dir, report.Options{Mask: mask})
		if err != nil {
			t.Fatal(err)
		}
		want := Pass
		if !in.Result.Mask.Pass {
			want = Fail
		}
		if u.Verdict != want {
			t.Errorf("%s: verdict %s, its analysis says %s", u.Name(), u.Verdict, want)
		}
		if (u.In.Unit == "LD-0003") != (u.Verdict == Fail) {
			t.Errorf("%s: verdict %s", u.Name(), u.Verdict)
		}
	}
	// The reference differences: the corners less the reference's.
	for _, u := range b.Units {
		if u.LowDiffHz == nil || math.Abs(*u.LowDiffHz-(*u.In.Result.LowHz-*b.Reference.In.Result.LowHz)) > 1e-9 {
			t.Errorf("%s: low corner difference %v", u.Name(), u.LowDiffHz)
		}
	}

	var buf bytes.Buffer
	if err := WriteCSV(&buf, b); err != nil {
		t.Fatal(err)
	}
	rows, err := csv.NewReader(&buf).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 13 || strings.Join(rows[0], ",") != strings.Join(CSVHeader, ",") {
		t.Fatalf("%d rows, header %v", len(rows), rows[0])
	}
	col := map[string]int{}
	for i, h := range rows[0] {
		col[h] = i
	}
	// The statistics of the high corner are those of the CSV column.
	var highs []float64
	for _, r := range rows[1:] {
		v, err := strconv.ParseFloat(r[col["high_hz"]], 64)
		if err != nil {
			t.Fatalf("high_hz %q: %v", r[col["high_hz"]], err)
		}
		highs = append(highs, v)
		if r[col["unit"]] == "LD-0003" && r[col["verdict"]] != Fail {
			t.Errorf("LD-0003 row: %v", r)
		}
	}
	var hf *Figure
	for i := range b.Figures {
		if b.Figures[i].Name == "high corner" {
			hf = &b.Figures[i]
		}
	}
	want := Summarize(highs)
	if hf == nil || hf.Stats.N != 12 || math.Abs(hf.Stats.Mean/want.Mean-1) > 1e-8 || math.Abs(hf.Stats.SD/want.SD-1) > 1e-6 {
		t.Fatalf("high corner figure %+v, CSV gives %+v", hf, want)
	}
	if hf.LSL == nil || math.Abs(*hf.LSL-30000) > 1e-6 || math.IsNaN(hf.Cpk) {
		t.Errorf("high corner LSL %v (want the mask's 30 kHz, where its lower line ends above the level), Cpk %v", hf.LSL, hf.Cpk)
	}
	if c, _ := Cpk(hf.Stats.Mean, hf.Stats.SD, hf.LSL, hf.USL); c != hf.Cpk {
		t.Errorf("Cpk %v, formula gives %v", hf.Cpk, c)
	}

	out := t.TempDir()
	if err := Write(out, b, report.A4, "rolloff test"); err != nil {
		t.Fatal(err)
	}
	if _, err := exec.LookPath("pdftotext"); err != nil {
		t.Skip("pdftotext not found: apt-get install poppler-utils")
	}
	txt, err := exec.Command("pdftotext", filepath.Join(out, FileSummary), "-").Output()
	if err != nil {
		t.Fatal(err)
	}
	flat := strings.Join(strings.Fields(string(txt)), " ")
	for _, w := range []string{"YIELD", "91.7 %", "11 of 12 pass", "B-2026-48", `"line driver acceptance"`, "reference unit LD-REF",
		"high corner", "low corner", "peaking", "worst margin", "Cpk", "NIST/SEMATECH e-Handbook of Statistical Methods, §6.1.6",
		"Units that failed", "LD-0003", fmt.Sprintf("%.2f", hf.Cpk)} {
		if !strings.Contains(flat, w) {
			t.Errorf("summary lacks %q", w)
		}
	}
	checkBounds(t, filepath.Join(out, FileSummary))
}

// checkBounds asserts that every word of the PDF lies within the page's
// margins (pdftotext -bbox).
func checkBounds(t *testing.T, path string) {
	t.Helper()
	out, err := exec.Command("pdftotext", "-bbox", path, "-").Output()
	if err != nil {
		t.Fatal(err)
	}
	page := regexpPage.FindStringSubmatch(string(out))
	if page == nil {
		t.Fatal("no page in pdftotext -bbox output")
	}
	w, _ := strconv.ParseFloat(page[1], 64)
	h, _ := strconv.ParseFloat(page[2], 64)
	m := 13.5 * 72 / 25.4
	for _, wm := range regexpWord.FindAllStringSubmatch(string(out), -1) {
		x0, _ := strconv.ParseFloat(wm[1], 64)
		y0, _ := strconv.ParseFloat(wm[2], 64)
		x1, _ := strconv.ParseFloat(wm[3], 64)
		y1, _ := strconv.ParseFloat(wm[4], 64)
		if x0 < m || x1 > w-m || y0 < m/2 || y1 > h-m/2 {
			t.Errorf("word %q at %.0f..%.0f, %.0f..%.0f pt leaves the margins", wm[5], x0, x1, y0, y1)
		}
	}
}

func TestBatchErrors(t *testing.T) {
	if _, err := Load(nil, Options{}); err != ErrNoRuns {
		t.Errorf("no runs: %v", err)
	}
	if _, err := Load([]string{t.TempDir()}, Options{}); err == nil || !strings.Contains(err.Error(), "not a run directory") {
		t.Errorf("not a run: %v", err)
	}
	// A run too short to analyse is a unit with the error verdict.
	st := filepath.Join(t.TempDir(), "runs")
	f := unitFixture(st, 0)
	f.N = 2
	short := runfixture.Make(t, f)
	good := runfixture.Make(t, unitFixture(st, 1))
	b, err := Load([]string{short, good}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if b.Units[0].Verdict != Error || b.Units[1].Verdict != NoMask || b.Passed != 1 {
		t.Errorf("verdicts %s, %s, passed %d", b.Units[0].Verdict, b.Units[1].Verdict, b.Passed)
	}
	if err := WriteSummary(&bytes.Buffer{}, b, report.Letter, "rolloff test"); err != nil {
		t.Error(err)
	}
}

// TestBatchPlanMask checks that units whose plans carry the same mask are
// held to it without --mask, and that differing masks give no common one.
func TestBatchPlanMask(t *testing.T) {
	st := filepath.Join(t.TempDir(), "runs")
	tables := "[mask]\nname = \"plan acceptance\"\nrelative = true\nupper = [[20, 0.5], [30000, 0.5]]\nlower = [[20, -1], [30000, -1]]\n"
	var dirs []string
	for i := range 5 {
		f := unitFixture(st, i)
		f.PlanTables = tables
		dirs = append(dirs, runfixture.Make(t, f))
	}
	b, err := Load(dirs, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if b.Mask == nil || b.Mask.Name != "plan acceptance" || b.Passed != 4 || b.Units[3].Verdict != Fail {
		t.Fatalf("mask %+v, passed %d", b.Mask, b.Passed)
	}
	f := unitFixture(st, 9)
	dirs = append(dirs, runfixture.Make(t, f)) // no mask in its plan
	if b, err = Load(dirs, Options{}); err != nil || b.Mask != nil || b.Units[5].Verdict != NoMask {
		t.Fatalf("mixed plans: %v, mask %+v", err, b.Mask)
	}
}
