package profile

import (
	"fmt"
	"math"
	"strings"

	"rolloff/driver/scpi"
)

// DBmLoad is the output.dbm_reference value meaning "dBm refer to the
// load setting".
const DBmLoad = "load"

const dbmRefAllowed = `"load" (dBm into the load setting output.load) or the fixed resistance in ohms the instrument's dBm always refer to (e.g. 50): see the instrument's manual`

// validateDBm resolves output.dbm_reference: required with unit dbm (no
// default, generators differ), refused with any other unit.
func (g *Generator) validateDBm(p *problems) {
	o := &g.Output
	o.dbmRefOhms = 0
	if o.Unit != UnitDBm {
		if o.DBmReference != nil {
			p.add("output.dbm_reference", o.DBmReference, `only with output.unit = "dbm"`, "dBm reference without dBm")
		}
		return
	}
	switch x := o.DBmReference.(type) {
	case nil:
		p.add("output.dbm_reference", nil, dbmRefAllowed, `missing: required with output.unit = "dbm" (no default: generators differ on what their dBm refer to)`)
	case string:
		if x != DBmLoad {
			break
		}
		if math.IsInf(o.loadOhms, 1) {
			p.add("output.load", o.Load, `ohms (e.g. 50) when output.dbm_reference = "load"`, "dBm into a hi-z load is undefined")
			return
		}
		o.dbmRefOhms = o.loadOhms
		return
	case int64:
		if x > 0 && x <= 1e6 {
			o.dbmRefOhms = float64(x)
			return
		}
	case float64:
		if finite(x) && x > 0 && x <= 1e6 {
			o.dbmRefOhms = x
			return
		}
	}
	if o.DBmReference != nil {
		p.add("output.dbm_reference", o.DBmReference, dbmRefAllowed, "bad dBm reference")
	}
}

// GenPlaceholders are the placeholders every generator command may
// carry: rolloff fills each from the settings it last sent.
var GenPlaceholders = []string{"freq_hz", "amplitude", "offset_v"}

// compileGenSeq compiles a generator command list that must carry the
// placeholders in need and may carry any of GenPlaceholders, and no
// others. A command setting several of frequency, amplitude and offset
// at once (apply-style) must carry all three: an instrument fills an
// omitted one with its default and would silently reset the level.
func compileGenSeq(p *problems, key string, cmds Cmds, required bool, need []string) *scpi.Seq {
	if cmds.Empty() {
		if required {
			p.add(key, "", "a SCPI command or a list of commands"+placeholderHint(need), "missing command")
		}
		return nil
	}
	allowed := append(append([]string(nil), need...), GenPlaceholders...)
	hint := placeholderAllowed(need)
	if len(need) == 0 {
		hint = "no placeholders"
	}
	hint += ", and optionally {" + strings.Join(GenPlaceholders, "}, {") + "}"
	ts := compileSeqTemplates(p, key, cmds, allowed, " ("+hint+")")
	if ts == nil {
		return nil
	}
	s := scpi.NewSeq(key, ts...)
	for _, n := range need {
		if !s.Has(n) {
			p.add(key, cmdsValue(cmds), hint, fmt.Sprintf("placeholder {%s} missing", n))
			return nil
		}
	}
	for i, t := range ts {
		if !checkApplyStyle(p, seqKey(key, len(cmds), i), t) {
			return nil
		}
	}
	return s
}

// compileGenQuery compiles an optional read-back query (no placeholders).
func compileGenQuery(p *problems, key string, cmds Cmds) *scpi.Seq {
	if cmds.Empty() {
		return nil
	}
	return compileQuerySeq(p, key, cmds, false)
}

// checkApplyStyle refuses an apply-style command missing one of the
// generator parameters: one whose header starts with APPLy, or one that
// carries two or more of {freq_hz}, {amplitude}, {offset_v}.
func checkApplyStyle(p *problems, key string, t *scpi.Template) bool {
	got := t.Placeholders()
	n := 0
	for _, g := range GenPlaceholders {
		if hasName(got, g) {
			n++
		}
	}
	hdr, _, _ := strings.Cut(strings.TrimSpace(t.Text()), " ")
	hdr = strings.ToUpper(strings.TrimPrefix(hdr, ":"))
	apply := strings.HasPrefix(hdr, "APPL")
	if n < 2 && !apply {
		return true
	}
	for _, g := range GenPlaceholders {
		if !hasName(got, g) {
			p.add(key, t.Text(), "an apply-style command with all of {freq_hz}, {amplitude} and {offset_v}",
				fmt.Sprintf("apply-style command without {%s}: an instrument fills an omitted parameter with its default, which can reset the level", g))
			return false
		}
	}
	return true
}

// sendsOffset reports whether some command sends {offset_v}.
func (g *Generator) sendsOffset() bool {
	t := &g.T
	for _, s := range []*scpi.Seq{t.FunctionSine, t.SetUnit, t.SetLoad, t.SetFrequency, t.SetAmplitude, t.SetOffset, t.OutputOn, t.OutputOff} {
		if s.Has("offset_v") {
			return true
		}
	}
	return false
}

func hasName(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

// checkGeneratorTemplates refuses, in every generator command, a level,
// frequency or offset rolloff did not compute and check: numeric literals
// among the parameters (e.g. "APPLy:SINusoid {freq_hz},9.9,0") and the
// instrument-chosen levels MINimum, MAXimum, DEFault, UP and DOWN. A
// number that is part of the header (SOURce1, OUTPut2) is a numeric
// suffix, not a value (SCPI-1999 vol. 1 §6.2.5.2), and is allowed.
func (g *Generator) checkGeneratorTemplates(p *problems) {
	c := g.Commands
	for i, s := range c.Init {
		checkLiterals(p, fmt.Sprintf("commands.init[%d]", i), s)
	}
	for _, kc := range []struct {
		key  string
		cmds Cmds
	}{
		{"commands.function_sine", c.FunctionSine},
		{"commands.set_unit", c.SetUnit},
		{"commands.set_load", c.SetLoad},
		{"commands.set_frequency", c.SetFrequency},
		{"commands.set_amplitude", c.SetAmplitude},
		{"commands.set_offset", c.SetOffset},
		{"commands.query_frequency", c.QueryFrequency},
		{"commands.query_amplitude", c.QueryAmplitude},
		{"commands.query_output", c.QueryOutput},
		{"commands.output_on", c.OutputOn},
		{"commands.output_off", c.OutputOff},
	} {
		for i, text := range kc.cmds {
			checkLiterals(p, seqKey(kc.key, len(kc.cmds), i), text)
		}
	}
}

// placeholderSuffixes are the unit suffixes allowed after a placeholder
// (base units only: a multiplier such as KHZ or MV would rescale the
// value rolloff computed).
var placeholderSuffixes = map[string][]string{
	"freq_hz":   {"HZ"},
	"amplitude": {"V", "VPP", "VRMS", "DBM"},
	"offset_v":  {"V"},
	"load":      {"OHM"},
}

// instrumentLevels are parameter words with which the instrument picks a
// value itself (SCPI-1999 vol. 1 §7.2.1.1: MINimum, MAXimum, DEFault;
// UP and DOWN step it). Matched on their short form as a prefix.
var instrumentLevels = []string{"MIN", "MAX", "DEF", "UP", "DOWN"}

// checkLiterals checks one template text; see checkGeneratorTemplates.
func checkLiterals(p *problems, key, text string) {
	s := strings.TrimSpace(text)
	if s == "" {
		return
	}
	bad := func(allowed, msg string) { p.add(key, text, allowed, msg) }
	hdr, params, _ := strings.Cut(strings.ReplaceAll(s, "\t", " "), " ")
	if reason := checkHeader(hdr); reason != "" {
		bad("a SCPI header: mnemonics with an optional numeric suffix, e.g. SOURce1:VOLTage", reason)
		return
	}
	if strings.TrimSpace(params) == "" {
		return
	}
	for _, elem := range strings.Split(params, ",") {
		toks := strings.Fields(elem)
		if len(toks) == 0 {
			bad("one value per parameter", "empty parameter")
			return
		}
		prev := "" // placeholder of the previous token, if it was one
		for _, tok := range toks {
			name, rest, isPh := splitPlaceholder(tok)
			switch {
			case strings.Contains(rest, "{") || (!isPh && strings.Contains(tok, "{")):
				bad("a placeholder alone as a parameter, e.g. {amplitude}", fmt.Sprintf("text attached before a placeholder in %q", tok))
				return
			case isPh && rest != "":
				if !suffixOK(name, rest) {
					bad(suffixAllowed(name), fmt.Sprintf("%q after {%s} would change the value rolloff computed", rest, name))
					return
				}
				prev = ""
			case isPh:
				prev = name
			case prev != "":
				if !suffixOK(prev, tok) {
					bad(suffixAllowed(prev), fmt.Sprintf("%q after {%s} would change the value rolloff computed", tok, prev))
					return
				}
				prev = ""
			default:
				if reason := literalValue(tok); reason != "" {
					bad("placeholders ({freq_hz}, {amplitude}, {offset_v}) for every level, frequency and offset; words such as ON, OFF, SIN, INF", reason)
					return
				}
			}
		}
	}
}

// checkHeader says why h is not a plain SCPI program header.
func checkHeader(h string) string {
	if strings.Contains(h, "{") {
		return "placeholder in the command header"
	}
	h = strings.TrimSuffix(h, "?")
	h = strings.TrimPrefix(h, "*")
	h = strings.TrimPrefix(h, ":")
	for _, seg := range strings.Split(h, ":") {
		i := 0
		for i < len(seg) && isLetter(seg[i]) {
			i++
		}
		if i == 0 {
			return fmt.Sprintf("header part %q does not start with a letter", seg)
		}
		for ; i < len(seg); i++ {
			if !('0' <= seg[i] && seg[i] <= '9') {
				return fmt.Sprintf("header part %q: only digits may follow a mnemonic", seg)
			}
		}
	}
	return ""
}

func isLetter(c byte) bool { return 'a' <= c && c <= 'z' || 'A' <= c && c <= 'Z' || c == '_' }

// splitPlaceholder splits "{name}rest"; isPh is false when tok does not
// start with a placeholder.
func splitPlaceholder(tok string) (name, rest string, isPh bool) {
	if !strings.HasPrefix(tok, "{") {
		return "", tok, false
	}
	end := strings.IndexByte(tok, '}')
	if end < 0 {
		return "", tok, false
	}
	return tok[1:end], tok[end+1:], true
}

func suffixOK(name, suffix string) bool {
	for _, s := range placeholderSuffixes[name] {
		if strings.EqualFold(s, suffix) {
			return true
		}
	}
	return false
}

func suffixAllowed(name string) string {
	if s := placeholderSuffixes[name]; len(s) > 0 {
		return fmt.Sprintf("{%s} alone or followed by %s", name, strings.Join(s, ", "))
	}
	return fmt.Sprintf("{%s} alone", name)
}

// literalValue says why a literal parameter token is a value rolloff
// would not have computed, or "" for harmless character data.
func literalValue(tok string) string {
	c := tok[0]
	if c == '+' || c == '-' || c == '.' || c == '#' || ('0' <= c && c <= '9') {
		return fmt.Sprintf("numeric literal %q: a level, frequency or offset must come from a placeholder rolloff fills and checks", tok)
	}
	u := strings.ToUpper(tok)
	for _, w := range instrumentLevels {
		if strings.HasPrefix(u, w) && isLevelWord(u, w) {
			return fmt.Sprintf("%q lets the instrument choose a level rolloff did not check", tok)
		}
	}
	return ""
}

// isLevelWord reports whether u (upper case) is the short or a longer
// form of the level word w: MIN, MINIMUM, MAX, MAXIMUM, DEF, DEFAULT,
// UP, DOWN.
func isLevelWord(u, w string) bool {
	long := map[string]string{"MIN": "MINIMUM", "MAX": "MAXIMUM", "DEF": "DEFAULT", "UP": "UP", "DOWN": "DOWN"}[w]
	return strings.HasPrefix(long, u)
}
