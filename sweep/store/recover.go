package store

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"strconv"

	"rolloff/sweep/event"
	"rolloff/sweep/point"
)

// CorruptError is an invalid record before the end of a run file: data
// that was acknowledged as stored and can no longer be read. It wraps
// ErrCorrupt.
type CorruptError struct {
	File string // e.g. "runs/20261201-184512-x/points.jsonl"
	Line int    // 1-based
	Err  error
}

// Error names the file and line.
func (e *CorruptError) Error() string {
	return "store: " + e.File + ":" + strconv.Itoa(e.Line) + ": corrupt record: " + e.Err.Error()
}

// Unwrap returns ErrCorrupt and the cause.
func (e *CorruptError) Unwrap() []error { return []error{ErrCorrupt, e.Err} }

// scanResult is what the recovery scanner found in a JSON-lines file.
type scanResult struct {
	Good    int // length of the good prefix; data[Good:] is a torn end to cut
	Records int // records in the good prefix
}

// scanJSONL checks a JSON-lines file. Every complete line (ending in a
// newline) that is not blank must satisfy check; blank lines are skipped.
// The end of the file may be torn: bytes after the last newline, or a last
// complete line that fails check with nothing but blank lines after it,
// are outside the good prefix (unless check's error is ErrDuplicatePoint:
// a whole record breaking a rule is not a torn write). A failing line
// anywhere else is a
// *CorruptError naming name and the line. check is called on every record
// of the good prefix, in order.
func scanJSONL(name string, data []byte, check func(line []byte) error) (scanResult, error) {
	var r scanResult
	lineNo := 0
	off := 0
	for off < len(data) {
		nl := bytes.IndexByte(data[off:], '\n')
		if nl < 0 {
			break // a torn tail: no newline
		}
		line := data[off : off+nl]
		next := off + nl + 1
		lineNo++
		if len(bytes.TrimSpace(line)) == 0 {
			off = next
			r.Good = off
			continue
		}
		if err := check(line); err != nil {
			// Only a line that does not parse can be a torn write; a
			// whole record that breaks a rule (a plan index stored
			// twice) is corrupt wherever it is.
			if len(bytes.TrimSpace(data[next:])) == 0 && !errors.Is(err, ErrDuplicatePoint) {
				return r, nil // the last line is torn: cut from off
			}
			return r, &CorruptError{File: name, Line: lineNo, Err: err}
		}
		r.Records++
		off = next
		r.Good = off
	}
	return r, nil
}

// decodeObject decodes one JSON object line into v.
func decodeObject(line []byte, v any) error {
	line = bytes.TrimSpace(line)
	if len(line) == 0 || line[0] != '{' {
		return errors.New("not a JSON object")
	}
	return json.Unmarshal(line, v)
}

// pointScan collects the points of points.jsonl, refusing a plan index
// stored twice.
type pointScan struct {
	pts   []point.Point
	index map[int]int // plan index → position in pts
}

func (s *pointScan) check(line []byte) error {
	var p point.Point
	if err := decodeObject(line, &p); err != nil {
		return err
	}
	if s.index == nil {
		s.index = map[int]int{}
	}
	if j, dup := s.index[p.Index]; dup {
		return fmt.Errorf("plan index %d stored twice (also seq %d): %w", p.Index, s.pts[j].Seq, ErrDuplicatePoint)
	}
	s.index[p.Index] = len(s.pts)
	s.pts = append(s.pts, p)
	return nil
}

// ReadPoints reads points stored one JSON object a line, as in a run's
// points.jsonl, by the store's own rule: blank lines are skipped; a torn
// end (bytes after the last newline, or an invalid last line) was never
// acknowledged and is left out; an invalid line before the end, or a plan
// index stored twice, is a *CorruptError naming name and the line. It is
// the one reader of stored points: Run.Points of a handle that does not
// own the run reads through it too. It does not modify anything.
func ReadPoints(r io.Reader, name string) ([]point.Point, error) {
	data, err := io.ReadAll(r)
	if err != nil {
		return nil, fmt.Errorf("store: %s: %w", name, err)
	}
	pts, _, err := scanPoints(name, data)
	if err != nil {
		return nil, err
	}
	return pts, nil
}

// scanPoints parses points.jsonl data.
func scanPoints(name string, data []byte) ([]point.Point, scanResult, error) {
	var s pointScan
	r, err := scanJSONL(name, data, s.check)
	return s.pts, r, err
}

// scanEvents parses events.jsonl data.
func scanEvents(name string, data []byte) ([]event.Event, scanResult, error) {
	var evs []event.Event
	r, err := scanJSONL(name, data, func(line []byte) error {
		var e event.Event
		if err := decodeObject(line, &e); err != nil {
			return err
		}
		evs = append(evs, e)
		return nil
	})
	return evs, r, err
}
