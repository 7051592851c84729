package analysis

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestUndeclaredNoise: 0.02 dB rms of noise that the points do not
// declare (no Type A uncertainty) is estimated from the data, by the
// difference-based estimator and by the adequate model's residual with its
// degrees of freedom; the correct model (a fourth-order Butterworth
// low-pass, handbook formula) is accepted and its corner is within its
// expanded uncertainty in most seeds.
func TestUndeclaredNoise(t *testing.T) {
	const sd, fc = 0.02, 3000.0
	covered := 0
	const seeds = 10
	for seed := uint64(1); seed <= seeds; seed++ {
		pts := synth(func(f float64) float64 { return butterworthDB(f, fc, 4) }, 30, 3e5, 20)
		rng := rand.New(rand.NewPCG(seed, 2))
		for i := range pts {
			pts[i].GainDB += sd * rng.NormFloat64()
			pts[i].VoutVrms = math.Pow(10, pts[i].GainDB/20)
		}
		r, err := Analyze(pts, Options{RefHz: 100})
		if err != nil {
			t.Fatal(err)
		}
		m := r.Model
		if m == nil || !m.Accepted || m.NoiseDeclared || r.CornerSource != "model" {
			t.Fatalf("seed %d: model %+v", seed, m)
		}
		if math.Abs(m.NoiseFitDB/sd-1) > 0.3 || math.Abs(m.NoiseDiffDB/sd-1) > 0.5 {
			t.Errorf("seed %d: noise from the residual %.4g dB, by differences %.4g dB; true %g dB", seed, m.NoiseFitDB, m.NoiseDiffDB, sd)
		}
		if r.HighUHz != nil && math.Abs(*r.HighHz-fc) <= *r.HighUHz {
			covered++
		}
	}
	if covered < seeds-2 {
		t.Errorf("the expanded uncertainty covers the corner in %d of %d seeds", covered, seeds)
	}
}
