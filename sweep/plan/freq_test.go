package plan_test

import (
	"math"
	"strconv"
	"strings"
	"testing"

	"rolloff/driver"
	"rolloff/sweep/plan"
)

var benchLim = driver.GeneratorLimits{MinFreqHz: 0.01, MaxFreqHz: 1e6, MinVrms: 0.001, MaxVrms: 2}

func mustPlan(t *testing.T, doc string) *plan.Plan {
	t.Helper()
	p, err := plan.DecodeTOML("t.toml", []byte(doc))
	if err != nil {
		t.Fatalf("decode: %v", err)
	}
	if err := p.Validate(benchLim); err != nil {
		t.Fatalf("validate: %v", err)
	}
	return p
}

func freqs(t *testing.T, p *plan.Plan) []plan.Freq {
	t.Helper()
	fs, err := p.Freqs()
	if err != nil {
		t.Fatal(err)
	}
	return fs
}

func relDiff(a, b float64) float64 { return math.Abs(a-b) / math.Max(math.Abs(a), math.Abs(b)) }

// iecMid computes a mid-band frequency straight from IEC 61260-1:2014
// §5.2: G = 10^(3/10), fr = 1000 Hz, fm = fr·G^(x/b) for odd b (eq. 2),
// fm = fr·G^((2x+1)/(2b)) for even b (eq. 3).
func iecMid(x, b int) float64 {
	g := math.Pow(10, 3.0/10)
	if b%2 == 1 {
		return 1000 * math.Pow(g, float64(x)/float64(b))
	}
	return 1000 * math.Pow(g, float64(2*x+1)/float64(2*b))
}

func TestMidBandFormula(t *testing.T) {
	for _, b := range []int{1, 2, 3, 6, 12, 24} {
		for x := -40 * b / 3; x <= 14*b/3; x++ {
			got, want := plan.MidBandHz(x, b), iecMid(x, b)
			if relDiff(got, want) > 1e-13 {
				t.Errorf("b=%d x=%d: %.15g, formula gives %.15g", b, x, got, want)
			}
		}
	}
	// Odd b: band 0 is the reference frequency itself, and the decades
	// are hit exactly (IEC 61260-1 eq. 2 with x a multiple of 10b/3).
	if got := plan.MidBandHz(0, 3); got != 1000 {
		t.Errorf("1/3-octave band 0 = %.17g, want exactly 1000", got)
	}
	for x, want := range map[int]float64{-20: 10, -10: 100, 10: 10000, 20: 100000} {
		if got := plan.MidBandHz(x, 3); got != want {
			t.Errorf("1/3-octave band %d = %.17g, want exactly %g", x, got, want)
		}
	}
}

// The exact one-third-octave mid-band frequencies 10^(n/10) Hz as tabled
// (five significant figures) in IEC 61260-1 / ISO 266, 20 Hz..20 kHz
// (from memory).
var thirdOctaveExact = []float64{
	19.953, 25.119, 31.623, 39.811, 50.119, 63.096, 79.433, 100.00, 125.89, 158.49,
	199.53, 251.19, 316.23, 398.11, 501.19, 630.96, 794.33, 1000.0, 1258.9, 1584.9,
	1995.3, 2511.9, 3162.3, 3981.1, 5011.9, 6309.6, 7943.3, 10000, 12589, 15849, 19953,
}

// ISO 266:1997 preferred (nominal) frequencies of the one-third-octave
// bands from 20 Hz to 20 kHz.
var thirdOctaveNominal = []string{
	"20", "25", "31.5", "40", "50", "63", "80", "100", "125", "160",
	"200", "250", "315", "400", "500", "630", "800", "1k", "1.25k", "1.6k",
	"2k", "2.5k", "3.15k", "4k", "5k", "6.3k", "8k", "10k", "12.5k", "16k", "20k",
}

func TestThirdOctaveBands(t *testing.T) {
	p := mustPlan(t, "[frequencies]\nspacing = \"bands\"\nbands_per_octave = 3\nstart_hz = 20\nstop_hz = 20000\n[level]\nvrms = 1\n")
	fs := freqs(t, p)
	if len(fs) != len(thirdOctaveNominal) {
		t.Fatalf("%d bands, want %d: %v", len(fs), len(thirdOctaveNominal), fs)
	}
	for i, f := range fs {
		if relDiff(f.Hz, thirdOctaveExact[i]) > 5e-5 {
			t.Errorf("band %d: %.6g Hz, table gives %g", i, f.Hz, thirdOctaveExact[i])
		}
		if relDiff(f.Hz, iecMid(i-17, 3)) > 1e-13 {
			t.Errorf("band %d: %.15g Hz, IEC 61260-1 eq. 2 gives %.15g", i, f.Hz, iecMid(i-17, 3))
		}
		if f.Label != thirdOctaveNominal[i] {
			t.Errorf("band %d (%.5g Hz): label %q, ISO 266 nominal %q", i, f.Hz, f.Label, thirdOctaveNominal[i])
		}
	}
}

func TestOctaveBands(t *testing.T) {
	// ISO 266:1997 octave-band preferred frequencies, 31.5 Hz..16 kHz.
	want := []string{"31.5", "63", "125", "250", "500", "1k", "2k", "4k", "8k", "16k"}
	p := mustPlan(t, "[frequencies]\nspacing = \"bands\"\nbands_per_octave = 1\nstart_hz = 31.5\nstop_hz = 16000\n[level]\nvrms = 1\n")
	fs := freqs(t, p)
	var got []string
	for _, f := range fs {
		got = append(got, f.Label)
	}
	if strings.Join(got, " ") != strings.Join(want, " ") {
		t.Errorf("octave labels %v, want %v", got, want)
	}
	// Exact octave mid-bands 1000·G^x (from memory: 31.623, 15849 Hz).
	if relDiff(fs[0].Hz, 31.623) > 5e-5 || relDiff(fs[len(fs)-1].Hz, 15849) > 5e-5 {
		t.Errorf("octave ends %.6g, %.6g Hz", fs[0].Hz, fs[len(fs)-1].Hz)
	}
}

func TestHalfAndSixthOctaveLabels(t *testing.T) {
	// Even b: mid-bands sit half a band off 1 kHz (IEC 61260-1 eq. 3) on
	// 10^((2i+1)/40), whose ISO 3 R40 preferred numbers are (from memory)
	// 1.06 1.18 1.32 1.50 1.70 1.90 2.12 2.36 2.65 3.00 3.35 3.75 4.25 4.75
	// 5.30 6.00 6.70 7.50 8.50 9.50.
	sixth := []string{"1.06k", "1.18k", "1.32k", "1.5k", "1.7k", "1.9k", "2.12k", "2.36k", "2.65k", "3k",
		"3.35k", "3.75k", "4.25k", "4.75k", "5.3k", "6k", "6.7k", "7.5k", "8.5k", "9.5k"}
	p := mustPlan(t, "reference_hz = 2000\n[frequencies]\nspacing = \"bands\"\nbands_per_octave = 6\nstart_hz = 1000\nstop_hz = 10000\n[level]\nvrms = 1\n")
	fs := freqs(t, p)
	if len(fs) != len(sixth) {
		t.Fatalf("%d bands: %v", len(fs), fs)
	}
	for i, f := range fs {
		if f.Label != sixth[i] {
			t.Errorf("1/6 band %d: %q, want %q", i, f.Label, sixth[i])
		}
		if relDiff(f.Hz, iecMid(i, 6)) > 1e-13 {
			t.Errorf("1/6 band %d: %.15g", i, f.Hz)
		}
	}
	half := []string{"1.18k", "1.7k", "2.36k", "3.35k", "4.75k", "6.7k", "9.5k"}
	p = mustPlan(t, "reference_hz = 2000\n[frequencies]\nspacing = \"bands\"\nbands_per_octave = 2\nstart_hz = 1000\nstop_hz = 10000\n[level]\nvrms = 1\n")
	fs = freqs(t, p)
	for i, f := range fs {
		if i >= len(half) || f.Label != half[i] {
			t.Fatalf("1/2-octave labels %v, want %v", fs, half)
		}
	}
}

func TestNominalNearExact(t *testing.T) {
	// Preferred numbers are rounded values of the exact series: within
	// 1.3 % (ISO 3 rounds 10^(9/40) = 1.679 to 1.70, the widest).
	for _, b := range []int{1, 2, 3, 6} {
		for x := -30; x <= 30; x++ {
			nom, ok := plan.Nominal(x, b)
			if !ok {
				t.Fatalf("b=%d x=%d: no nominal", b, x)
			}
			if d := relDiff(nom, plan.MidBandHz(x, b)); d > 0.013 {
				t.Errorf("b=%d x=%d: nominal %g vs exact %g (%.2g)", b, x, nom, plan.MidBandHz(x, b), d)
			}
		}
	}
	for _, b := range []int{12, 24} {
		if _, ok := plan.Nominal(0, b); ok {
			t.Errorf("1/%d octave has no preferred numbers", b)
		}
	}
	p := mustPlan(t, "reference_hz = 1050\n[frequencies]\nspacing = \"bands\"\nbands_per_octave = 12\nstart_hz = 1000\nstop_hz = 1100\n[level]\nvrms = 1\n")
	fs := freqs(t, p)
	// 1000·10^(0.0125) = 1029.27 and 1000·10^(0.0375) = 1090.18 Hz.
	if len(fs) != 2 || fs[0].Label != "1.03k" || fs[1].Label != "1.09k" {
		t.Errorf("1/12-octave bands %v", fs)
	}
}

func TestLogDecadesExact(t *testing.T) {
	for _, ppd := range []int{1, 3, 7, 10, 12, 24, 100} {
		p := mustPlan(t, "[frequencies]\nstart_hz = 20\nstop_hz = 20000\npoints_per_decade = "+strconv.Itoa(ppd)+"\n[level]\nvrms = 1\n")
		fs := freqs(t, p)
		if fs[0].Hz != 20 || fs[len(fs)-1].Hz != 20000 {
			t.Errorf("ppd %d: ends %g..%g", ppd, fs[0].Hz, fs[len(fs)-1].Hz)
		}
		for _, dec := range []float64{100, 1000, 10000} {
			found := false
			for _, f := range fs {
				if f.Hz == dec {
					found = true
				}
			}
			if !found {
				t.Errorf("ppd %d: %g Hz not hit exactly", ppd, dec)
			}
		}
		step := 1 / float64(ppd)
		for i := 1; i < len(fs); i++ {
			d := math.Log10(fs[i].Hz / fs[i-1].Hz)
			// Grid points closer than half a step to an end point are
			// dropped, so a step is at most 1.5 grid steps.
			if d <= 0 || d > 1.5*step*(1+1e-9) {
				t.Errorf("ppd %d: step %d is %.4g decades", ppd, i, d)
			}
			// Interior grid points are 10^(k/ppd).
			if i < len(fs)-1 && i > 1 {
				k := math.Log10(fs[i].Hz) * float64(ppd)
				if math.Abs(k-math.Round(k)) > 1e-9 {
					t.Errorf("ppd %d: %g Hz is not on the grid", ppd, fs[i].Hz)
				}
			}
		}
	}
	// 10 Hz..1 kHz at 3 per decade: 10, 21.544, 46.416, 100, ... exactly 7.
	fs := freqs(t, mustPlan(t, "[frequencies]\nstart_hz = 10\nstop_hz = 1000\npoints_per_decade = 3\n[level]\nvrms = 1\n"))
	want := []float64{10, 21.544, 46.416, 100, 215.44, 464.16, 1000}
	if len(fs) != len(want) {
		t.Fatalf("%v", fs)
	}
	for i := range want {
		if relDiff(fs[i].Hz, want[i]) > 5e-5 {
			t.Errorf("point %d: %g, want %g", i, fs[i].Hz, want[i])
		}
	}
}

func TestLogCountAndLinear(t *testing.T) {
	fs := freqs(t, mustPlan(t, "[frequencies]\nstart_hz = 20\nstop_hz = 20000\npoints = 31\n[level]\nvrms = 1\n"))
	if len(fs) != 31 || fs[0].Hz != 20 || fs[30].Hz != 20000 {
		t.Fatalf("%d points %g..%g", len(fs), fs[0].Hz, fs[len(fs)-1].Hz)
	}
	r := math.Pow(1000, 1.0/30)
	for i := 1; i < 31; i++ {
		if relDiff(fs[i].Hz/fs[i-1].Hz, r) > 1e-12 {
			t.Errorf("ratio %d: %g, want %g", i, fs[i].Hz/fs[i-1].Hz, r)
		}
	}
	fs = freqs(t, mustPlan(t, "[frequencies]\nspacing = \"linear\"\nstart_hz = 100\nstop_hz = 1100\npoints = 11\n[level]\nvrms = 1\n"))
	for i, f := range fs {
		if math.Abs(f.Hz-float64(100+100*i)) > 1e-9 {
			t.Errorf("linear point %d: %g", i, f.Hz)
		}
	}
	fs = freqs(t, mustPlan(t, "[frequencies]\nspacing = \"linear\"\nstart_hz = 100\nstop_hz = 1050\nstep_hz = 100\n[level]\nvrms = 1\n"))
	if len(fs) != 11 || fs[9].Hz != 1000 || fs[10].Hz != 1050 {
		t.Errorf("stepped: %v", fs)
	}
	fs = freqs(t, mustPlan(t, "reference_hz = 0.5\n[frequencies]\nspacing = \"linear\"\nstart_hz = 0.1\nstop_hz = 0.7\nstep_hz = 0.1\n[level]\nvrms = 1\n"))
	if len(fs) != 7 || fs[6].Hz != 0.7 {
		t.Errorf("stepped 0.1: %v", fs)
	}
}

func TestListAndDescending(t *testing.T) {
	fs := freqs(t, mustPlan(t, "reference_hz = 100\n[frequencies]\nfrequencies_hz = [1000, 10, 100, 5]\ndescending = true\n[level]\nvrms = 1\n"))
	want := []float64{1000, 100, 10, 5}
	for i, f := range fs {
		if f.Hz != want[i] {
			t.Fatalf("list: %v, want %v", fs, want)
		}
	}
	fs = freqs(t, mustPlan(t, "[frequencies]\nspacing = \"bands\"\nstart_hz = 100\nstop_hz = 1000\ndescending = true\n[level]\nvrms = 1\n"))
	if fs[0].Label != "1k" || fs[len(fs)-1].Label != "100" {
		t.Errorf("descending bands: %v", fs)
	}
}

func TestFormatHz(t *testing.T) {
	for _, c := range []struct {
		hz   float64
		sig  int
		want string
	}{
		{31.5, 3, "31.5"}, {1000, 3, "1k"}, {1250, 3, "1.25k"}, {12589.254, 3, "12.6k"},
		{999.7, 3, "1k"}, {0.5, 3, "0.5"}, {2e6, 3, "2M"}, {1258.925, 4, "1.259k"},
	} {
		if got := plan.FormatHz(c.hz, c.sig); got != c.want {
			t.Errorf("FormatHz(%g, %d) = %q, want %q", c.hz, c.sig, got, c.want)
		}
	}
}

type constTiming struct {
	s     float64
	calls [][4]float64
}

func (c *constTiming) PointSeconds(prevHz, hz, prevVrms, vrms float64) float64 {
	c.calls = append(c.calls, [4]float64{prevHz, hz, prevVrms, vrms})
	return c.s + 10/hz // a settle time constant that dominates at low f
}

func TestEstimate(t *testing.T) {
	p := mustPlan(t, "[frequencies]\nstart_hz = 10\nstop_hz = 1000\npoints_per_decade = 3\n[level]\nvrms = 0.5\n[refine]\nenabled = true\nmax_points = 10\n")
	tm := &constTiming{s: 2}
	r, err := plan.Estimate(p, tm)
	if err != nil {
		t.Fatal(err)
	}
	fs := freqs(t, p)
	want := 0.0
	for _, f := range fs {
		want += 2 + 10/f.Hz
	}
	if r.Points != 7 || math.Abs(r.PhysicalS-want) > 1e-9 {
		t.Errorf("estimate %+v, want 7 points %g s", r, want)
	}
	if r.SlowestHz != 10 || r.SlowestS != 3 {
		t.Errorf("slowest %g Hz %g s", r.SlowestHz, r.SlowestS)
	}
	// The drift check at the end (the default): one point at the
	// reference (1 kHz) after the last plan point (1 kHz).
	drift := 2 + 10/1000.0
	if r.RefinePoints != 10 || r.DriftPoints != 1 || math.Abs(r.DriftS-drift) > 1e-9 || math.Abs(r.TotalS-(want+10*want/7+drift)) > 1e-9 {
		t.Errorf("refine and drift %+v", r)
	}
	if tm.calls[0] != [4]float64{0, 10, 0, 0.5} || tm.calls[1][0] != 10 || tm.calls[1][2] != 0.5 {
		t.Errorf("calls %v", tm.calls[:2])
	}
	if _, err := plan.Estimate(p, badTiming{}); err == nil {
		t.Error("a NaN from the timing model was accepted")
	}
}

// TestEstimateDriftChecks: a check after every 3 of 7 plan points and one
// at the end are three points at the reference, each periodic one after
// a plan point, the next plan point timed from the reference.
func TestEstimateDriftChecks(t *testing.T) {
	p := mustPlan(t, "reference_hz = 100\n[frequencies]\nstart_hz = 10\nstop_hz = 1000\npoints_per_decade = 3\n[level]\nvrms = 0.5\n[drift]\nevery_points = 3\n")
	tm := &constTiming{s: 2}
	r, err := plan.Estimate(p, tm)
	if err != nil {
		t.Fatal(err)
	}
	if r.DriftPoints != p.Drift.DriftChecks(7) || r.DriftPoints != 3 {
		t.Fatalf("%d drift points, the scheduler's count %d, want 3", r.DriftPoints, p.Drift.DriftChecks(7))
	}
	if len(tm.calls) != 7+3 || math.Abs(r.DriftS-3*(2+10/100.0)) > 1e-9 || math.Abs(r.TotalS-r.PhysicalS-r.DriftS) > 1e-9 {
		t.Errorf("calls %v, estimate %+v", tm.calls, r)
	}
	// Plan points 10, 21.5, 46.4 Hz, then the first check.
	if c := tm.calls[3]; math.Abs(c[0]-46.41588833612779) > 1e-9 || c[1] != 100 {
		t.Errorf("the first check follows the third plan point: %v", c)
	}
	if c := tm.calls[4]; c[0] != 100 {
		t.Errorf("the plan point after a check is timed from the reference: %v", c)
	}
}

type badTiming struct{}

func (badTiming) PointSeconds(_, _, _, _ float64) float64 { return math.NaN() }
