package analysis_test

import (
	"fmt"
	"math"

	"rolloff/sweep/analysis"
	"rolloff/sweep/point"
)

// A first-order low-pass at 3.3 kHz sampled at 10 points per decade.
func ExampleAnalyze() {
	lp := analysis.Model{Sections: []analysis.Section{{Kind: analysis.LowPass1, FHz: 3300}}}
	var pts []point.Point
	for k := 10; k <= 50; k++ {
		f := math.Pow(10, float64(k)/10)
		pts = append(pts, point.Point{Seq: len(pts), FreqHz: f, VinVrms: 1, VoutVrms: math.Pow(10, lp.At(f)/20)})
	}
	res, err := analysis.Analyze(pts, analysis.Options{RefHz: 10})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("high corner:", analysis.FormatHz(*res.HighHz, 4), "from the", res.CornerSource)
	fmt.Println("behaves like a", res.Model.Description)
	fmt.Printf("roll-off %.0f dB/decade\n", *res.SlopeDBPerDecadeHigh)
	// Output:
	// high corner: 3.300 kHz from the model
	// behaves like a first-order low-pass at 3.30 kHz
	// roll-off -19 dB/decade
}
