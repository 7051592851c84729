// Package runfixture writes synthetic done runs into a store, for the
// tests of the packages that read run directories: a DUT of known transfer
// function measured at log-spaced points, with identities, a bench file,
// a unit and a batch.
package runfixture

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"math/cmplx"
	"os"
	"path/filepath"
	"regexp"
	"rolloff/sweep/analysis"
	"rolloff/sweep/export"
	"testing"
	"time"

	"rolloff/driver"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/store"
)

// Fixture describes a synthetic run: a DUT of gain gainDB with a
// first-order high-pass at lowHz and a second-order Butterworth low-pass
// at highHz (either 0 for none), measured at n log-spaced points.
type Fixture struct {
	Name, Unit, Batch, Operator, Notes string
	BenchName                          string
	StartHz, StopHz                    float64
	N                                  int
	GainDB, LowHz, HighHz              float64
	Flagged                            int // first points flagged under-range
	// Created is the run's creation time (default 2026-11-30 09:15 UTC);
	// Store, when not empty, is the store directory to write into
	// (default a fresh temporary one).
	Created time.Time
	Store   string
	// PlanTables is appended to the plan document (tables such as
	// [mask]).
	PlanTables string
}

// |H| of a first-order high-pass
// jx/(1+jx) and a Butterworth low-pass 1/(1 − y² + j√2·y) (textbook
// transfer functions; both are 3.0103 dB down at their corner frequency).
// Gain returns the DUT's gain in dB.
func (f Fixture) Gain(hz float64) float64 {
	h := complex(math.Pow(10, f.GainDB/20), 0)
	if f.LowHz > 0 {
		x := complex(0, hz/f.LowHz)
		h *= x / (1 + x)
	}
	if f.HighHz > 0 {
		y := hz / f.HighHz
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

// Make writes the fixture into a fresh store as a done run and returns
// its directory.
func Make(t testing.TB, f Fixture) string {
	t.Helper()
	dir := f.Store
	if dir == "" {
		dir = filepath.Join(t.TempDir(), "runs")
	}
	st, err := store.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	planDoc := fmt.Sprintf("name = %q\nunit = %q\nbatch = %q\noperator = %q\nnotes = %q\nreference_hz = %g\n[frequencies]\nspacing = \"log\"\nstart_hz = %g\nstop_hz = %g\npoints = %d\n[level]\nvrms = 0.05\n",
		f.Name, f.Unit, f.Batch, f.Operator, f.Notes, math.Sqrt(f.StartHz*f.StopHz), f.StartHz, f.StopHz, f.N)
	planDoc += f.PlanTables
	p, err := plan.DecodeTOML("plan.toml", []byte(planDoc))
	if err != nil {
		t.Fatal(err)
	}
	if err := p.Validate(driver.GeneratorLimits{MaxVrms: 1}); err != nil {
		t.Fatal(err)
	}
	bench := f.BenchName
	if bench == "" {
		bench = "Line-driver test bench"
	}
	created := f.Created
	if created.IsZero() {
		created = time.Date(2026, 11, 30, 9, 15, 0, 0, time.UTC)
	}
	r, err := st.Create(store.CreateOpts{PlanFile: "plan.toml", PlanData: []byte(planDoc), Plan: p,
		BenchFile: []byte(fmt.Sprintf(fixtureBench, bench)),
		Identities: map[string]driver.Identity{
			"generator": {Manufacturer: "rolloff", Model: "SIM-GEN-1", Serial: "G-4711", Firmware: "1.0"},
			"voltmeter": {Manufacturer: "rolloff", Model: "SIM-DCV-1", Serial: "V-0815", Firmware: "2.3"},
		},
		Now: created})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	fs, err := p.Freqs()
	if err != nil {
		t.Fatal(err)
	}
	t0 := created.Add(time.Second)
	for i, q := range fs {
		g := f.Gain(q.Hz)
		// A deterministic ripple of ±0.002 dB stands in for noise.
		g += 0.002 * math.Sin(float64(i)*2.3)
		vout := 0.05 * math.Pow(10, g/20)
		pt := point.Point{Seq: i, Index: i, FreqHz: q.Hz, VinVrms: 0.05, VoutVrms: vout, GainDB: g,
			DCVolts: 0.5, RangeIndex: 6, Range: "1 V", RangeFSVrms: 1, FractionFS: vout, Readings: 2,
			StdRel: 1e-4, ConvAccRel: 0.002, DCAccV: 2e-5, SettleS: 0.5, Time: t0.Add(time.Duration(i) * time.Second)}
		if vout < 0.1 {
			pt.RangeIndex, pt.Range, pt.RangeFSVrms = 5, "100 mV", 0.1
		}
		if i < f.Flagged {
			pt.Flags = []string{point.FlagUnderRange}
		}
		if err := r.AppendPoint(pt); err != nil {
			t.Fatal(err)
		}
	}
	// The finish step's result.json: the analysis with the plan's level
	// and reference.
	if pts, err := r.Points(); err == nil {
		if res, err := analysis.Analyze(pts, analysis.Options{LevelDB: p.Refine.LevelDB, RefHz: p.ReferenceHz, MonteCarloCheck: analysis.DefaultMonteCarloCheck}); err == nil {
			var b bytes.Buffer
			if err := export.WriteJSON(&b, res); err != nil {
				t.Fatal(err)
			}
			if err := r.WriteFileAtomic(store.FileResult, b.Bytes()); err != nil {
				t.Fatal(err)
			}
		}
	}
	if err := r.SetState(event.Done, fmt.Sprintf("%d points", len(fs))); err != nil {
		t.Fatal(err)
	}
	return r.Dir()
}

// Demo is the line-driver prototype: +20 dB, corners at 8 Hz and 95 kHz,
// measured from 2 Hz to 2 MHz at n points, the first two flagged.
func Demo(n int) Fixture {
	return Fixture{Name: "line-driver prototype", Unit: "LD-0042", Batch: "proto-A", Operator: "bench 3",
		Notes: "Second unit of the prototype batch; output loaded with 600 ohm.", StartHz: 2, StopHz: 2e6, N: n,
		GainDB: 20, LowHz: 8, HighHz: 95e3, Flagged: 2}
}

// Clone copies the run directory src into the same store under the run id
// id, with the plan's unit set to unit, and returns the new directory.
// It is much faster than Make for building large stores.
func Clone(t testing.TB, src, id, unit string) string {
	t.Helper()
	dst := filepath.Join(filepath.Dir(src), id)
	if err := os.Mkdir(dst, 0o755); err != nil {
		t.Fatal(err)
	}
	ents, err := os.ReadDir(src)
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range ents {
		if e.IsDir() || e.Name() == "lock" {
			continue
		}
		b, err := os.ReadFile(filepath.Join(src, e.Name()))
		if err != nil {
			t.Fatal(err)
		}
		switch e.Name() {
		case store.FileMeta:
			var m map[string]any
			if err := json.Unmarshal(b, &m); err != nil {
				t.Fatal(err)
			}
			m["id"] = id
			if p, ok := m["plan"].(map[string]any); ok {
				p["unit"] = unit
			}
			if b, err = json.Marshal(m); err != nil {
				t.Fatal(err)
			}
		case store.FilePlanTOML:
			b = regexp.MustCompile(`(?m)^unit = ".*"$`).ReplaceAll(b, []byte(fmt.Sprintf("unit = %q", unit)))
		}
		if err := os.WriteFile(filepath.Join(dst, e.Name()), b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return dst
}
