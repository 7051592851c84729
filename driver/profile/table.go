package profile

import (
	"bytes"
	"errors"
	"reflect"

	"github.com/pelletier/go-toml/v2"
)

// DecodeTable decodes the table name of the bench file (e.g. "sim") into
// v, a pointer to a struct that may hold defaults: keys the table leaves
// out keep them, lists are replaced whole. Decoding is strict, as for the
// rest of the file: an unknown or mistyped key is a *FieldError naming the
// file, the line and the dotted key from the top of the file (e.g.
// "sim.dut.clip_volts"). A missing table leaves v alone.
func (b *BenchFile) DecodeTable(name string, v any) error {
	rv := reflect.ValueOf(v)
	if rv.Kind() != reflect.Pointer || rv.IsNil() {
		return errors.New("profile: DecodeTable needs a non-nil pointer")
	}
	// The document is decoded whole, every other top-level key into the
	// type it has here, so that strictness and key paths are the same as
	// when the bench file was decoded.
	bt := reflect.TypeOf(*b)
	var fields []reflect.StructField
	index := -1
	for i := 0; i < bt.NumField(); i++ {
		f := bt.Field(i)
		n := tomlName(f)
		if n == "" {
			continue
		}
		if n == name {
			index = len(fields)
			f.Type = rv.Type()
		}
		fields = append(fields, reflect.StructField{Name: f.Name, Type: f.Type, Tag: f.Tag})
	}
	if index < 0 {
		return errors.New("profile: bench files have no table " + name)
	}
	doc := reflect.New(reflect.StructOf(fields))
	doc.Elem().Field(index).Set(rv)
	d := toml.NewDecoder(bytes.NewReader(b.Raw))
	d.DisallowUnknownFields()
	if err := d.Decode(doc.Interface()); err != nil {
		return decodeErrorIn(b.File, b.Raw, err, doc.Interface())
	}
	return nil
}

// Listed reports whether the bench file writes key (a dotted key such as
// "sim.line_hz"), or any key under it.
func (b *BenchFile) Listed(key string) bool { return b.keyLines().has(key) }

// KeyError returns the problem with key of the bench file as a
// *FieldError carrying the file and the line of the key (or of its
// closest written parent). value is quoted as the decoder quotes values
// (strings in quotes, numbers in %g); nil leaves it out.
func (b *BenchFile) KeyError(key string, value any, allowed, msg string, err error) *FieldError {
	return &FieldError{File: b.File, Line: b.keyLines().line(key), Field: key, Value: formatValue(value),
		Allowed: allowed, Msg: msg, Err: err}
}

// Line returns the 1-based line where the bench file writes key, or its
// closest written parent; 0 when unknown.
func (b *BenchFile) Line(key string) int { return b.keyLines().line(key) }

func (b *BenchFile) keyLines() keyLines {
	if b.lines == nil {
		b.lines = indexKeys(b.Raw)
	}
	return b.lines
}
