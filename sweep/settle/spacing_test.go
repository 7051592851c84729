package settle

import (
	"math"
	"testing"
)

// meanOfReadings integrates cos(2π·2f·t + φ) over each of n readings of
// aperture tS starting sS apart and returns the largest |mean| over the
// phase φ: the ripple left on the average, by direct numerical
// integration (midpoint rule), independent of burstAtten's closed form.
func meanOfReadings(freqHz, tS, sS float64, n int) float64 {
	w := 2 * math.Pi * 2 * freqHz
	worst := 0.0
	for ph := 0.0; ph < 2*math.Pi; ph += math.Pi / 36 {
		var sum float64
		const m = 400
		for k := 0; k < n; k++ {
			t0 := float64(k) * sS
			for j := 0; j < m; j++ {
				t := t0 + (float64(j)+0.5)*tS/m
				sum += math.Cos(w*t + ph)
			}
		}
		worst = math.Max(worst, math.Abs(sum/float64(n*m)))
	}
	return worst
}

// TestSpacedSingles: on a meter of single readings with one fixed
// aperture (20 ms, 25 ms per query), a ripple the aperture cannot null is
// averaged by readings spaced on whole fractions of its period; the
// residual ChooseAperture predicts is the direct integral's (to the
// integration's accuracy), and meets the target where back-to-back
// readings would not. It takes at least MinFitReadings of them, on as many
// distinct phases of the ripple, so that FitMean can remove the ripple
// left by readings taken late.
func TestSpacedSingles(t *testing.T) {
	m := Meter{AperturesS: []float64{0.02}, Fixed: true, Singles: true, OverheadS: 0.025}
	const tau, target = 0.15, 0.0005
	for _, f := range []float64{2, 3.3, 7, 12.5, 20} {
		rd, err := ChooseAperture(f, tau, target, m)
		if err != nil {
			t.Fatalf("%g Hz: %v", f, err)
		}
		sp := rd.SpacingS
		if sp == 0 {
			sp = rd.ApertureS + m.OverheadS // back to back
		}
		if rd.Average < MinFitReadings || sp < rd.ApertureS+m.OverheadS-1e-12 {
			t.Fatalf("%g Hz: %+v: want %d readings or more, not under the query time apart", f, rd, MinFitReadings)
		}
		// n distinct phases: k/n periods apart with k prime to n.
		k := math.Round(sp * 2 * f * float64(rd.Average))
		if math.Abs(sp*2*f*float64(rd.Average)-k) < 1e-6 && gcd(int(k), rd.Average) != 1 {
			t.Errorf("%g Hz: %d readings %g periods apart repeat phases", f, rd.Average, sp*2*f)
		}
		direct := RippleRel(f, tau) * meanOfReadings(f, rd.ApertureS, sp, rd.Average)
		if math.Abs(direct-rd.ResidualRel) > 1e-5 || direct > target {
			t.Errorf("%g Hz: %d readings %.4g s apart: residual %.3g predicted, %.3g integrated (target %g)", f, rd.Average, rd.SpacingS, rd.ResidualRel, direct, target)
		}
		b2b := RippleRel(f, tau) * meanOfReadings(f, rd.ApertureS, rd.ApertureS+m.OverheadS, rd.Average)
		t.Logf("%g Hz: %d readings %.4g s apart: %.2g (back to back %.2g)", f, rd.Average, sp, direct, b2b)
	}
}
