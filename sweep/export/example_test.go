package export_test

import (
	"bytes"
	"fmt"
	"math"
	"strings"

	"rolloff/sweep/analysis"
	"rolloff/sweep/export"
	"rolloff/sweep/point"
)

// lowPass returns a sweep of a first-order low-pass with its corner at
// cornerHz, |H| = 1/√(1+(f/fc)²) (handbook formula), 10 Hz to 100 kHz at
// ten points a decade, driven at 0.5 Vrms.
func lowPass(cornerHz float64) []point.Point {
	var pts []point.Point
	for i := range 41 {
		f := 10 * math.Pow(10, float64(i)/10)
		g := 1 / math.Sqrt(1+(f/cornerHz)*(f/cornerHz))
		pts = append(pts, point.Point{Seq: i, Index: i, FreqHz: f, VinVrms: 0.5, VoutVrms: 0.5 * g,
			GainDB: 20 * math.Log10(g), Readings: 4, StdRel: 1e-4, ConvAccRel: 1e-3})
	}
	return pts
}

// listing is a FileWriter that prints what it is given instead of storing
// it; a *store.Run stores each file atomically in the run directory.
type listing struct{}

func (listing) WriteFileAtomic(name string, data []byte) error {
	first, _, _ := bytes.Cut(data, []byte("\n"))
	if len(first) > 24 {
		first = first[:24]
	}
	fmt.Printf("%-13s %q\n", name, first)
	return nil
}

// ExampleWriteAll renders a finished run's result files in the order the
// store lists them.
func ExampleWriteAll() {
	pts := lowPass(20e3)
	res, err := analysis.Analyze(pts, analysis.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("upper corner %.1f kHz\n", *res.HighHz/1e3)
	if err := export.WriteAll(listing{}, pts, res); err != nil {
		fmt.Println(err)
	}
	// Output:
	// upper corner 20.0 kHz
	// response.csv  "frequency_hz,vin_vrms,vo"
	// result.json   "{"
	// response.png  "\x89PNG\r"
	// response.svg  "<?xml version=\"1.0\"?>"
	// response.pdf  "%PDF-1.4"
}

// ExampleWritePlot renders one gain plot as SVG with a title; the zero
// PlotOptions would give an untitled plot of the default size.
func ExampleWritePlot() {
	pts := lowPass(20e3)
	var svg bytes.Buffer
	err := export.WritePlot(&svg, "svg", pts, nil, export.PlotOptions{Title: "line driver, output stage"})
	fmt.Println(err, strings.Contains(svg.String(), "line driver, output stage"))
	// Output:
	// <nil> true
}

// ExampleDiff compares a response before and after a change that moved
// its corner from 20 kHz down to 10 kHz.
func ExampleDiff() {
	before := export.Series{Name: "before", Points: lowPass(20e3)}
	after := export.Series{Name: "after", Points: lowPass(10e3)}
	d, err := export.Diff(before, after)
	if err != nil {
		fmt.Println(err)
		return
	}
	last := len(d.FreqHz) - 1
	fmt.Printf("%d frequencies, %.0f Hz to %.0f Hz\n", len(d.FreqHz), d.FreqHz[0], d.FreqHz[last])
	// The two first-order responses differ by
	// 10·log10((1+(f/20k)²)/(1+(f/10k)²)) dB (handbook formula).
	f := d.FreqHz[last]
	want := 10 * math.Log10((1+(f/20e3)*(f/20e3))/(1+(f/10e3)*(f/10e3)))
	fmt.Printf("at %.0f kHz: %.3f dB (formula %.3f dB)\n", f/1e3, d.DiffDB[last], want)
	dev := 0.0
	for i, f := range d.FreqHz {
		want := 10 * math.Log10((1+(f/20e3)*(f/20e3))/(1+(f/10e3)*(f/10e3)))
		dev = math.Max(dev, math.Abs(d.DiffDB[i]-want))
	}
	fmt.Println("largest deviation from the formula under 0.01 dB:", dev < 0.01)
	// Output:
	// 400 frequencies, 10 Hz to 100000 Hz
	// at 100 kHz: -5.893 dB (formula -5.893 dB)
	// largest deviation from the formula under 0.01 dB: true
}

// ExampleReadCSV reads a response file written by hand or by another
// program: a header naming the columns, units in the names.
func ExampleReadCSV() {
	in := "frequency_hz,gain_db\n100,0.01\n1000,0\n20000,-3.01\n"
	pts, err := export.ReadCSV(strings.NewReader(in), "line-driver.csv", export.ReadOptions{})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, p := range pts {
		fmt.Println(p.FreqHz, p.GainDB)
	}
	_, err = export.ReadCSV(strings.NewReader("frequency_hz,gain_db\n-5,1\n"), "bad.csv", export.ReadOptions{})
	fmt.Println(err)
	// Output:
	// 100 0.01
	// 1000 0
	// 20000 -3.01
	// export: bad response CSV: bad.csv:2: column "frequency_hz": value "-5": want a positive finite frequency in Hz
}
