package model

import (
	"encoding/csv"
	"math"
	"math/cmplx"
	"os"
	"strconv"
	"testing"
)

// DemoDUT is the demo line driver as the bench configures it.
func demoDUT() *DUT {
	return &DUT{
		GainDB: 20,
		Sections: []Section{
			{Kind: HighPass1, FreqHz: 8},
			{Kind: ButterworthLowPass, FreqHz: 95e3, Order: 2},
		},
		ClipV: 12,
	}
}

// A first-order section is 10·log10(2) = 3.0103 dB down at its corner
// (handbook: |H| = 1/√2).
func TestFirstOrderCorner(t *testing.T) {
	for _, kind := range []string{HighPass1, LowPass1} {
		d := &DUT{Sections: []Section{{Kind: kind, FreqHz: 1234}}}
		if got := d.GainDBAt(1234); math.Abs(got+3.0103) > 1e-4 {
			t.Errorf("%s: %.6f dB at the corner, want -3.0103", kind, got)
		}
		ph := cmplx.Phase(d.H(1234)) * 180 / math.Pi
		if math.Abs(math.Abs(ph)-45) > 1e-9 {
			t.Errorf("%s: phase %.6f°, want ±45°", kind, ph)
		}
	}
}

// Filter handbook: a Butterworth low-pass of order n has
// |H| = 1/√(1+(f/fc)^(2n)); the high-pass 1/√(1+(fc/f)^(2n)).
func TestButterworthMagnitude(t *testing.T) {
	const fc = 1000.0
	for n := 1; n <= 8; n++ {
		lp := Section{Kind: ButterworthLowPass, FreqHz: fc, Order: n}
		hp := Section{Kind: ButterworthHighPass, FreqHz: fc, Order: n}
		for _, f := range []float64{1, 100, 500, 999, 1000, 1500, 1e4, 1e6} {
			wantLP := 1 / math.Sqrt(1+math.Pow(f/fc, float64(2*n)))
			wantHP := 1 / math.Sqrt(1+math.Pow(fc/f, float64(2*n)))
			if got := cmplx.Abs(lp.Response(f)); math.Abs(got-wantLP) > 1e-12*math.Max(1, wantLP)+1e-300 && math.Abs(got/wantLP-1) > 1e-9 {
				t.Errorf("LP n=%d f=%g: %g, want %g", n, f, got, wantLP)
			}
			if got := cmplx.Abs(hp.Response(f)); math.Abs(got/wantHP-1) > 1e-9 {
				t.Errorf("HP n=%d f=%g: %g, want %g", n, f, got, wantHP)
			}
		}
	}
}

// Filter handbook: a second-order section's gain at its natural frequency
// is Q.
func TestSecondOrderQ(t *testing.T) {
	for _, q := range []float64{0.5, 0.7071, 2, 10} {
		for _, kind := range []string{LowPass2, HighPass2} {
			s := Section{Kind: kind, FreqHz: 5000, Q: q}
			if got := cmplx.Abs(s.Response(5000)); math.Abs(got-q) > 1e-12 {
				t.Errorf("%s Q=%g: |H(f0)| = %g", kind, q, got)
			}
		}
	}
}

// Reference responses from SciPy (testdata/make_dut_reference.py,
// scipy.signal.butter and freqs).
func TestAgainstSciPy(t *testing.T) {
	cases := map[string]*DUT{
		"demo":           demoDUT(),
		"butter5_hp_1k":  {Sections: []Section{{Kind: ButterworthHighPass, FreqHz: 1e3, Order: 5}}},
		"butter3_lp_20k": {Sections: []Section{{Kind: ButterworthLowPass, FreqHz: 20e3, Order: 3}}},
		"lp2_q2_10k":     {Sections: []Section{{Kind: LowPass2, FreqHz: 10e3, Q: 2}}},
		"hp2_q0.5_100":   {Sections: []Section{{Kind: HighPass2, FreqHz: 100, Q: 0.5}}},
	}
	f, err := os.Open("testdata/dut_reference.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	for _, row := range rows[1:] {
		d, ok := cases[row[0]]
		if !ok {
			t.Fatalf("unknown case %q", row[0])
		}
		fr, _ := strconv.ParseFloat(row[1], 64)
		magDB, _ := strconv.ParseFloat(row[2], 64)
		phDeg, _ := strconv.ParseFloat(row[3], 64)
		if got := d.GainDBAt(fr); math.Abs(got-magDB) > 1e-8 {
			t.Errorf("%s at %g Hz: %.10f dB, SciPy %.10f", row[0], fr, got, magDB)
		}
		ph := cmplx.Phase(d.H(fr)) * 180 / math.Pi
		dp := math.Mod(ph-phDeg+540, 360) - 180
		if math.Abs(dp) > 1e-6 {
			t.Errorf("%s at %g Hz: phase %.8f°, SciPy %.8f°", row[0], fr, ph, phDeg)
		}
		n++
	}
	if n < 50 {
		t.Fatalf("only %d reference rows", n)
	}
}

func TestDemoDUTGainAndCorners(t *testing.T) {
	d := demoDUT()
	if g := d.GainDBAt(1000); math.Abs(g-20) > 0.01 {
		t.Errorf("gain at 1 kHz %.4f dB, want ≈ +20", g)
	}
	lo, hi := d.Corners(1000, -3)
	if math.Abs(lo/8-1) > 0.005 || math.Abs(hi/95e3-1) > 0.005 {
		t.Errorf("corners %.4f Hz, %.1f Hz; want near 8 Hz and 95 kHz", lo, hi)
	}
	// The crossing found really is 3 dB below the 1 kHz reference.
	for _, f := range []float64{lo, hi} {
		if g := d.GainDBAt(f) - d.GainDBAt(1000); math.Abs(g+3) > 1e-9 {
			t.Errorf("gain at %g Hz is %.12f dB re 1 kHz", f, g)
		}
	}
	// A single first-order section crosses -3.0103 dB exactly at fc.
	single := &DUT{Sections: []Section{{Kind: HighPass1, FreqHz: 8}}}
	lo, hi = single.Corners(1e6, -10*math.Log10(2))
	if math.Abs(lo/8-1) > 1e-6 || !math.IsNaN(hi) {
		t.Errorf("single high-pass corners %g, %g; want 8 Hz and NaN", lo, hi)
	}
	flat := &DUT{GainDB: 6}
	lo, hi = flat.Corners(1000, -3)
	if !math.IsNaN(lo) || !math.IsNaN(hi) {
		t.Errorf("flat DUT corners %g, %g; want NaN", lo, hi)
	}
}

func TestSectionCheck(t *testing.T) {
	for _, tc := range []struct {
		s     Section
		field string
	}{
		{Section{Kind: "bandpass", FreqHz: 1}, "kind"},
		{Section{Kind: LowPass1, FreqHz: 0}, "freq_hz"},
		{Section{Kind: LowPass1, FreqHz: math.Inf(1)}, "freq_hz"},
		{Section{Kind: LowPass2, FreqHz: 1, Q: 0}, "q"},
		{Section{Kind: ButterworthLowPass, FreqHz: 1, Order: 0}, "order"},
		{Section{Kind: ButterworthHighPass, FreqHz: 1, Order: 21}, "order"},
		{Section{Kind: HighPass2, FreqHz: 1, Q: 0.7}, ""},
	} {
		field, err := tc.s.Check()
		if field != tc.field || (tc.field == "") != (err == nil) {
			t.Errorf("%+v: field %q err %v, want field %q", tc.s, field, err, tc.field)
		}
	}
}
