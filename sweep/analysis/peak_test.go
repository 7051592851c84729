package analysis

import (
	"math"
	"testing"
)

// TestRefMaxBetweenSamples: without a model, --ref max takes the vertex
// of the parabola through the largest sample and its neighbours, so the
// reference lies between samples and closer to the true peak than the
// largest sample. Second-order low-pass, Q 3: the peak is
// 20·log10(Q/√(1−1/(4Q²))) dB at f0·√(1−1/(2Q²)) (filter handbook).
func TestRefMaxBetweenSamples(t *testing.T) {
	const f0, q = 1000.0, 3.0
	lp2 := func(f float64) float64 {
		u := f / f0
		return -10 * math.Log10((1-u*u)*(1-u*u)+u*u/(q*q))
	}
	pts := synth(lp2, 10, 1e5, 10)
	r, err := Analyze(pts, Options{RefMode: RefMax, NoModel: true})
	if err != nil {
		t.Fatal(err)
	}
	peakDB := 20 * math.Log10(q/math.Sqrt(1-1/(4*q*q)))
	peakHz := f0 * math.Sqrt(1-1/(2*q*q))
	best := math.Inf(-1)
	bestHz := 0.0
	for _, p := range pts {
		if g := lp2(p.FreqHz); g > best {
			best, bestHz = g, p.FreqHz
		}
	}
	if e, es := math.Abs(r.ReferenceGainDB-peakDB), peakDB-best; !(e < es) {
		t.Errorf("reference %v dB, true peak %v dB: error %.3g dB, not below the largest sample's %.3g dB", r.ReferenceGainDB, peakDB, e, es)
	}
	if e, es := math.Abs(math.Log(r.ReferenceHz/peakHz)), math.Abs(math.Log(bestHz/peakHz)); !(e < es) {
		t.Errorf("reference at %v Hz, true peak at %v Hz, largest sample at %v Hz", r.ReferenceHz, peakHz, bestHz)
	}
}
