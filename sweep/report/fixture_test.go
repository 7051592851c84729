package report

import (
	"fmt"
	"math"
	"math/cmplx"
	"path/filepath"
	"testing"
	"time"

	"rolloff/driver"
	"rolloff/sweep/analysis"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/store"
)

// fixture describes a synthetic run: a DUT of gain gainDB with a
// first-order high-pass at lowHz and a second-order Butterworth low-pass
// at highHz (either 0 for none), measured at n log-spaced points.
type fixture struct {
	name, unit, batch, operator, notes string
	benchName                          string
	startHz, stopHz                    float64
	n                                  int
	gainDB, lowHz, highHz              float64
	flagged                            int // first points flagged under-range
}

// gain returns the DUT's gain in dB. |H| of a first-order high-pass
// jx/(1+jx) and a Butterworth low-pass 1/(1 − y² + j√2·y) (textbook
// transfer functions; both are 3.0103 dB down at their corner frequency).
func (f fixture) gain(hz float64) float64 {
	h := complex(math.Pow(10, f.gainDB/20), 0)
	if f.lowHz > 0 {
		x := complex(0, hz/f.lowHz)
		h *= x / (1 + x)
	}
	if f.highHz > 0 {
		y := hz / f.highHz
		h *= 1 / complex(1-y*y, math.Sqrt2*y)
	}
	return 20 * math.Log10(cmplx.Abs(h))
}

const fixtureBench = `name = %q
[limits]
max_vrms = 1.0
[generator]
profile = "generator-scpi.toml"
address = "tcp://192.0.2.10:5025"
[voltmeter]
profile = "dmm-scpi.toml"
address = "tcp://192.0.2.11:5025"
[converter]
profile = "converter-10db.toml"
`

// makeRun writes the fixture into a fresh store as a done run and returns
// its directory.
func makeRun(t testing.TB, f fixture) string {
	t.Helper()
	st, err := store.Open(filepath.Join(t.TempDir(), "runs"))
	if err != nil {
		t.Fatal(err)
	}
	planDoc := fmt.Sprintf("name = %q\nunit = %q\nbatch = %q\noperator = %q\nnotes = %q\nreference_hz = %g\n[frequencies]\nspacing = \"log\"\nstart_hz = %g\nstop_hz = %g\npoints = %d\n[level]\nvrms = 0.05\n",
		f.name, f.unit, f.batch, f.operator, f.notes, math.Sqrt(f.startHz*f.stopHz), f.startHz, f.stopHz, f.n)
	p, err := plan.DecodeTOML("plan.toml", []byte(planDoc))
	if err != nil {
		t.Fatal(err)
	}
	if err := p.Validate(driver.GeneratorLimits{MaxVrms: 1}); err != nil {
		t.Fatal(err)
	}
	bench := f.benchName
	if bench == "" {
		bench = "Line-driver test bench"
	}
	r, err := st.Create(store.CreateOpts{PlanFile: "plan.toml", PlanData: []byte(planDoc), Plan: p,
		BenchFile: []byte(fmt.Sprintf(fixtureBench, bench)),
		Identities: map[string]driver.Identity{
			"generator": {Manufacturer: "rolloff", Model: "SIM-GEN-1", Serial: "G-4711", Firmware: "1.0"},
			"voltmeter": {Manufacturer: "rolloff", Model: "SIM-DCV-1", Serial: "V-0815", Firmware: "2.3"},
		},
		Now: time.Date(2026, 11, 30, 9, 15, 0, 0, time.UTC)})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	fs, err := p.Freqs()
	if err != nil {
		t.Fatal(err)
	}
	t0 := time.Date(2026, 11, 30, 9, 15, 1, 0, time.UTC)
	for i, q := range fs {
		g := f.gain(q.Hz)
		// A deterministic ripple of ±0.002 dB stands in for noise.
		g += 0.002 * math.Sin(float64(i)*2.3)
		vout := 0.05 * math.Pow(10, g/20)
		pt := point.Point{Seq: i, Index: i, FreqHz: q.Hz, VinVrms: 0.05, VoutVrms: vout, GainDB: g,
			DCVolts: 0.5, RangeIndex: 6, Range: "1 V", RangeFSVrms: 1, FractionFS: vout, Readings: 2,
			StdRel: 1e-4, ConvAccRel: 0.002, DCAccV: 2e-5, SettleS: 0.5, Time: t0.Add(time.Duration(i) * time.Second)}
		if vout < 0.1 {
			pt.RangeIndex, pt.Range, pt.RangeFSVrms = 5, "100 mV", 0.1
		}
		if i < f.flagged {
			pt.Flags = []string{point.FlagUnderRange}
		}
		if err := r.AppendPoint(pt); err != nil {
			t.Fatal(err)
		}
	}
	if err := r.SetState(event.Done, fmt.Sprintf("%d points", len(fs))); err != nil {
		t.Fatal(err)
	}
	return r.Dir()
}

// demoFixture is the line-driver prototype: +20 dB, corners at 8 Hz and
// 95 kHz, measured from 2 Hz to 2 MHz.
func demoFixture(n int) fixture {
	return fixture{name: "line-driver prototype", unit: "LD-0042", batch: "proto-A", operator: "bench 3",
		notes: "Second unit of the prototype batch; output loaded with 600 ohm.", startHz: 2, stopHz: 2e6, n: n,
		gainDB: 20, lowHz: 8, highHz: 95e3, flagged: 2}
}

// relMask is a relative mask with a lower limit at lowerDB between loHz
// and hiHz and an upper limit of +0.5 dB over the same span.
func relMask(name string, loHz, hiHz, lowerDB float64) *analysis.Mask {
	return &analysis.Mask{Name: name, Relative: true,
		Upper: [][2]float64{{loHz, 0.5}, {hiHz, 0.5}},
		Lower: [][2]float64{{loHz, lowerDB}, {hiHz, lowerDB}}}
}
