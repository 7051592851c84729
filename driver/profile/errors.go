package profile

import (
	"errors"
	"fmt"
	"reflect"
	"regexp"
	"strings"

	"github.com/pelletier/go-toml/v2"

	"rolloff/internal/fielderr"
)

// FieldError is a problem with one key of a profile or bench file: the
// file, the line, the dotted key (Field), the bad value, what is wrong
// (Msg), the cause and what is allowed. It is the one field-error type of
// the program, the same as plan.FieldError.
type FieldError = fielderr.Error

// problems collects the validation errors of one file.
type problems struct {
	file  string
	lines keyLines
	errs  []error
}

// maxProblems bounds how many problems one file reports.
const maxProblems = 20

func newProblems(file string, data []byte) *problems {
	return &problems{file: file, lines: indexKeys(data)}
}

// add records a problem with key. value is formatted with %v; strings are
// quoted.
func (p *problems) add(key string, value any, allowed, msg string) {
	p.addErr(key, value, allowed, msg, nil)
}

func (p *problems) addErr(key string, value any, allowed, msg string, err error) {
	if len(p.errs) >= maxProblems {
		return
	}
	p.errs = append(p.errs, &FieldError{
		File:    p.file,
		Line:    p.lines.line(key),
		Field:   key,
		Value:   formatValue(value),
		Allowed: allowed,
		Msg:     msg,
		Err:     err,
	})
}

func (p *problems) err() error {
	if len(p.errs) == 0 {
		return nil
	}
	return errors.Join(p.errs...)
}

func formatValue(v any) string { return fielderr.FormatValue(v) }

// decodeError turns a go-toml decode error into FieldErrors carrying the
// file, line and key.
func decodeError(file string, err error, target any) error {
	var sm *toml.StrictMissingError
	if errors.As(err, &sm) {
		errs := make([]error, 0, len(sm.Errors))
		for i := range sm.Errors {
			de := &sm.Errors[i]
			line, _ := de.Position()
			errs = append(errs, &FieldError{
				File: file, Line: line, Field: strings.Join(de.Key(), "."),
				Msg: "unknown key", Allowed: allowedKeys(target, de.Key()),
			})
			if len(errs) >= maxProblems {
				break
			}
		}
		return errors.Join(errs...)
	}
	var de *toml.DecodeError
	if errors.As(err, &de) {
		line, _ := de.Position()
		return &FieldError{File: file, Line: line, Field: strings.Join(de.Key(), "."), Msg: plainDecodeMessage(strings.TrimPrefix(de.Error(), "toml: "))}
	}
	return &FieldError{File: file, Msg: "cannot decode", Err: err}
}

// decodeErrorIn is decodeError for a document whose text is at hand: a
// value of the wrong type is quoted as written on its line.
func decodeErrorIn(file string, data []byte, err error, target any) error {
	out := decodeError(file, err, target)
	var fe *FieldError
	if errors.As(out, &fe) && fe.Value == "" && fe.Line > 0 && fe.Field != "" {
		fe.Value = valueOnLine(data, fe.Line)
	}
	return out
}

// valueOnLine returns the value of the `key = value` pair on a 1-based
// line of a TOML document, without a trailing comment, cut to a sane
// length; "" when the line holds no such pair.
func valueOnLine(data []byte, line int) string {
	lines := strings.Split(string(data), "\n")
	if line < 1 || line > len(lines) {
		return ""
	}
	_, v, ok := strings.Cut(lines[line-1], "=")
	if !ok {
		return ""
	}
	v = strings.TrimSpace(v)
	if i := strings.Index(v, " #"); i >= 0 && !strings.ContainsAny(v[:i], `"'`) {
		v = strings.TrimSpace(v[:i])
	}
	if len(v) > 60 {
		v = v[:60] + "…"
	}
	return v
}

// typeMismatch matches go-toml's message for a value of the wrong type.
var typeMismatch = regexp.MustCompile(`^cannot decode TOML (\w+) into .* of type (\S+)$`)

// plainDecodeMessage restates go-toml's type errors in profile terms,
// without Go type names.
func plainDecodeMessage(msg string) string {
	m := typeMismatch.FindStringSubmatch(msg)
	if m == nil {
		return msg
	}
	return fmt.Sprintf("a TOML %s where %s is expected", m[1], tomlTypeName(m[2]))
}

func tomlTypeName(goType string) string {
	switch {
	case strings.HasPrefix(goType, "float"), strings.HasPrefix(goType, "*float"):
		return "a number"
	case strings.HasPrefix(goType, "int"), strings.HasPrefix(goType, "*int"), strings.HasPrefix(goType, "uint"):
		return "an integer"
	case strings.Contains(goType, "string"):
		if strings.HasPrefix(goType, "[]") {
			return "a list of strings"
		}
		return "a string"
	case goType == "bool":
		return "true or false"
	case strings.HasPrefix(goType, "[]"):
		return "a list"
	}
	return "a table"
}

// allowedKeys lists the keys of the table that holds key in the
// structure target decodes into.
func allowedKeys(target any, key []string) string {
	t := reflect.TypeOf(target)
	for i := 0; ; i++ {
		for t.Kind() == reflect.Pointer || t.Kind() == reflect.Slice || t.Kind() == reflect.Array {
			t = t.Elem()
		}
		if t.Kind() != reflect.Struct {
			return "only the keys documented in the file format"
		}
		if i >= len(key)-1 {
			break
		}
		f, ok := fieldByTag(t, key[i])
		if !ok {
			return "only the keys documented in the file format"
		}
		t = f.Type
	}
	var names []string
	for i := 0; i < t.NumField(); i++ {
		if n := tomlName(t.Field(i)); n != "" {
			names = append(names, n)
		}
	}
	if len(names) == 0 {
		return "no keys here"
	}
	return strings.Join(names, ", ")
}

func fieldByTag(t reflect.Type, name string) (reflect.StructField, bool) {
	for i := 0; i < t.NumField(); i++ {
		if tomlName(t.Field(i)) == name {
			return t.Field(i), true
		}
	}
	return reflect.StructField{}, false
}

func tomlName(f reflect.StructField) string {
	if !f.IsExported() {
		return ""
	}
	tag, ok := f.Tag.Lookup("toml")
	if !ok {
		return f.Name
	}
	name, _, _ := strings.Cut(tag, ",")
	if name == "-" {
		return ""
	}
	if name == "" {
		return f.Name
	}
	return name
}
