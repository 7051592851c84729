package finish

import (
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"

	"rolloff/configs"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/store"
)

// lowPass returns points of a first-order low pass of corner fcHz,
// |H| = 1/√(1 + (f/fc)²) (filter handbook formula: −3.0103 dB at fc).
func lowPass(fcHz float64) []point.Point {
	var pts []point.Point
	for k := 0; k <= 50; k++ {
		f := 10 * math.Pow(10, float64(k)/10)
		g := 1 / math.Sqrt(1+(f/fcHz)*(f/fcHz))
		pts = append(pts, point.Point{Seq: k, Index: k, FreqHz: f, VinVrms: 1, VoutVrms: g, GainDB: 20 * math.Log10(g)})
	}
	return pts
}

func TestAnalyzeWritesExportsAndResult(t *testing.T) {
	const fc = 2000.0
	p := &plan.Plan{ReferenceHz: 10}
	dir := newRunDir(t)
	js, err := Analyze(p, dir, nil, nil)(context.Background(), lowPass(fc))
	if err != nil {
		t.Fatal(err)
	}
	var res struct {
		HighHz *float64 `json:"high_hz"`
	}
	if err := json.Unmarshal(js, &res); err != nil {
		t.Fatal(err)
	}
	// The reference at 10 Hz is 1e-4 dB below the passband: the corner
	// moves by far less than the 0.5 % allowed here.
	if res.HighHz == nil || math.Abs(*res.HighHz/fc-1) > 5e-3 {
		t.Fatalf("corner %v in %s, want %g Hz", res.HighHz, js, fc)
	}
	for _, name := range []string{"response.csv", "result.json", "report.pdf"} {
		if st, err := os.Stat(filepath.Join(dir, name)); err != nil || st.Size() == 0 {
			t.Errorf("%s: %v", name, err)
		}
	}
}

func TestAnalyzeFailureStillExportsPoints(t *testing.T) {
	p := &plan.Plan{ReferenceHz: 10}
	dir := newRunDir(t)
	pts := lowPass(2000)[:1] // one point: nothing to analyse
	if _, err := Analyze(p, dir, nil, nil)(context.Background(), pts); err == nil {
		t.Fatal("one point analysed without error")
	}
	if _, err := os.Stat(filepath.Join(dir, "response.csv")); err != nil {
		t.Errorf("points not exported: %v", err)
	}
	if _, err := os.Stat(filepath.Join(dir, "report.pdf")); err != nil {
		t.Errorf("no report saying why there are no figures: %v", err)
	}
}

// newRunDir creates a run in a fresh store (its plan document the
// shipped demo plan) and returns its directory, for the finish step to
// write into as the scheduler's caller would.
func newRunDir(t *testing.T) string {
	t.Helper()
	data, err := configs.ReadFile("demo-plan.toml")
	if err != nil {
		t.Fatal(err)
	}
	st, err := store.Open(t.TempDir())
	if err != nil {
		t.Fatal(err)
	}
	run, err := st.Create(store.CreateOpts{PlanFile: "plan.toml", PlanData: data})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { run.Close() })
	return run.Dir()
}
