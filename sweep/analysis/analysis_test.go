package analysis

import (
	"encoding/json"
	"errors"
	"math"
	"strings"
	"testing"

	"rolloff/sweep/point"
)

// synth samples gain(f) (dB) at ppd points per decade from f0 to f1 as
// points with Vin = 1 V.
func synth(gain func(f float64) float64, f0, f1 float64, ppd int) []point.Point {
	var pts []point.Point
	k0 := int(math.Round(float64(ppd) * math.Log10(f0)))
	k1 := int(math.Round(float64(ppd) * math.Log10(f1)))
	for k := k0; k <= k1; k++ {
		f := math.Pow(10, float64(k)/float64(ppd))
		g := gain(f)
		pts = append(pts, point.Point{Seq: len(pts), FreqHz: f, VinVrms: 1, VoutVrms: math.Pow(10, g/20), GainDB: g})
	}
	return pts
}

// butterworthDB is |H| = 1/√(1+(f/fc)^(2n)) in dB (filter handbook formula).
func butterworthDB(f, fc float64, n int) float64 {
	return -10 * math.Log10(1+math.Pow(f/fc, float64(2*n)))
}

// TestFirstOrderCorner: a first-order low-pass is 10·log10(1/2) = −3.0103 dB
// at its corner (filter handbook formula); the analysis finds the corner of
// a sampled one within 0.05 %.
func TestFirstOrderCorner(t *testing.T) {
	const fc = 3141.0
	m := Model{Sections: []Section{{Kind: LowPass1, FHz: fc}}}
	if g := m.At(fc); math.Abs(g-HalfPowerDB) > 1e-12 || math.Abs(HalfPowerDB+3.0103) > 1e-4 {
		t.Fatalf("first-order low-pass at fc: %v dB, want %v", g, HalfPowerDB)
	}
	r, err := Analyze(synth(m.At, 10, 1e6, 10), Options{RefHz: 10})
	if err != nil {
		t.Fatal(err)
	}
	// The reference at 10 Hz is 4·10⁻⁵ dB below 0 dB: negligible here.
	if r.HighHz == nil || math.Abs(*r.HighHz/fc-1) > 5e-4 {
		t.Fatalf("corner %v, want %v", deref(r.HighHz), fc)
	}
}

// TestButterworthHandbook: at 2·fc a Butterworth low-pass of order n is
// −6.99, −12.30, −18.13 dB for n = 1, 2, 3, and it rolls off at 20·n
// dB/decade (filter handbook formulas). The sections' cascades of the
// same order reproduce the formula, and the analysis measures the slope
// and the implied order.
func TestButterworthHandbook(t *testing.T) {
	const fc = 1000.0
	want := map[int]float64{1: -6.99, 2: -12.30, 3: -18.13}
	cascades := map[int][]Section{
		1: {{Kind: LowPass1, FHz: fc}},
		2: {{Kind: LowPass2, FHz: fc, Q: 1 / math.Sqrt2}},
		3: {{Kind: LowPass2, FHz: fc, Q: 1}, {Kind: LowPass1, FHz: fc}},
	}
	for n := 1; n <= 3; n++ {
		if g := butterworthDB(2*fc, fc, n); math.Abs(g-want[n]) > 0.005 {
			t.Errorf("n=%d: formula gives %.3f dB at 2fc, handbook %.2f", n, g, want[n])
		}
		m := Model{Sections: cascades[n]}
		for _, f := range []float64{100, 500, 1000, 2000, 7000, 50000} {
			if d := m.At(f) - butterworthDB(f, fc, n); math.Abs(d) > 1e-9 {
				t.Errorf("n=%d: cascade differs from the formula by %g dB at %v Hz", n, d, f)
			}
		}
		r, err := Analyze(synth(func(f float64) float64 { return butterworthDB(f, fc, n) }, 10, 1e6, 10), Options{RefHz: 10})
		if err != nil {
			t.Fatal(err)
		}
		if r.SlopeHigh == nil || math.Abs(r.SlopeHigh.DBPerDecade+20*float64(n)) > 1.5 || r.SlopeHigh.Order != n {
			t.Errorf("n=%d: slope %+v, want about %d dB/decade, order %d", n, r.SlopeHigh, -20*n, n)
		}
		if s := r.SlopeHigh; s != nil && math.Abs(s.DBPerOctave-s.DBPerDecade*math.Log10(2)) > 1e-12 {
			t.Errorf("dB/octave %v is not dB/decade × log10(2)", s.DBPerOctave)
		}
		if r.HighHz == nil || math.Abs(*r.HighHz/fc-1) > 5e-4 {
			t.Errorf("n=%d: corner %v, want %v", n, deref(r.HighHz), fc)
		}
		if lo, hi := r.Fitted().Order(); lo != 0 || hi != n {
			t.Errorf("n=%d: model %q has order %d/%d", n, r.Model.Description, lo, hi)
		}
	}
}

// TestGUMBudget is a worked example of JCGM 100:2008: converter spec
// ±0.5 % and DC voltmeter spec ±0.5 mV on a 0.5 V reading, both
// rectangular (u = a/√3, §4.3.7): 0.2887 % and 0.0577 %; Type A 0.02 %
// (§4.2); combined root-sum-square (§5.1.2):
// √(0.2887² + 0.0577² + 0.02²) % = 0.29507 %, i.e. 20/ln10 × 0.0029507 =
// 0.025630 dB; expanded with k = 2 (§6.2): 0.051259 dB.
func TestGUMBudget(t *testing.T) {
	b := PointBudget(point.Point{ConvAccRel: 0.005, DCAccV: 0.0005, DCVolts: 0.5, StdRel: 0.0002})
	checks := []struct {
		name      string
		got, want float64
	}{
		{"converter", b.ConverterRel, 0.002886751345948129},
		{"voltmeter", b.VoltmeterRel, 0.0005773502691896258},
		{"type A", b.TypeARel, 0.0002},
		{"combined", b.CombinedRel, 0.0029507061301774305},
		{"combined dB", b.CombinedDB, 0.025629507801083123},
		{"expanded dB", b.ExpandedDB, 0.051259015602166245},
	}
	for _, c := range checks {
		if math.Abs(c.got/c.want-1) > 1e-12 {
			t.Errorf("%s: %.10g, want %.10g", c.name, c.got, c.want)
		}
	}
}

// TestCornerUncertainty: u_f = u_dB / |d(dB)/d(ln f)| × f, with u_dB the
// corner's and the reference's combined. A first-order low-pass falls at
// 10 dB per neper of frequency at its corner (d/d ln f of −10·log10(1+u²)
// at u = 1 is −20/ln10 · 1/2), so with 0.1 % converter spec on every point
// (u = 0.001/√3 → 0.0050148 dB), the corner's standard uncertainty is
// √2 · 0.0050148 dB / (10/ln10 dB) × fc and the expanded one twice that.
func TestCornerUncertainty(t *testing.T) {
	const fc = 2000.0
	m := Model{Sections: []Section{{Kind: LowPass1, FHz: fc}}}
	pts := synth(m.At, 10, 1e6, 10)
	for i := range pts {
		pts[i].ConvAccRel = 0.001
	}
	r, err := Analyze(pts, Options{RefHz: 10})
	if err != nil {
		t.Fatal(err)
	}
	udb := 0.001 / math.Sqrt(3) * 20 / math.Ln10
	// The reference at 10 Hz is 0.0001 dB below 0 dB: the corner and its
	// slope move by less than 0.01 %.
	want := 2 * math.Sqrt2 * udb / (10 / math.Ln10) * fc
	if r.HighUHz == nil || math.Abs(*r.HighUHz/want-1) > 1e-3 {
		t.Fatalf("U(corner) %v Hz, want %v Hz", deref(r.HighUHz), want)
	}
	if !strings.Contains(r.Text(), "± ") || !strings.Contains(r.Text(), "(k = 2)") {
		t.Errorf("report lacks the corner's uncertainty:\n%s", r.Text())
	}
}

// TestDCCoupled: a low-pass measured from 10 Hz has no lower corner: null
// in JSON, DC-coupled, the sweep's start as bound.
func TestDCCoupled(t *testing.T) {
	r, err := Analyze(synth(func(f float64) float64 { return butterworthDB(f, 20000, 2) }, 10, 1e6, 10), Options{})
	if err != nil {
		t.Fatal(err)
	}
	if r.LowHz != nil || !r.DCCoupled || r.LowBeyondHz == nil || *r.LowBeyondHz != 10 {
		t.Fatalf("low %v dc %v beyond %v", deref(r.LowHz), r.DCCoupled, deref(r.LowBeyondHz))
	}
	if r.BandwidthHz == nil || *r.BandwidthHz != *r.HighHz {
		t.Errorf("bandwidth of a DC-coupled response: %v, want the upper corner %v", deref(r.BandwidthHz), deref(r.HighHz))
	}
	var m map[string]any
	b, _ := json.Marshal(r)
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	for _, k := range []string{"low_hz", "low_u_hz", "slope_db_per_decade_low", "centre_hz"} {
		if v, ok := m[k]; !ok || v != nil {
			t.Errorf("result.json %q = %v (present %v), want null", k, v, ok)
		}
	}
}

// TestBeyondSweep: a high-pass whose corner is below the sweep still rises
// at the start: no corner, not DC-coupled, bound given; and no upper
// corner up to the end.
func TestBeyondSweep(t *testing.T) {
	r, err := Analyze(synth(func(f float64) float64 { return butterworthDB(50/f, 1, 2) }, 80, 1e5, 10), Options{})
	if err != nil {
		t.Fatal(err)
	}
	if r.LowHz != nil || r.DCCoupled || r.LowBeyondHz == nil || math.Abs(*r.LowBeyondHz-79.43282347242814) > 1e-9 {
		t.Errorf("low %v dc %v beyond %v", deref(r.LowHz), r.DCCoupled, deref(r.LowBeyondHz))
	}
	if r.HighHz != nil || r.HighBeyondHz == nil || *r.HighBeyondHz != 1e5 {
		t.Errorf("high %v beyond %v", deref(r.HighHz), deref(r.HighBeyondHz))
	}
	if !strings.Contains(r.Text(), "below the sweep") {
		t.Errorf("report:\n%s", r.Text())
	}
}

// TestRippleCrossings: the 1 dB Chebyshev crosses −0.5 dB relative to its
// maximum several times in the passband; all crossings are listed and the
// corners are the ones bounding the passband around the reference.
func TestRippleCrossings(t *testing.T) {
	pts := loadScipyTable(t, "cheby1_lp4")
	r, err := Analyze(pts, Options{RefMode: RefMax, LevelDB: -0.5})
	if err != nil {
		t.Fatal(err)
	}
	if len(r.Crossings) < 3 {
		t.Fatalf("crossings %v: want several", r.Crossings)
	}
	if r.LowHz == nil || r.HighHz == nil || !(*r.LowHz < r.ReferenceHz && r.ReferenceHz < *r.HighHz) {
		t.Fatalf("corners %v..%v around reference %v", deref(r.LowHz), deref(r.HighHz), r.ReferenceHz)
	}
	for _, c := range r.Crossings {
		if c.FreqHz > *r.LowHz && c.FreqHz < *r.HighHz {
			t.Errorf("crossing %v inside the chosen passband %v..%v", c.FreqHz, *r.LowHz, *r.HighHz)
		}
		if g := r.Fitted().At(c.FreqHz) - r.ReferenceGainDB; math.Abs(g+0.5) > 1e-6 {
			t.Errorf("crossing at %v Hz is at %v dB", c.FreqHz, g)
		}
	}
}

// TestNotch: a notch in the passband makes extra crossings; the passband
// around the reference is chosen, and the model (a second-order low-pass
// times a zero pair on the jω axis at the same frequency: the handbook
// notch) represents it, so its edge is exact.
func TestNotch(t *testing.T) {
	notch := func(f float64) float64 {
		u := f / 3000
		// second-order notch |H|² = (1−u²)² / ((1−u²)² + (u/Q)²), Q = 2
		a := (1 - u*u) * (1 - u*u)
		return 10*math.Log10(a/(a+u*u/4)) + butterworthDB(f, 50000, 2)
	}
	r, err := Analyze(synth(notch, 10, 1e6, 20), Options{RefHz: 100})
	if err != nil {
		t.Fatal(err)
	}
	if len(r.Crossings) < 3 || r.HighHz == nil || *r.HighHz > 3000 {
		t.Fatalf("crossings %v, high %v: want the notch's lower edge", r.Crossings, deref(r.HighHz))
	}
	if r.CornerSource != "model" {
		t.Fatalf("the notch is a standard section, yet the model was not used: %+v", r.Model)
	}
	ref := notch(100)
	f := func(x float64) float64 { return notch(math.Pow(10, x)) - ref - HalfPowerDB }
	want := math.Pow(10, brent(f, 2, math.Log10(2999), f(2), f(math.Log10(2999))))
	if math.Abs(*r.HighHz/want-1) > 1e-6 {
		t.Errorf("notch edge %v Hz, want %v Hz", *r.HighHz, want)
	}
	var zero bool
	for _, s := range r.Fitted().Sections {
		zero = zero || s.Kind == ZeroPairJ && math.Abs(s.FHz/3000-1) < 1e-6
	}
	if !zero {
		t.Errorf("model %s: want a zero pair at 3 kHz", r.Model.Description)
	}
}

// TestExcluded: flagged points are left out of the fit and listed.
func TestExcluded(t *testing.T) {
	pts := synth(func(f float64) float64 { return butterworthDB(f, 5000, 2) }, 10, 1e6, 10)
	pts[20].Flags = []string{point.FlagClipped}
	pts[20].VoutVrms *= 3 // a clipped reading is wrong; it must not matter
	pts[40].Flags = []string{point.FlagUnderRange, point.FlagRefined}
	pts[41].FreqHz = -1
	r, err := Analyze(pts, Options{RefHz: 10})
	if err != nil {
		t.Fatal(err)
	}
	if len(r.Excluded) != 3 || r.Included != len(pts)-3 || r.Points != len(pts) {
		t.Fatalf("excluded %+v, included %d", r.Excluded, r.Included)
	}
	got := map[int]string{}
	for _, e := range r.Excluded {
		got[e.Seq] = strings.Join(e.Reasons, ",")
	}
	if got[20] != point.FlagClipped || got[40] != point.FlagUnderRange || got[41] != ReasonBadFrequency {
		t.Errorf("reasons %v", got)
	}
	if r.HighHz == nil || math.Abs(*r.HighHz/5000-1) > 5e-4 {
		t.Errorf("corner %v: the excluded points disturbed it", deref(r.HighHz))
	}
}

// TestThrough: a through run with the generator's droop, divided out,
// restores the DUT's own corner.
func TestThrough(t *testing.T) {
	droop := func(f float64) float64 { return butterworthDB(f, 300000, 1) - 0.2 }
	dut := func(f float64) float64 { return butterworthDB(f, 40000, 2) }
	through := synth(droop, 10, 1e6, 7)
	pts := synth(func(f float64) float64 { return dut(f) + droop(f) }, 20, 5e5, 10)
	r, err := Analyze(pts, Options{Through: through})
	if err != nil {
		t.Fatal(err)
	}
	if !r.Through || r.HighHz == nil || math.Abs(*r.HighHz/40000-1) > 5e-4 || math.Abs(r.ReferenceGainDB) > 1e-3 {
		t.Fatalf("through-normalised corner %v, reference %v", deref(r.HighHz), r.ReferenceGainDB)
	}
	plain, err := Analyze(pts, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(*plain.HighHz/40000-1) < 1e-3 {
		t.Errorf("without the through run the droop should move the corner; got %v", *plain.HighHz)
	}
	// A point outside the through run's range is excluded.
	pts = append(pts, point.Point{Seq: 999, FreqHz: 2e6, VinVrms: 1, VoutVrms: 0.001})
	r, err = Analyze(pts, Options{Through: through})
	if err != nil {
		t.Fatal(err)
	}
	if len(r.Excluded) != 1 || r.Excluded[0].Reasons[0] != ReasonOutsideThrough {
		t.Errorf("excluded %+v", r.Excluded)
	}
}

// TestReferenceModes: band mean and frequency reference on a flat-topped
// band-pass agree with the SciPy passband level (0 dB).
func TestReferenceModes(t *testing.T) {
	pts := loadScipyTable(t, "butter_bp2")
	for _, o := range []Options{{RefMode: RefBand, BandLoHz: 500, BandHiHz: 2000}, {RefHz: 860}, {RefMode: RefMax}} {
		r, err := Analyze(pts, o)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(r.ReferenceGainDB) > 0.01 {
			t.Errorf("%+v: reference %v dB", o, r.ReferenceGainDB)
		}
	}
}

func TestOptionErrors(t *testing.T) {
	pts := synth(func(f float64) float64 { return butterworthDB(f, 5000, 2) }, 10, 1e5, 10)
	for _, o := range []Options{
		{LevelDB: 3},
		{RefHz: 5e6},
		{RefMode: "median"},
		{RefMode: RefBand, BandLoHz: 100},
		{RefMode: RefBand, BandLoHz: 1, BandHiHz: 100},
	} {
		if _, err := Analyze(pts, o); !errors.Is(err, ErrOptions) {
			t.Errorf("%+v: error %v, want ErrOptions", o, err)
		}
	}
	if _, err := Analyze(pts[:2], Options{RefHz: 10}); !errors.Is(err, ErrResponse) {
		t.Errorf("two points: %v", err)
	}
}

// TestShelf: a shelf (a real pole–zero pair) is a standard section: the
// model finds its zero and pole.
func TestShelf(t *testing.T) {
	shelf := func(f float64) float64 {
		u := f / 1000
		return 10*math.Log10((1+u*u*10)/(1+u*u)) + butterworthDB(f, 80000, 2)
	}
	r, err := Analyze(synth(shelf, 10, 1e6, 10), Options{RefHz: 100})
	if err != nil {
		t.Fatal(err)
	}
	if r.Model == nil || !r.Model.Accepted || r.CornerSource != "model" {
		t.Fatalf("model %+v source %s", r.Model, r.CornerSource)
	}
	var zero, pole bool
	for _, s := range r.Fitted().Sections {
		zero = zero || s.Kind == Zero1 && math.Abs(s.FHz/(1000/math.Sqrt(10))-1) < 1e-6
		pole = pole || s.Kind == LowPass1 && math.Abs(s.FHz/1000-1) < 1e-6
	}
	if !zero || !pole {
		t.Errorf("model %s: want a real zero at 316 Hz and a pole at 1 kHz", r.Model.Description)
	}
}

// TestNoStructureTest: data the sections cannot represent (a peaking
// equalizer: complex zeros off the jω axis, |H|² = ((1−u²)² + (u·g/Q)²) /
// ((1−u²)² + (u/Q)²), handbook form) give a model whose residual shows
// structure, so the interpolation is used.
func TestNoStructureTest(t *testing.T) {
	bell := func(f float64) float64 {
		u := f / 2000
		a := (1 - u*u) * (1 - u*u)
		return 10*math.Log10((a+u*u*9/4)/(a+u*u/4)) + butterworthDB(f, 80000, 2)
	}
	r, err := Analyze(synth(bell, 10, 1e6, 10), Options{RefHz: 100})
	if err != nil {
		t.Fatal(err)
	}
	if r.Model == nil || r.Model.Accepted || r.CornerSource != "interpolation" {
		t.Fatalf("model %+v source %s", r.Model, r.CornerSource)
	}
}
