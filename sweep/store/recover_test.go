package store

import (
	"bytes"
	"encoding/json"
	"errors"
	"testing"

	"rolloff/sweep/point"
)

func validObject(line []byte) error {
	var v map[string]any
	return decodeObject(line, &v)
}

func TestScanJSONL(t *testing.T) {
	for _, c := range []struct {
		data          string
		good, records int
		corruptLine   int
	}{
		{"", 0, 0, 0},
		{"{}\n{}\n", 6, 2, 0},
		{"{}\n{\"a\":", 3, 1, 0},             // torn: no newline
		{"{}\n{\"a\":\n", 3, 1, 0},           // torn: invalid last line
		{"{}\n{\"a\":\n\n \n", 3, 1, 0},      // ... followed by blank lines
		{"{}\n\n{}\n", 7, 2, 0},              // blank line inside
		{"{}\nxx\n{}\n", 3, 1, 2},            // corrupt in the middle
		{"{}\n[1]\n{}", 3, 1, 2},             // not an object, then a torn tail
		{"\x00\x00\x00", 0, 0, 0},            // a zero-filled block
		{"{}\r\n{}\r\n", 8, 2, 0},            // CRLF
		{"null\n{}\n", 0, 0, 1},              // null is not a record
		{"{}\n{} {}\n{}\n", 3, 1, 2},         // two values on a line
		{"{\"a\":1}\n{\"a\":1}x\n", 8, 1, 0}, // garbage after the last record: torn
	} {
		r, err := scanJSONL("f.jsonl", []byte(c.data), validObject)
		var ce *CorruptError
		switch {
		case c.corruptLine > 0:
			if !errors.As(err, &ce) || ce.Line != c.corruptLine || ce.File != "f.jsonl" {
				t.Errorf("%q: %v, want corrupt line %d", c.data, err, c.corruptLine)
			}
		case err != nil:
			t.Errorf("%q: %v", c.data, err)
		}
		if r.Good != c.good || r.Records != c.records {
			t.Errorf("%q: good %d records %d, want %d %d", c.data, r.Good, r.Records, c.good, c.records)
		}
	}
}

// FuzzRecover checks the recovery scanner on arbitrary file contents: it
// never panics; the good prefix ends on a line boundary and rescans
// unchanged; a record appended to it is found; a corrupt line is named.
func FuzzRecover(f *testing.F) {
	line, _ := json.Marshal(pt(0, 0, 10))
	f.Add(append(line, '\n'))
	f.Add(append(append(line, '\n'), line[:20]...))
	f.Add([]byte("{}\nnot json\n{}\n"))
	f.Add([]byte("\n\n\x00\x00"))
	f.Fuzz(func(t *testing.T, data []byte) {
		for _, pointsFile := range []bool{false, true} {
			var r scanResult
			var err error
			if pointsFile {
				var pts []point.Point
				pts, r, err = scanPoints("p.jsonl", data)
				if err == nil && len(pts) != r.Records {
					t.Fatalf("%d points, %d records", len(pts), r.Records)
				}
			} else {
				r, err = scanJSONL("f.jsonl", data, validObject)
			}
			if r.Good < 0 || r.Good > len(data) || (r.Good > 0 && data[r.Good-1] != '\n') {
				t.Fatalf("good prefix %d of %d bytes", r.Good, len(data))
			}
			if err != nil {
				var ce *CorruptError
				if !errors.As(err, &ce) || ce.Line < 1 || ce.Line > bytes.Count(data, []byte{'\n'}) {
					t.Fatalf("error %v", err)
				}
				continue
			}
			if pointsFile {
				continue
			}
			again, err := scanJSONL("f.jsonl", data[:r.Good], validObject)
			if err != nil || again != r {
				t.Fatalf("rescan of the good prefix: %+v %v, first %+v", again, err, r)
			}
			more := append(append([]byte{}, data[:r.Good]...), "{\"x\":1}\n"...)
			after, err := scanJSONL("f.jsonl", more, validObject)
			if err != nil || after.Records != r.Records+1 || after.Good != len(more) {
				t.Fatalf("append after recovery: %+v %v", after, err)
			}
		}
	})
}
