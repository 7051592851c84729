package scpi

import (
	"fmt"
	"strconv"
	"strings"

	"rolloff/driver"
)

// Template is a profile command with named placeholders, e.g.
// "SOUR:FREQ {freq_hz}". Compile refuses text that could carry a second
// command or a terminator; Format fills the placeholders with validated
// arguments only.
type Template struct {
	key   string
	text  string
	parts []part
	names []string // distinct placeholder names, in order of appearance
}

type part struct {
	lit  string // literal text, when name is ""
	name string // placeholder name
}

// TemplateError is a refused template text or argument. Key is the profile
// key the template came from; Placeholder names the placeholder concerned
// (empty for an error in the text itself); Value is the bad text or
// argument; Reason says what is wrong and what is allowed.
type TemplateError struct {
	Key         string
	Placeholder string
	Value       string
	Reason      string
	Err         error // driver.ErrOutOfRange for a refused argument value, else nil
}

// Error names the profile key, the placeholder and the value.
func (e *TemplateError) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "scpi: profile key %q", e.Key)
	if e.Placeholder != "" {
		fmt.Fprintf(&b, ": {%s}", e.Placeholder)
	}
	if e.Value != "" || e.Placeholder == "" {
		fmt.Fprintf(&b, ": %q", quoteable(e.Value))
	}
	b.WriteString(": " + e.Reason)
	return b.String()
}

// Unwrap returns Err.
func (e *TemplateError) Unwrap() error { return e.Err }

// Summary returns the reason alone, for a message that names the key and
// value itself.
func (e *TemplateError) Summary() string { return e.Reason }

// Compile parses a profile command. key names the profile entry in errors.
// The text must be printable ASCII without ';' (a second command), quotes
// (string data is not templated), CR or LF (terminators); placeholders are
// {name} with name made of letters, digits and '_', starting with a letter
// or '_'. A name may appear more than once; one argument fills all.
func Compile(key, text string) (*Template, error) {
	bad := func(reason string, args ...any) (*Template, error) {
		return nil, &TemplateError{Key: key, Value: text, Reason: fmt.Sprintf(reason, args...)}
	}
	if strings.TrimSpace(text) == "" {
		return bad("empty command")
	}
	t := &Template{key: key, text: text}
	seen := map[string]bool{}
	var lit strings.Builder
	for i := 0; i < len(text); i++ {
		c := text[i]
		switch {
		case c == '\r' || c == '\n':
			return bad("byte %d: a line break would end the message; allowed: one command on one line", i)
		case c == ';':
			return bad("byte %d: ';' would start another command; allowed: one command per profile key", i)
		case c == '"' || c == '\'':
			return bad("byte %d: quotes (string data) are not allowed in a command template", i)
		case c < 0x20 || c > 0x7e:
			return bad("byte %d (0x%02x): not printable ASCII", i, c)
		case c == '}':
			return bad("byte %d: '}' without '{'", i)
		case c == '{':
			end := strings.IndexAny(text[i+1:], "{}")
			if end < 0 || text[i+1+end] == '{' {
				return bad("byte %d: '{' without '}'", i)
			}
			name := text[i+1 : i+1+end]
			if !isName(name) {
				return bad("byte %d: placeholder {%s}: a name is letters, digits and '_', e.g. {freq_hz}", i, name)
			}
			if lit.Len() > 0 {
				t.parts = append(t.parts, part{lit: lit.String()})
				lit.Reset()
			}
			t.parts = append(t.parts, part{name: name})
			if !seen[name] {
				seen[name] = true
				t.names = append(t.names, name)
			}
			i += end + 1
		default:
			lit.WriteByte(c)
		}
	}
	if lit.Len() > 0 {
		t.parts = append(t.parts, part{lit: lit.String()})
	}
	return t, nil
}

func isName(s string) bool {
	if s == "" {
		return false
	}
	for i := 0; i < len(s); i++ {
		c := s[i]
		if !(c == '_' || 'a' <= c && c <= 'z' || 'A' <= c && c <= 'Z' || i > 0 && isDigit(c)) {
			return false
		}
	}
	return true
}

// Key returns the profile key the template came from.
func (t *Template) Key() string { return t.key }

// Text returns the template text.
func (t *Template) Text() string { return t.text }

// Placeholders returns the distinct placeholder names in order of first
// appearance.
func (t *Template) Placeholders() []string { return append([]string(nil), t.names...) }

type argKind int

const (
	argNum argKind = iota
	argInt
	argWord
)

// Arg is a named, typed argument for Template.Format.
type Arg struct {
	name string
	kind argKind
	num  float64
	i    int
	word string
	fmt  *NumberFormat // nil: the fewest digits that read back exactly
}

// Num is a finite number, written with the fewest digits that read back to
// exactly v (see FormatNumber). NaN and ±Inf are refused.
func Num(name string, v float64) Arg { return Arg{name: name, kind: argNum, num: v} }

// Int is an integer, written in NR1 form.
func Int(name string, v int) Arg { return Arg{name: name, kind: argInt, i: v} }

// Word is SCPI character program data (IEEE 488.2 §7.7.1: a letter, then
// up to 11 letters, digits or '_', e.g. ON, SIN, MAXimum) or a plain
// decimal number token (e.g. 10, -3.5, 1E3). Anything else is refused.
func Word(name, v string) Arg { return Arg{name: name, kind: argWord, word: v} }

// maxMnemonic is the longest character program data (IEEE 488.2 §7.7.1.2).
const maxMnemonic = 12

// checkWord says why v is not a safe Word, or "" when it is.
func checkWord(v string) string {
	switch {
	case v == "":
		return "empty word"
	case strings.ContainsAny(v, ";"):
		return "';' would start another command"
	case strings.ContainsAny(v, "\"'"):
		return "quotes are not allowed in a word"
	case strings.ContainsAny(v, "\r\n"):
		return "a line break would end the message"
	case strings.ContainsAny(v, " \t"):
		return "white space would start another parameter"
	case strings.ContainsAny(v, ","):
		return "',' would add another parameter"
	}
	if isMnemonic(v) {
		if len(v) > maxMnemonic {
			return fmt.Sprintf("longer than %d characters (IEEE 488.2 §7.7.1.2)", maxMnemonic)
		}
		return ""
	}
	if _, reason := scanNRf(v, false); reason == "" {
		return ""
	}
	return "not SCPI character data (a letter, then letters, digits or '_') nor a decimal number"
}

func isMnemonic(s string) bool {
	if s == "" || !('a' <= s[0] && s[0] <= 'z' || 'A' <= s[0] && s[0] <= 'Z') {
		return false
	}
	for i := 1; i < len(s); i++ {
		c := s[i]
		if !(c == '_' || isDigit(c) || 'a' <= c && c <= 'z' || 'A' <= c && c <= 'Z') {
			return false
		}
	}
	return true
}

func (a Arg) value() string {
	switch a.kind {
	case argNum:
		return strconv.FormatFloat(a.num, 'g', -1, 64)
	case argInt:
		return strconv.Itoa(a.i)
	}
	return a.word
}

// render returns the argument's program data, or why it is refused.
func (a Arg) render() (string, string) {
	switch a.kind {
	case argNum:
		if a.fmt != nil {
			s, err := a.fmt.Text(a.num)
			if err != nil {
				return "", err.Error()
			}
			return s, ""
		}
		s, err := FormatNumber(a.num)
		if err != nil {
			return "", err.Error()
		}
		return s, ""
	case argInt:
		return strconv.Itoa(a.i), ""
	}
	if reason := checkWord(a.word); reason != "" {
		return "", reason
	}
	return a.word, ""
}

// Format fills the placeholders. Every placeholder needs exactly one
// argument and every argument must be used. A refused value wraps
// driver.ErrOutOfRange: nothing is sent.
func (t *Template) Format(args ...Arg) (string, error) {
	vals := make(map[string]string, len(args))
	for _, a := range args {
		if _, dup := vals[a.name]; dup {
			return "", &TemplateError{Key: t.key, Placeholder: a.name, Reason: "argument given more than once"}
		}
		if !t.has(a.name) {
			return "", &TemplateError{Key: t.key, Placeholder: a.name, Value: a.value(), Reason: "no such placeholder in " + strconv.Quote(t.text) + "; placeholders: " + t.list()}
		}
		s, reason := a.render()
		if reason != "" {
			return "", &TemplateError{Key: t.key, Placeholder: a.name, Value: a.value(), Reason: "refused: " + reason, Err: driver.ErrOutOfRange}
		}
		vals[a.name] = s
	}
	var b strings.Builder
	for _, p := range t.parts {
		if p.name == "" {
			b.WriteString(p.lit)
			continue
		}
		v, ok := vals[p.name]
		if !ok {
			return "", &TemplateError{Key: t.key, Placeholder: p.name, Reason: "no argument given; placeholders: " + t.list()}
		}
		b.WriteString(v)
	}
	return b.String(), nil
}

func (t *Template) has(name string) bool {
	for _, n := range t.names {
		if n == name {
			return true
		}
	}
	return false
}

func (t *Template) list() string {
	if len(t.names) == 0 {
		return "none"
	}
	return "{" + strings.Join(t.names, "}, {") + "}"
}
