package export

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"rolloff/sweep/analysis"
	"rolloff/sweep/point"
)

// File names WriteAll writes.
const (
	ResponseCSV = "response.csv"
	ResultJSON  = "result.json"
	ResponsePNG = "response.png"
	ResponseSVG = "response.svg"
	ResponsePDF = "response.pdf"
)

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

// WriteAll writes response.csv, result.json, response.png, response.svg and
// response.pdf into dir (which must exist), each atomically. res may be nil
// for a response that cannot be analysed: then only response.csv is
// written.
func WriteAll(dir string, pts []point.Point, res *analysis.Result) error {
	return writeAll(dir, pts, res, []string{ResponseCSV, ResultJSON, ResponsePNG, ResponseSVG, ResponsePDF})
}

func writeAll(dir string, pts []point.Point, res *analysis.Result, files []string) error {
	for _, name := range files {
		var buf bytes.Buffer
		var err error
		switch name {
		case ResponseCSV:
			err = WriteCSV(&buf, pts, res)
		case ResultJSON:
			if res == nil {
				continue
			}
			err = WriteJSON(&buf, res)
		default:
			if res == nil {
				continue
			}
			err = WritePlot(&buf, filepath.Ext(name), pts, res)
		}
		if err != nil {
			return fmt.Errorf("export: %s: %w", name, err)
		}
		if err := WriteFileAtomic(filepath.Join(dir, name), buf.Bytes()); err != nil {
			return err
		}
	}
	return nil
}

// WriteFileAtomic replaces path with data: it writes a temporary file in
// the same directory, syncs it, renames it over path and syncs the
// directory, so that a crash leaves either the old or the new file.
func WriteFileAtomic(path string, data []byte) (err error) {
	dir := filepath.Dir(path)
	f, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return fmt.Errorf("export: %w", err)
	}
	tmp := f.Name()
	defer func() {
		if err != nil {
			os.Remove(tmp)
		}
	}()
	if _, err = f.Write(data); err != nil {
		f.Close()
		return fmt.Errorf("export: %s: %w", path, err)
	}
	if err = f.Chmod(0o644); err != nil {
		f.Close()
		return fmt.Errorf("export: %s: %w", path, err)
	}
	if err = f.Sync(); err != nil {
		f.Close()
		return fmt.Errorf("export: %s: %w", path, err)
	}
	if err = f.Close(); err != nil {
		return fmt.Errorf("export: %s: %w", path, err)
	}
	if err = os.Rename(tmp, path); err != nil {
		return fmt.Errorf("export: %w", err)
	}
	if d, derr := os.Open(dir); derr == nil {
		d.Sync()
		d.Close()
	}
	return nil
}
