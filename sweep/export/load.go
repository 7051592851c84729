package export

import (
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"

	"rolloff/sweep/analysis"
	"rolloff/sweep/point"
	"rolloff/sweep/store"
)

// LoadRun reads a response from path: a CSV file (see ReadCSV), or a run
// directory holding points.jsonl (preferred, read by store.ReadPoints) or
// response.csv. It only reads: a torn end of points.jsonl is left out, not
// cut.
func LoadRun(path string, opts ReadOptions) ([]point.Point, error) {
	st, err := os.Stat(path)
	if err != nil {
		return nil, err
	}
	if st.IsDir() {
		jl := filepath.Join(path, store.FilePoints)
		f, err := os.Open(jl)
		if err == nil {
			defer f.Close()
			pts, err := store.ReadPoints(f, jl)
			if err == nil && len(pts) == 0 {
				err = fmt.Errorf("export: %s: no points", jl)
			}
			return pts, err
		}
		if !errors.Is(err, fs.ErrNotExist) {
			return nil, err
		}
		path = filepath.Join(path, store.FileResponseCSV)
		if _, err := os.Stat(path); err != nil {
			return nil, fmt.Errorf("export: %s: a run directory needs %s or %s", filepath.Dir(path), store.FilePoints, store.FileResponseCSV)
		}
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return ReadCSV(f, path, opts)
}

// RecordedSpec returns the measuring chain's specification that the run's
// finish step recorded in its result.json (analysis.Result.Spec), so that
// the run can be analysed again as it was; nil for a directory without
// one (a CSV file, a run that was not analysed, an older run).
func RecordedSpec(dir string) *analysis.Spec {
	data, err := os.ReadFile(filepath.Join(dir, store.FileResult))
	if err != nil {
		return nil
	}
	var v struct {
		Spec *analysis.Spec `json:"spec"`
	}
	if json.Unmarshal(data, &v) != nil {
		return nil
	}
	return v.Spec
}
