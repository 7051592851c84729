package report

import (
	"testing"

	"rolloff/sweep/analysis"
	"rolloff/sweep/internal/runfixture"
)

type fixture = runfixture.Fixture

func makeRun(t testing.TB, f fixture) string { return runfixture.Make(t, f) }

func demoFixture(n int) fixture { return runfixture.Demo(n) }

// relMask is a relative mask with a lower limit at lowerDB between loHz
// and hiHz and an upper limit of +0.5 dB over the same span.
func relMask(name string, loHz, hiHz, lowerDB float64) *analysis.Mask {
	return &analysis.Mask{Name: name, Relative: true,
		Upper: [][2]float64{{loHz, 0.5}, {hiHz, 0.5}},
		Lower: [][2]float64{{loHz, lowerDB}, {hiHz, lowerDB}}}
}
