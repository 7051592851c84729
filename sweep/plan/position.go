package plan

import (
	"bytes"
	"encoding/json"
	"reflect"
	"sort"
	"strconv"
	"strings"
)

// lineIndex holds the byte offset at which each line of a document
// starts, so that the line of any offset is a binary search rather than a
// count of the newlines before it.
type lineIndex []int

// newLineIndex scans data once.
func newLineIndex(data []byte) lineIndex {
	idx := lineIndex{0}
	for i, c := range data {
		if c == '\n' {
			idx = append(idx, i+1)
		}
	}
	return idx
}

// line returns the 1-based line of byte offset off.
func (idx lineIndex) line(off int) int {
	return sort.SearchInts(idx, off+1)
}

// elemKey splits "a.b[12]" into "a.b" and 12; ok is false for a key that
// is not an array element.
func elemKey(f string) (array string, i int, ok bool) {
	if !strings.HasSuffix(f, "]") {
		return "", 0, false
	}
	j := strings.LastIndexByte(f, '[')
	if j < 0 {
		return "", 0, false
	}
	n, err := strconv.Atoi(f[j+1 : len(f)-1])
	if err != nil || n < 0 {
		return "", 0, false
	}
	return f[:j], n, true
}

// setElemLine records the line of element i of array (elements come in
// order), in one int32 per element instead of a map entry with its own
// key string: a plan of many list frequencies then costs little more
// than the frequencies themselves.
func (s *source) setElemLine(array string, i, line int) {
	if s.elems == nil {
		s.elems = map[string][]int32{}
	}
	ls := s.elems[array]
	if i != len(ls) {
		return
	}
	s.elems[array] = append(ls, int32(line))
}

// elemLine returns the line of an array element recorded by setElemLine.
func (s *source) elemLine(f string) (int, bool) {
	array, i, ok := elemKey(f)
	if !ok {
		return 0, false
	}
	ls := s.elems[array]
	if i >= len(ls) {
		return 0, false
	}
	return int(ls[i]), true
}

// setRaw keeps the raw text of a key for messages; array elements'
// text is not kept (their messages quote the value they compute).
func (s *source) setRaw(field, raw string) {
	if strings.HasSuffix(field, "]") {
		return
	}
	s.raw[field] = raw
}

// numbers reads an array of numbers at field into v in one pass: the
// decoder checks the whole array's syntax once, then each element is
// parsed and its line found from the offset. Anything but a plain array
// of numbers that fit a float64 (null, a string element, a syntax error,
// too many entries) returns errSlowPath, and the document is walked
// again token by token for the error message.
func (w *jsonWalker) numbers(v reflect.Value, field string) error {
	var raw json.RawMessage
	if err := w.dec.Decode(&raw); err != nil {
		return errSlowPath
	}
	end := int(w.dec.InputOffset())
	start := end - len(raw)
	if len(raw) < 2 || raw[0] != '[' || start < 0 || !bytes.Equal(w.data[start:end], raw) {
		return errSlowPath
	}
	out := make([]float64, 0, bytes.Count(raw, []byte{','})+1)
	i := 1
	skip := func() {
		for i < len(raw) && (raw[i] == ' ' || raw[i] == '\t' || raw[i] == '\r' || raw[i] == '\n') {
			i++
		}
	}
	for n := 0; ; n++ {
		skip()
		if i >= len(raw) {
			return errSlowPath
		}
		if raw[i] == ']' && n == 0 {
			break
		}
		if c := raw[i]; c != '-' && (c < '0' || c > '9') || n >= MaxPoints {
			return errSlowPath
		}
		j := i
		for j < len(raw) && !strings.ContainsRune(",] \t\r\n", rune(raw[j])) {
			j++
		}
		f, err := strconv.ParseFloat(string(raw[i:j]), 64)
		if err != nil {
			return errSlowPath
		}
		w.src.setElemLine(field, n, w.lines.line(start+i))
		out = append(out, f)
		i = j
		skip()
		if i < len(raw) && raw[i] == ',' {
			i++
			continue
		}
		if i < len(raw) && raw[i] == ']' {
			break
		}
		return errSlowPath
	}
	v.Set(reflect.ValueOf(out))
	return nil
}
