package plan_test

import (
	"fmt"
	"strings"

	"rolloff/driver"
	"rolloff/sweep/plan"
)

func Example() {
	doc := `name = "preamp"
[frequencies]
spacing = "bands"
bands_per_octave = 3
start_hz = 20
stop_hz = 2000
[level]
vrms = 0.1
`
	p, err := plan.DecodeTOML("preamp.toml", []byte(doc))
	if err != nil {
		fmt.Println(err)
		return
	}
	bench := driver.GeneratorLimits{MinFreqHz: 1, MaxFreqHz: 1e6, MaxVrms: 1}
	if err := p.Validate(bench); err != nil {
		fmt.Println(err)
		return
	}
	fs, _ := p.Freqs()
	var labels []string
	for _, f := range fs {
		labels = append(labels, f.Label)
	}
	fmt.Println(strings.Join(labels, " "))
	fmt.Printf("first band %.3f Hz\n", fs[0].Hz)

	p.Level.Vrms = 5
	fmt.Println(p.Validate(bench))
	// Output:
	// 20 25 31.5 40 50 63 80 100 125 160 200 250 315 400 500 630 800 1k 1.25k 1.6k 2k
	// first band 19.953 Hz
	// preamp.toml:8: level.vrms = 5: above the bench's amplitude limit 1 Vrms, which protects the DUT; must be ≤ 1
}
