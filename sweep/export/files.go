package export

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"path/filepath"

	"rolloff/sweep/analysis"
	"rolloff/sweep/point"
	"rolloff/sweep/store"
)

// FileWriter stores a whole named file of a run; *store.Run is one, and
// writes each file atomically.
type FileWriter interface {
	WriteFileAtomic(name string, data []byte) error
}

// WriteJSON writes res as result.json: one indented JSON object.
func WriteJSON(w io.Writer, res *analysis.Result) error {
	b, err := json.MarshalIndent(res, "", "  ")
	if err != nil {
		return fmt.Errorf("export: result.json: %w", err)
	}
	b = append(b, '\n')
	_, err = w.Write(b)
	return err
}

// Render writes the result file called name (one of store.ResultFiles:
// response.csv, result.json, response.png, response.svg or response.pdf)
// to w. res may be nil only for response.csv.
func Render(w io.Writer, name string, pts []point.Point, res *analysis.Result) error {
	var err error
	switch name {
	case store.FileResponseCSV:
		err = WriteCSV(w, pts, res)
	case store.FileResult:
		if res == nil {
			return fmt.Errorf("export: %s: no analysis result", name)
		}
		err = WriteJSON(w, res)
	case store.FileResponsePNG, store.FileResponseSVG, store.FileResponsePDF:
		if res == nil {
			return fmt.Errorf("export: %s: no analysis result", name)
		}
		err = WritePlot(w, filepath.Ext(name), pts, res, PlotOptions{})
	default:
		return fmt.Errorf("export: %q is not a result file", name)
	}
	if err != nil {
		return fmt.Errorf("export: %s: %w", name, err)
	}
	return nil
}

// WriteAll renders response.csv, result.json, response.png, response.svg
// and response.pdf and hands each, whole, to dst (a *store.Run writes each
// atomically in the run directory). res may be nil for a response that
// cannot be analysed: then only response.csv is written.
func WriteAll(dst FileWriter, pts []point.Point, res *analysis.Result) error {
	for _, name := range store.ResultFiles() {
		if res == nil && name != store.FileResponseCSV {
			continue
		}
		var buf bytes.Buffer
		if err := Render(&buf, name, pts, res); err != nil {
			return err
		}
		if err := dst.WriteFileAtomic(name, buf.Bytes()); err != nil {
			return fmt.Errorf("export: %w", err)
		}
	}
	return nil
}
