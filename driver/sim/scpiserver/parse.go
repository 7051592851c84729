package scpiserver

import (
	"math"
	"strconv"
	"strings"
)

// ArgKind is the syntactic type of a program data element
// (IEEE 488.2 §7.7).
type ArgKind int

// Program data element types.
const (
	ArgNumber   ArgKind = iota // decimal or nondecimal numeric data, optional suffix
	ArgChar                    // character program data, e.g. ON, SINusoid, MAX
	ArgString                  // string program data in single or double quotes
	ArgChannels                // channel list "(@1,3:5)" (SCPI-1999 §8.3.2)
	ArgExpr                    // any other parenthesised expression
)

// String names the kind.
func (k ArgKind) String() string {
	switch k {
	case ArgNumber:
		return "numeric"
	case ArgChar:
		return "character"
	case ArgString:
		return "string"
	case ArgChannels:
		return "channel list"
	case ArgExpr:
		return "expression"
	}
	return "ArgKind(" + strconv.Itoa(int(k)) + ")"
}

// Arg is one program data element.
type Arg struct {
	Kind     ArgKind
	Text     string  // as received, without surrounding white space
	Num      float64 // ArgNumber: the value before any suffix multiplier
	Suffix   string  // ArgNumber: the suffix, upper case, "" when absent
	Str      string  // ArgString: the decoded string; ArgChar: the upper-case word
	Channels []int   // ArgChannels: the channels, ranges expanded
}

// maxMnemonic is the longest program mnemonic, IEEE 488.2 §7.6.1.4.
const maxMnemonic = 12

// maxChannels bounds a channel list expansion.
const maxChannels = 1024

// mnem is one received header node: its upper-case name and numeric
// suffix (-1 when absent).
type mnem struct {
	name   string
	suffix int
}

// unit is one parsed program message unit.
type unit struct {
	text   string
	rooted bool   // header began with ":"
	common string // upper-case common command name ("*IDN") or ""
	nodes  []mnem
	query  bool
	args   []Arg
}

// splitUnits splits a program message at the ";" separators that are
// outside strings and parentheses.
func splitUnits(msg string) ([]string, *Error) {
	out, _, unterminated := splitOutside(msg, ';')
	if unterminated {
		return nil, Errorf(InvalidStringData, "unterminated string")
	}
	return out, nil
}

// splitOutside splits s at every sep outside quoted strings (a doubled
// quote stays inside the string) and parentheses. unbalanced reports a
// ")" without its "(" or a "(" left open; unterminated, a string left
// open.
func splitOutside(s string, sep byte) (out []string, unbalanced, unterminated bool) {
	depth := 0
	var quote byte
	start := 0
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch {
		case quote != 0:
			if c == quote {
				if i+1 < len(s) && s[i+1] == quote {
					i++ // doubled quote inside a string
				} else {
					quote = 0
				}
			}
		case c == '"' || c == '\'':
			quote = c
		case c == '(':
			depth++
		case c == ')':
			if depth > 0 {
				depth--
			} else {
				unbalanced = true
			}
		case c == sep && depth == 0:
			out = append(out, s[start:i])
			start = i + 1
		}
	}
	return append(out, s[start:]), unbalanced || depth != 0, quote != 0
}

func isSpace(c byte) bool {
	// IEEE 488.2 §7.4.1.2: white space is any of 0x00-0x09, 0x0B-0x20.
	return c <= 0x20 && c != '\n'
}

func isAlpha(c byte) bool { return c >= 'A' && c <= 'Z' || c >= 'a' && c <= 'z' }
func isDigit(c byte) bool { return c >= '0' && c <= '9' }

// parseUnit parses one program message unit: header, optional "?",
// white space and the comma-separated program data.
func parseUnit(text string) (unit, *Error) {
	u := unit{text: strings.TrimFunc(text, func(r rune) bool { return r < 0x80 && isSpace(byte(r)) })}
	s := u.text
	i := 0
	if s == "" {
		return u, Errorf(SyntaxError, "empty program message unit")
	}
	if s[0] == '*' {
		j := 1
		for j < len(s) && isAlpha(s[j]) {
			j++
		}
		if j == 1 {
			return u, Errorf(HeaderError, "%s", clip(s))
		}
		u.common = strings.ToUpper(s[:j])
		i = j
	} else {
		if s[0] == ':' {
			u.rooted = true
			i = 1
		}
		for {
			j := i
			for j < len(s) && (isAlpha(s[j]) || isDigit(s[j]) || s[j] == '_') {
				j++
			}
			if j == i {
				return u, Errorf(HeaderError, "%s", clip(s))
			}
			m, err := parseMnem(s[i:j])
			if err != nil {
				return u, err
			}
			u.nodes = append(u.nodes, m)
			i = j
			if i < len(s) && s[i] == ':' {
				i++
				continue
			}
			break
		}
	}
	if i < len(s) && s[i] == '?' {
		u.query = true
		i++
	}
	if i == len(s) {
		return u, nil
	}
	if !isSpace(s[i]) {
		return u, Errorf(HeaderSeparator, "%s", clip(s))
	}
	rest := strings.TrimLeftFunc(s[i:], func(r rune) bool { return r < 0x80 && isSpace(byte(r)) })
	if rest == "" {
		return u, nil
	}
	elems, err := splitArgs(rest)
	if err != nil {
		return u, err
	}
	for _, e := range elems {
		a, err := parseArg(e)
		if err != nil {
			return u, err
		}
		u.args = append(u.args, a)
	}
	return u, nil
}

// parseMnem splits a received mnemonic into name and numeric suffix.
func parseMnem(s string) (mnem, *Error) {
	if !isAlpha(s[0]) {
		return mnem{}, Errorf(HeaderError, "%s", clip(s))
	}
	j := len(s)
	for j > 0 && isDigit(s[j-1]) {
		j--
	}
	m := mnem{name: strings.ToUpper(s[:j]), suffix: -1}
	if len(m.name) > maxMnemonic {
		return mnem{}, Errorf(MnemonicTooLong, "%s", clip(s))
	}
	if j < len(s) {
		n, err := strconv.Atoi(s[j:])
		if err != nil || n > 1<<20 {
			return mnem{}, Errorf(HeaderSuffixRange, "%s", clip(s))
		}
		m.suffix = n
	}
	return m, nil
}

// splitArgs splits program data at commas outside strings and parentheses.
func splitArgs(s string) ([]string, *Error) {
	out, unbalanced, _ := splitOutside(s, ',')
	if unbalanced {
		return nil, Errorf(InvalidExpression, "unbalanced parenthesis")
	}
	for i, e := range out {
		e = strings.TrimFunc(e, func(r rune) bool { return r < 0x80 && isSpace(byte(r)) })
		if e == "" {
			return nil, Errorf(SyntaxError, "empty parameter")
		}
		out[i] = e
	}
	return out, nil
}

// parseArg classifies and decodes one program data element.
func parseArg(s string) (Arg, *Error) {
	a := Arg{Text: s}
	c := s[0]
	switch {
	case c == '"' || c == '\'':
		a.Kind = ArgString
		var b strings.Builder
		for i := 1; i < len(s); i++ {
			if s[i] == c {
				if i+1 < len(s) && s[i+1] == c {
					b.WriteByte(c)
					i++
					continue
				}
				if i != len(s)-1 {
					return a, Errorf(InvalidStringData, "text after closing quote")
				}
				a.Str = b.String()
				return a, nil
			}
			b.WriteByte(s[i])
		}
		return a, Errorf(InvalidStringData, "unterminated string")
	case c == '(':
		if s[len(s)-1] != ')' {
			return a, Errorf(InvalidExpression, "%s", clip(s))
		}
		inner := strings.TrimSpace(s[1 : len(s)-1])
		if !strings.HasPrefix(inner, "@") {
			a.Kind = ArgExpr
			a.Str = inner
			return a, nil
		}
		a.Kind = ArgChannels
		chans, err := parseChannels(strings.TrimSpace(inner[1:]))
		if err != nil {
			return a, err
		}
		a.Channels = chans
		return a, nil
	case c == '#':
		return parseNondecimal(s)
	case isAlpha(c):
		j := 0
		for j < len(s) && (isAlpha(s[j]) || isDigit(s[j]) || s[j] == '_') {
			j++
		}
		if j != len(s) {
			return a, Errorf(InvalidCharData, "%s", clip(s))
		}
		if len(s) > maxMnemonic {
			return a, Errorf(CharDataTooLong, "%s", clip(s))
		}
		a.Kind = ArgChar
		a.Str = strings.ToUpper(s)
		return a, nil
	case isDigit(c) || c == '+' || c == '-' || c == '.':
		return parseDecimal(s)
	}
	return a, Errorf(InvalidCharacter, "%s", clip(s))
}

// parseDecimal parses <DECIMAL NUMERIC PROGRAM DATA> (IEEE 488.2 §7.7.2)
// with an optional <SUFFIX PROGRAM DATA> (§7.7.3).
func parseDecimal(s string) (Arg, *Error) {
	a := Arg{Kind: ArgNumber, Text: s}
	i := 0
	var num strings.Builder
	if s[i] == '+' || s[i] == '-' {
		num.WriteByte(s[i])
		i++
	}
	digits := 0
	for i < len(s) && isDigit(s[i]) {
		num.WriteByte(s[i])
		i++
		digits++
	}
	if i < len(s) && s[i] == '.' {
		num.WriteByte('.')
		i++
		for i < len(s) && isDigit(s[i]) {
			num.WriteByte(s[i])
			i++
			digits++
		}
	}
	if digits == 0 {
		return a, Errorf(NumericDataError, "%s", clip(s))
	}
	// Optional exponent, white space allowed around E (§7.7.2.2).
	j := i
	for j < len(s) && isSpace(s[j]) {
		j++
	}
	if j < len(s) && (s[j] == 'e' || s[j] == 'E') {
		k := j + 1
		for k < len(s) && isSpace(s[k]) {
			k++
		}
		var exp strings.Builder
		if k < len(s) && (s[k] == '+' || s[k] == '-') {
			exp.WriteByte(s[k])
			k++
		}
		ed := 0
		for k < len(s) && isDigit(s[k]) {
			exp.WriteByte(s[k])
			k++
			ed++
		}
		if ed > 0 {
			num.WriteByte('e')
			num.WriteString(exp.String())
			i = k
		}
		// "1 EX" (exa) or "1E" without digits: leave it to the suffix.
	}
	v, err := strconv.ParseFloat(num.String(), 64)
	if err != nil || math.IsInf(v, 0) {
		return a, Errorf(NumericDataError, "%s", clip(s))
	}
	a.Num = v
	for i < len(s) && isSpace(s[i]) {
		i++
	}
	if i == len(s) {
		return a, nil
	}
	suf := s[i:]
	if !isAlpha(suf[0]) && suf[0] != '/' {
		return a, Errorf(NumericDataError, "%s", clip(s))
	}
	for k := 0; k < len(suf); k++ {
		c := suf[k]
		if !(isAlpha(c) || isDigit(c) || c == '/' || c == '.' || c == '-') {
			return a, Errorf(InvalidSuffix, "%s", clip(s))
		}
	}
	if len(suf) > maxMnemonic {
		return a, Errorf(InvalidSuffix, "%s", clip(s))
	}
	a.Suffix = strings.ToUpper(suf)
	return a, nil
}

// parseNondecimal parses #H, #Q and #B numeric data (IEEE 488.2 §7.7.4).
func parseNondecimal(s string) (Arg, *Error) {
	a := Arg{Kind: ArgNumber, Text: s}
	if len(s) < 3 {
		return a, Errorf(InvalidBlockData, "%s", clip(s))
	}
	base := 0
	switch s[1] {
	case 'H', 'h':
		base = 16
	case 'Q', 'q':
		base = 8
	case 'B', 'b':
		base = 2
	default:
		return a, Errorf(InvalidBlockData, "block data not accepted")
	}
	n, err := strconv.ParseUint(s[2:], base, 64)
	if err != nil {
		return a, Errorf(NumericDataError, "%s", clip(s))
	}
	a.Num = float64(n)
	return a, nil
}

// parseChannels expands a channel list body ("1,3:5") into channels.
func parseChannels(s string) ([]int, *Error) {
	if s == "" {
		return []int{}, nil
	}
	var out []int
	for _, item := range strings.Split(s, ",") {
		item = strings.TrimSpace(item)
		lo, hi, found := strings.Cut(item, ":")
		a, err1 := strconv.Atoi(strings.TrimSpace(lo))
		b := a
		var err2 error
		if found {
			b, err2 = strconv.Atoi(strings.TrimSpace(hi))
		}
		if err1 != nil || err2 != nil || a < 0 || b < 0 {
			return nil, Errorf(InvalidExpression, "channel list %q", clip(s))
		}
		step := 1
		if b < a {
			step = -1
		}
		for c := a; ; c += step {
			out = append(out, c)
			if len(out) > maxChannels {
				return nil, Errorf(TooMuchData, "channel list too long")
			}
			if c == b {
				break
			}
		}
	}
	return out, nil
}

// clip bounds text quoted back in an error entry.
func clip(s string) string {
	if len(s) > 40 {
		return s[:40] + "..."
	}
	return s
}
