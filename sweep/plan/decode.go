package plan

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"reflect"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"sync"

	toml "github.com/pelletier/go-toml/v2"
	"github.com/pelletier/go-toml/v2/unstable"
)

// MaxFileBytes is the largest plan document accepted.
const MaxFileBytes = 1 << 20

// source is where a decoded plan came from: the file name and, per dotted
// key, the line it is on and its raw text.
type source struct {
	file  string
	lines map[string]int
	raw   map[string]string
	// elems holds the lines of array elements, in order, per array key.
	elems map[string][]int32
}

// line returns the line of field, or of its nearest enclosing key or
// table, or 0.
func (s *source) line(field string) int {
	if s == nil {
		return 0
	}
	for f := field; f != ""; f = parentKey(f) {
		if l, ok := s.lines[f]; ok {
			return l
		}
		if l, ok := s.elemLine(f); ok {
			return l
		}
	}
	return 0
}

// parentKey strips the last part of a dotted key: "a.b[2]" → "a.b" → "a".
func parentKey(f string) string {
	if strings.HasSuffix(f, "]") {
		if i := strings.LastIndexByte(f, '['); i >= 0 {
			return f[:i]
		}
	}
	if i := strings.LastIndexByte(f, '.'); i >= 0 {
		return f[:i]
	}
	return ""
}

// Load reads a plan file: JSON when the name ends in .json, TOML
// otherwise. Like DecodeTOML it fills the defaults but does not validate.
func Load(path string) (*Plan, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("plan: %w", err)
	}
	defer f.Close()
	data, err := io.ReadAll(io.LimitReader(f, MaxFileBytes+1))
	if err != nil {
		return nil, fmt.Errorf("plan: read %s: %w", path, err)
	}
	if strings.EqualFold(filepath.Ext(path), ".json") {
		return DecodeJSON(path, data)
	}
	return DecodeTOML(path, data)
}

func tooLarge(name string, n int) error {
	return &FieldError{File: name, Value: strconv.Itoa(n) + " bytes",
		Allowed: fmt.Sprintf("a plan document must be at most %d bytes", MaxFileBytes)}
}

// DecodeTOML decodes a TOML plan document. name is the file name used in
// errors. Unknown keys, keys given twice and values of the wrong type are
// errors naming the dotted key and its line (*FieldError, several joined
// with errors.Join). The plan's defaults are filled (Defaults); it is not
// validated, which needs the bench's limits (Validate).
func DecodeTOML(name string, data []byte) (*Plan, error) {
	if len(data) > MaxFileBytes {
		return nil, tooLarge(name, len(data))
	}
	src, err := indexTOML(name, data)
	if err != nil {
		return nil, err
	}
	p := new(Plan)
	dec := toml.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(p); err != nil {
		return nil, tomlError(src, data, err)
	}
	p.src = src
	p.Defaults()
	return p, nil
}

// parsers recycles the low-level TOML parsers and their node arenas.
var parsers = sync.Pool{New: func() any { return new(unstable.Parser) }}

// indexTOML parses the document once with the low-level parser to learn
// the line and raw text of every key, and refuses a key given twice.
func indexTOML(name string, data []byte) (*source, error) {
	src := &source{file: name, lines: map[string]int{}, raw: map[string]string{}}
	p := parsers.Get().(*unstable.Parser)
	defer parsers.Put(p)
	p.Reset(data)
	defer p.Reset(nil) // keep the arena, not the document
	lines := newLineIndex(data)
	prefix := ""
	arrays := map[string]int{}
	var dup error
	keyOf := func(n *unstable.Node) (string, int) {
		var parts []string
		line := 0
		it := n.Key()
		for it.Next() {
			k := it.Node()
			parts = append(parts, string(k.Data))
			if line == 0 {
				line = lines.line(int(k.Raw.Offset))
			}
		}
		return strings.Join(parts, "."), line
	}
	var value, keyval func(key string, line int, v *unstable.Node)
	value = func(key string, line int, v *unstable.Node) {
		switch v.Kind {
		case unstable.Array:
			src.raw[key] = "[…]"
			i := 0
			it := v.Children()
			for it.Next() {
				c := it.Node()
				if c.Kind == unstable.Comment {
					continue
				}
				l := line
				if c.Raw.Length > 0 {
					l = lines.line(int(c.Raw.Offset))
				}
				src.setElemLine(key, i, l)
				if c.Kind == unstable.Array || c.Kind == unstable.InlineTable {
					value(key+"["+strconv.Itoa(i)+"]", l, c)
				}
				i++
			}
		case unstable.InlineTable:
			it := v.Children()
			for it.Next() {
				kv := it.Node()
				if kv.Kind != unstable.KeyValue {
					continue
				}
				k, l := keyOf(kv)
				keyval(dotted(key, k), l, kv.Value())
			}
		default:
			if v.Raw.Length > 0 {
				src.setRaw(key, string(p.Raw(v.Raw)))
			}
		}
	}
	keyval = func(full string, line int, v *unstable.Node) {
		if first, ok := src.lines[full]; ok && dup == nil {
			dup = &FieldError{File: name, Line: line, Field: full,
				Allowed: fmt.Sprintf("key given twice (first on line %d)", first)}
		}
		src.lines[full] = line
		value(full, line, v)
	}
	for p.NextExpression() {
		e := p.Expression()
		switch e.Kind {
		case unstable.Table:
			k, l := keyOf(e)
			prefix = k
			if _, ok := src.lines[k]; !ok {
				src.lines[k] = l
			}
		case unstable.ArrayTable:
			k, l := keyOf(e)
			prefix = k + "[" + strconv.Itoa(arrays[k]) + "]"
			arrays[k]++
			if _, ok := src.lines[k]; !ok {
				src.lines[k] = l
			}
		case unstable.KeyValue:
			k, l := keyOf(e)
			keyval(dotted(prefix, k), l, e.Value())
		}
	}
	if err := p.Error(); err != nil {
		var pe *unstable.ParserError
		fe := &FieldError{File: name, Allowed: "TOML syntax: " + err.Error()}
		if errors.As(err, &pe) {
			fe.Allowed = "TOML syntax: " + pe.Message
			if off, ok := offsetIn(data, pe.Highlight); ok {
				fe.Line = 1 + bytes.Count(data[:off], []byte{'\n'})
			}
			if len(pe.Key) > 0 {
				fe.Field = strings.Join(pe.Key, ".")
			}
		}
		return nil, fe
	}
	if dup != nil {
		return nil, dup
	}
	return src, nil
}

// offsetIn reports where the subslice b starts in data.
func offsetIn(data, b []byte) (int, bool) {
	if b == nil {
		return 0, false
	}
	off := cap(data) - cap(b)
	if off < 0 || off > len(data) {
		return 0, false
	}
	return off, true
}

var (
	typeMsg  = regexp.MustCompile(`^cannot decode TOML (.+?) into struct field \S+ of type (\S+)$`)
	storeMsg = regexp.MustCompile(`^cannot store an? (.+?) in an? (\S+)$`)
	tableMsg = regexp.MustCompile(`^table (\S+) already exists$`)
)

// resolveKey turns a key go-toml reports relative to an inline table or
// a table header into the full dotted key recorded on that line.
func (s *source) resolveKey(key []string, line int) string {
	field := strings.Join(key, ".")
	if _, ok := s.lines[field]; ok || len(key) == 0 {
		return field
	}
	best := ""
	for k, l := range s.lines {
		if l == line && strings.HasSuffix(k, "."+field) && (best == "" || k < best) {
			best = k
		}
	}
	if best != "" {
		return best
	}
	return field
}

// tomlError turns a go-toml error into FieldErrors naming the dotted key.
func tomlError(src *source, data []byte, err error) error {
	var sme *toml.StrictMissingError
	if errors.As(err, &sme) {
		var errs []error
		for i := range sme.Errors {
			de := &sme.Errors[i]
			line, _ := de.Position()
			field := src.resolveKey(de.Key(), line)
			errs = append(errs, &FieldError{File: src.file, Line: line,
				Field: field, Value: src.raw[field],
				Allowed: unknownKeyMsg(strings.Split(field, "."), tomlName)})
		}
		return join(errs)
	}
	var de *toml.DecodeError
	if errors.As(err, &de) {
		line, col := de.Position()
		field := src.resolveKey(de.Key(), line)
		msg := strings.TrimPrefix(de.Error(), "toml: ")
		val := src.raw[field]
		if m := typeMsg.FindStringSubmatch(msg); m != nil {
			msg = "want " + goTypeWords(m[2]) + ", got a TOML " + strings.ToLower(m[1])
			if val == "" {
				val = rawAt(data, line, col)
			}
		} else if m := storeMsg.FindStringSubmatch(msg); m != nil {
			msg = "want " + goTypeWords(m[2]) + ", got a TOML " + m[1]
		} else if m := tableMsg.FindStringSubmatch(msg); m != nil {
			msg = "table [" + m[1] + "] given twice"
		}
		return &FieldError{File: src.file, Line: line, Field: field, Value: val, Allowed: msg}
	}
	return &FieldError{File: src.file, Allowed: err.Error()}
}

// rawAt returns the token at line:col (1-based) of data, for messages.
func rawAt(data []byte, line, col int) string {
	if line < 1 || col < 1 {
		return ""
	}
	lines := bytes.Split(data, []byte{'\n'})
	if line > len(lines) {
		return ""
	}
	l := lines[line-1]
	if col-1 >= len(l) {
		return ""
	}
	s := string(l[col-1:])
	if i := strings.IndexAny(s, " \t,]}#\r"); i > 0 && s[0] != '"' && s[0] != '\'' {
		s = s[:i]
	}
	if len(s) > 40 {
		s = s[:40] + "…"
	}
	return strings.TrimSpace(s)
}

// goTypeWords says a Go field type in the words of a plan file.
func goTypeWords(t string) string {
	switch {
	case t == "float64":
		return "a number"
	case strings.HasPrefix(t, "int"):
		return "an integer"
	case t == "string":
		return "a string"
	case t == "bool":
		return "true or false"
	case t == "[]float64":
		return "an array of numbers"
	case strings.HasPrefix(t, "[]"):
		return "an array"
	}
	return "a table"
}

func tomlName(f reflect.StructField) string { return tagName(f.Tag.Get("toml")) }
func jsonName(f reflect.StructField) string { return tagName(f.Tag.Get("json")) }

func tagName(tag string) string {
	if i := strings.IndexByte(tag, ','); i >= 0 {
		tag = tag[:i]
	}
	return tag
}

// unknownKeyMsg lists the keys allowed where key was found.
func unknownKeyMsg(key []string, name func(reflect.StructField) string) string {
	t := reflect.TypeFor[Plan]()
	section := "the top level"
	for _, part := range key[:max(len(key)-1, 0)] {
		f, ok := fieldByName(t, part, name)
		if !ok || f.Type.Kind() != reflect.Struct {
			return "unknown key"
		}
		t = f.Type
		section = "[" + strings.Join(key[:len(key)-1], ".") + "]"
	}
	return "unknown key; allowed in " + section + ": " + strings.Join(fieldNames(t, name), ", ")
}

func fieldByName(t reflect.Type, n string, name func(reflect.StructField) string) (reflect.StructField, bool) {
	for i := range t.NumField() {
		f := t.Field(i)
		if f.IsExported() && name(f) == n {
			return f, true
		}
	}
	return reflect.StructField{}, false
}

func fieldNames(t reflect.Type, name func(reflect.StructField) string) []string {
	var out []string
	for i := range t.NumField() {
		if f := t.Field(i); f.IsExported() {
			out = append(out, name(f))
		}
	}
	sort.Strings(out)
	return out
}

// DecodeJSON decodes a JSON plan document (one object, nothing after it)
// with the same field names as TOML. Keys are matched exactly; unknown
// keys, keys given twice and values of the wrong type are errors naming
// the dotted key and its line. A null value leaves the field unset. The
// plan's defaults are filled; it is not validated.
func DecodeJSON(name string, data []byte) (*Plan, error) {
	if len(data) > MaxFileBytes {
		return nil, tooLarge(name, len(data))
	}
	p, err := decodeJSON(name, data, false)
	if errors.Is(err, errSlowPath) {
		p, err = decodeJSON(name, data, true)
	}
	if err != nil {
		return nil, err
	}
	p.Defaults()
	return p, nil
}

// errSlowPath makes DecodeJSON walk the document again token by token:
// the fast path for arrays of numbers met something else.
var errSlowPath = errors.New("plan: not a plain array of numbers")

// decodeJSON walks the document once, checking every key and type
// against the plan's schema and filling the plan as it goes.
func decodeJSON(name string, data []byte, slow bool) (*Plan, error) {
	w := &jsonWalker{data: data, lines: newLineIndex(data), slow: slow,
		src: &source{file: name, lines: map[string]int{}, raw: map[string]string{}}}
	w.dec = json.NewDecoder(bytes.NewReader(data))
	w.dec.UseNumber()
	p := new(Plan)
	if err := w.walk(reflect.ValueOf(p).Elem(), ""); err != nil {
		return nil, err
	}
	if tok, err := w.dec.Token(); err != io.EOF {
		v := ""
		if err == nil {
			v = fmt.Sprint(tok)
		}
		return nil, &FieldError{File: name, Line: w.line(), Value: v,
			Allowed: "trailing data after the plan object (one JSON object only)"}
	}
	p.src = w.src
	return p, nil
}

type jsonWalker struct {
	data  []byte
	lines lineIndex
	dec   *json.Decoder
	src   *source
	slow  bool // read arrays of numbers token by token too
}

// line is the line of the decoder's position.
func (w *jsonWalker) line() int {
	off := int(w.dec.InputOffset())
	off = min(max(off, 0), len(w.data))
	return w.lines.line(off)
}

func (w *jsonWalker) token(field string) (json.Token, error) {
	tok, err := w.dec.Token()
	if err != nil {
		fe := &FieldError{File: w.src.file, Line: w.line(), Field: field}
		var se *json.SyntaxError
		switch {
		case errors.As(err, &se):
			off := min(max(int(se.Offset), 0), len(w.data))
			fe.Line = 1 + bytes.Count(w.data[:off], []byte{'\n'})
			fe.Allowed = "JSON syntax: " + strings.TrimPrefix(se.Error(), "json: ")
		case err == io.EOF || errors.Is(err, io.ErrUnexpectedEOF):
			fe.Allowed = "JSON syntax: unexpected end of document"
		default:
			fe.Allowed = "JSON syntax: " + err.Error()
		}
		return nil, fe
	}
	return tok, nil
}

func (w *jsonWalker) typeErr(field string, tok json.Token, want string) error {
	got, val := "", ""
	switch v := tok.(type) {
	case json.Delim:
		if v == '{' {
			got = "an object"
		} else {
			got = "an array"
		}
		val = string(v) + "…"
	case json.Number:
		got, val = "a number", string(v)
	case string:
		got, val = "a string", strconv.Quote(v)
	case bool:
		got, val = "a boolean", strconv.FormatBool(v)
	default:
		got = fmt.Sprintf("%T", tok)
	}
	return &FieldError{File: w.src.file, Line: w.line(), Field: field, Value: val,
		Allowed: "want " + want + ", got " + got}
}

func dotted(prefix, k string) string {
	if prefix == "" {
		return k
	}
	return prefix + "." + k
}

// walk checks one value at field against the plan's schema and stores
// it in v.
func (w *jsonWalker) walk(v reflect.Value, field string) error {
	t := v.Type()
	if !w.slow && t.Kind() == reflect.Slice && t.Elem().Kind() == reflect.Float64 {
		return w.numbers(v, field)
	}
	tok, err := w.token(field)
	if err != nil {
		return err
	}
	if tok == nil { // null: leave unset
		return nil
	}
	switch t.Kind() {
	case reflect.Struct:
		if d, ok := tok.(json.Delim); !ok || d != '{' {
			return w.typeErr(field, tok, "an object")
		}
		for w.dec.More() {
			kt, err := w.token(field)
			if err != nil {
				return err
			}
			k, _ := kt.(string)
			key := dotted(field, k)
			line := w.line()
			f, ok := fieldByName(t, k, jsonName)
			if !ok {
				parts := strings.Split(field, ".")
				if field == "" {
					parts = nil
				}
				return &FieldError{File: w.src.file, Line: line, Field: key,
					Allowed: unknownKeyMsg(append(parts, k), jsonName)}
			}
			if first, dup := w.src.lines[key]; dup {
				return &FieldError{File: w.src.file, Line: line, Field: key,
					Allowed: fmt.Sprintf("key given twice (first on line %d)", first)}
			}
			w.src.lines[key] = line
			if err := w.walk(v.FieldByIndex(f.Index), key); err != nil {
				return err
			}
		}
		_, err := w.token(field) // '}'
		return err
	case reflect.Slice:
		if d, ok := tok.(json.Delim); !ok || d != '[' {
			return w.typeErr(field, tok, goTypeWords("[]"+t.Elem().Kind().String()))
		}
		for i := 0; w.dec.More(); i++ {
			if i >= MaxPoints {
				return &FieldError{File: w.src.file, Line: w.line(), Field: field,
					Allowed: fmt.Sprintf("at most %d entries", MaxPoints)}
			}
			el := field + "[" + strconv.Itoa(i) + "]"
			w.src.setElemLine(field, i, w.line())
			v.Set(reflect.Append(v, reflect.Zero(t.Elem())))
			if err := w.walk(v.Index(i), el); err != nil {
				return err
			}
		}
		if v.IsNil() {
			v.Set(reflect.MakeSlice(t, 0, 0))
		}
		_, err := w.token(field) // ']'
		return err
	case reflect.Float64:
		n, ok := tok.(json.Number)
		if !ok {
			return w.typeErr(field, tok, "a number")
		}
		w.src.setRaw(field, string(n))
		f, err := strconv.ParseFloat(string(n), 64)
		if err != nil {
			return &FieldError{File: w.src.file, Line: w.line(), Field: field, Value: string(n),
				Allowed: "number out of range"}
		}
		v.SetFloat(f)
		return nil
	case reflect.Int:
		n, ok := tok.(json.Number)
		if !ok {
			return w.typeErr(field, tok, "an integer")
		}
		w.src.setRaw(field, string(n))
		i, err := strconv.ParseInt(string(n), 10, 64)
		if err != nil || v.OverflowInt(i) {
			msg := "want an integer"
			if _, ferr := strconv.ParseFloat(string(n), 64); ferr == nil && !strings.ContainsAny(string(n), ".eE") {
				msg = "integer out of range"
			}
			return &FieldError{File: w.src.file, Line: w.line(), Field: field, Value: string(n), Allowed: msg}
		}
		v.SetInt(i)
		return nil
	case reflect.String:
		s, ok := tok.(string)
		if !ok {
			return w.typeErr(field, tok, "a string")
		}
		w.src.setRaw(field, strconv.Quote(s))
		v.SetString(s)
		return nil
	case reflect.Bool:
		b, ok := tok.(bool)
		if !ok {
			return w.typeErr(field, tok, "true or false")
		}
		v.SetBool(b)
		return nil
	case reflect.Pointer:
		// An optional switch (nil: the default).
		if t.Elem().Kind() == reflect.Bool {
			b, ok := tok.(bool)
			if !ok {
				return w.typeErr(field, tok, "true or false")
			}
			nv := reflect.New(t.Elem())
			nv.Elem().SetBool(b)
			v.Set(nv)
			return nil
		}
	}
	return &FieldError{File: w.src.file, Line: w.line(), Field: field, Allowed: "unsupported field type " + t.String()}
}
