package export

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"rolloff/sweep/point"
)

// PointsJSONL is the name of a run directory's point log.
const PointsJSONL = "points.jsonl"

// LoadRun reads a response from path: a CSV file (see ReadCSV), or a run
// directory holding points.jsonl (preferred) or response.csv.
func LoadRun(path string, opts ReadOptions) ([]point.Point, error) {
	st, err := os.Stat(path)
	if err != nil {
		return nil, err
	}
	if st.IsDir() {
		jl := filepath.Join(path, PointsJSONL)
		if f, err := os.Open(jl); err == nil {
			defer f.Close()
			return ReadJSONL(f, jl)
		}
		path = filepath.Join(path, ResponseCSV)
		if _, err := os.Stat(path); err != nil {
			return nil, fmt.Errorf("export: %s: a run directory needs %s or %s", filepath.Dir(path), PointsJSONL, ResponseCSV)
		}
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return ReadCSV(f, path, opts)
}

// ReadJSONL reads points stored one JSON object a line (a run's
// points.jsonl). Blank lines are skipped; a last line cut short by a crash
// (no newline, not valid JSON) is ignored. Any other bad line is an error
// naming the line.
func ReadJSONL(r io.Reader, name string) ([]point.Point, error) {
	br := bufio.NewReaderSize(r, 1<<16)
	var pts []point.Point
	for line := 1; ; line++ {
		b, err := br.ReadBytes('\n')
		if err != nil && !errors.Is(err, io.EOF) {
			return nil, fmt.Errorf("export: %s: %w", name, err)
		}
		torn := errors.Is(err, io.EOF)
		if t := bytes.TrimSpace(b); len(t) > 0 {
			var p point.Point
			if jerr := json.Unmarshal(t, &p); jerr != nil {
				if torn {
					break
				}
				return nil, fmt.Errorf("export: %s:%d: %v", name, line, jerr)
			}
			pts = append(pts, p)
		}
		if torn {
			break
		}
	}
	if len(pts) == 0 {
		return nil, fmt.Errorf("export: %s: no points", name)
	}
	return pts, nil
}
