package plan_test

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"

	toml "github.com/pelletier/go-toml/v2"

	"rolloff/driver"
	"rolloff/sweep/plan"
)

var fuzzLims = []driver.GeneratorLimits{
	benchLim,
	{MaxVrms: 10}, // a bench that states only the amplitude cap
}

// checkDecoded holds the fuzz targets' promises: decoding never panics,
// errors are FieldErrors, and a plan that validates yields finite
// positive frequencies inside the generator's range, at most MaxPoints,
// and survives a round trip through both formats.
func checkDecoded(t *testing.T, p *plan.Plan, err error) {
	if err != nil {
		if len(plan.FieldErrors(err)) == 0 {
			t.Fatalf("error is not a FieldError: %T %v", err, err)
		}
		_ = err.Error()
		return
	}
	for _, lim := range fuzzLims {
		if err := p.Validate(lim); err != nil {
			if len(plan.FieldErrors(err)) == 0 {
				t.Fatalf("validation error is not a FieldError: %T %v", err, err)
			}
			continue
		}
		fs, err := p.Freqs()
		if err != nil {
			t.Fatalf("validated plan: %v", err)
		}
		if len(fs) == 0 || len(fs) > plan.MaxPoints {
			t.Fatalf("%d frequencies", len(fs))
		}
		for _, f := range fs {
			if !(f.Hz > 0) || math.IsInf(f.Hz, 0) || f.Label == "" {
				t.Fatalf("frequency %v", f)
			}
			if lim.MaxFreqHz > 0 && f.Hz > lim.MaxFreqHz*(1+1e-9) || f.Hz < lim.MinFreqHz*(1-1e-9) {
				t.Fatalf("%g Hz outside %+v", f.Hz, lim)
			}
		}
		if _, err := plan.Estimate(p, &constTiming{s: 1}); err != nil {
			t.Fatalf("estimate: %v", err)
		}
		js, err := json.Marshal(p)
		if err != nil {
			t.Fatalf("marshal: %v", err)
		}
		q, err := plan.DecodeJSON("round trip", js)
		if err != nil {
			t.Fatalf("JSON round trip: %v\n%s", err, js)
		}
		if err := q.Validate(lim); err != nil {
			t.Fatalf("JSON round trip validates no more: %v\n%s", err, js)
		}
		ts, err := toml.Marshal(p)
		if err != nil {
			t.Fatalf("marshal TOML: %v", err)
		}
		if _, err := plan.DecodeTOML("round trip", ts); err != nil {
			t.Fatalf("TOML round trip: %v\n%s", err, ts)
		}
	}
}

func addConfigs(f *testing.F) {
	files, _ := filepath.Glob("../../configs/*plan*.toml")
	for _, name := range files {
		if b, err := os.ReadFile(name); err == nil {
			f.Add(b)
		}
	}
}

func FuzzDecodeTOML(f *testing.F) {
	addConfigs(f)
	f.Add([]byte(base))
	f.Add([]byte("[frequencies]\nspacing='bands'\nbands_per_octave=24\nstart_hz=0.001\nstop_hz=1e9\n[level]\nvrms=1\n"))
	f.Add([]byte("frequencies = {frequencies_hz = [1, 2, 3e5]}\nlevel.vrms = 0.1\nreference_hz = 2\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		p, err := plan.DecodeTOML("fuzz.toml", data)
		checkDecoded(t, p, err)
	})
}

func FuzzDecodeJSON(f *testing.F) {
	f.Add([]byte(`{"frequencies": {"spacing": "linear", "start_hz": 10, "stop_hz": 1000, "step_hz": 7}, "level": {"vrms": 1}, "reference_hz": 500}`))
	f.Add([]byte(`{"frequencies": {"frequencies_hz": [1000, 10]}, "level": {"vrms": 1}, "ranging": {"strategy": "level"}}`))
	f.Add([]byte(`{"name": "\u0000", "frequencies": null}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		p, err := plan.DecodeJSON("fuzz.json", data)
		checkDecoded(t, p, err)
	})
}
