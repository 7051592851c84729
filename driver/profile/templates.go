package profile

import (
	"errors"
	"fmt"
	"strings"

	"rolloff/driver/scpi"
)

// compileTemplate compiles the template at key. An empty text is an error
// when required and gives nil otherwise. placeholders are the names the
// template may use; each of them must appear, and no other.
func compileTemplate(p *problems, key, text string, required bool, placeholders ...string) *scpi.Template {
	if strings.TrimSpace(text) == "" {
		if required {
			p.add(key, text, "a SCPI command"+placeholderHint(placeholders), "missing command")
		}
		return nil
	}
	t, err := scpi.Compile(key, text)
	if err != nil {
		msg := "bad command template"
		var te *scpi.TemplateError
		if errors.As(err, &te) {
			msg += ": " + te.Reason
		}
		p.addErr(key, text, "", msg, err)
		return nil
	}
	if err := checkPlaceholders(t, placeholders); err != nil {
		p.add(key, text, placeholderAllowed(placeholders), err.Error())
		return nil
	}
	return t
}

// compileList compiles a list of placeholder-free commands at key[i].
func compileList(p *problems, key string, texts []string) []*scpi.Template {
	var out []*scpi.Template
	for i, s := range texts {
		if t := compileTemplate(p, fmt.Sprintf("%s[%d]", key, i), s, true); t != nil {
			out = append(out, t)
		}
	}
	return out
}

func placeholderAllowed(names []string) string {
	if len(names) == 0 {
		return "no placeholders"
	}
	return "exactly the placeholders {" + strings.Join(names, "}, {") + "}"
}

func placeholderHint(names []string) string {
	if len(names) == 0 {
		return " (no placeholders)"
	}
	return " (with {" + strings.Join(names, "}, {") + "})"
}

// checkPlaceholders requires the template's placeholders to be exactly
// want (each at least once, no others).
func checkPlaceholders(t *scpi.Template, want []string) error {
	got := t.Placeholders()
	for _, g := range got {
		ok := false
		for _, w := range want {
			ok = ok || g == w
		}
		if !ok {
			return fmt.Errorf("unknown placeholder {%s}", g)
		}
	}
	for _, w := range want {
		ok := false
		for _, g := range got {
			ok = ok || g == w
		}
		if !ok {
			return fmt.Errorf("placeholder {%s} missing", w)
		}
	}
	return nil
}

// seqKey names element i of a command list at key ("dc.read[1]"), or
// the key itself for a single command.
func seqKey(key string, n, i int) string {
	if n <= 1 {
		return key
	}
	return fmt.Sprintf("%s[%d]", key, i)
}

// compileSeqTemplates compiles each command of cmds, refusing in each a
// placeholder outside allowed; nil when any failed.
func compileSeqTemplates(p *problems, key string, cmds Cmds, allowed []string, hint string) []*scpi.Template {
	if reason, bad := cmds.badReason(); bad {
		p.add(key, nil, "a SCPI command (a quoted string) or a list of them"+hint, reason)
		return nil
	}
	var ts []*scpi.Template
	ok := true
	for i, text := range cmds {
		k := seqKey(key, len(cmds), i)
		if strings.TrimSpace(text) == "" {
			p.add(k, text, "a SCPI command"+hint, "empty command in the list")
			ok = false
			continue
		}
		t, err := scpi.Compile(k, text)
		if err != nil {
			msg := "bad command template"
			var te *scpi.TemplateError
			if errors.As(err, &te) {
				msg += ": " + te.Reason
			}
			p.addErr(k, text, "", msg, err)
			ok = false
			continue
		}
		for _, n := range t.Placeholders() {
			if !hasName(allowed, n) {
				p.add(k, text, placeholderAllowed(allowed), fmt.Sprintf("unknown placeholder {%s}", n))
				ok = false
			}
		}
		ts = append(ts, t)
	}
	if !ok || len(ts) == 0 {
		return nil
	}
	return ts
}

// compileSeq compiles the command list at key: every placeholder in
// placeholders must appear in one of its commands, and no other. An
// empty list is an error when required and gives nil otherwise.
func compileSeq(p *problems, key string, cmds Cmds, required bool, placeholders ...string) *scpi.Seq {
	if cmds.Empty() {
		if required {
			p.add(key, "", "a SCPI command or a list of commands"+placeholderHint(placeholders), "missing command")
		}
		return nil
	}
	ts := compileSeqTemplates(p, key, cmds, placeholders, placeholderHint(placeholders))
	if ts == nil {
		return nil
	}
	s := scpi.NewSeq(key, ts...)
	for _, w := range placeholders {
		if !s.Has(w) {
			p.add(key, cmdsValue(cmds), placeholderAllowed(placeholders), fmt.Sprintf("placeholder {%s} missing", w))
			return nil
		}
	}
	return s
}

// compileQuerySeq is compileSeq for a query: the last command must be a
// query (end in '?'), the others must not be (each would leave an answer
// unread).
func compileQuerySeq(p *problems, key string, cmds Cmds, required bool, placeholders ...string) *scpi.Seq {
	s := compileSeq(p, key, cmds, required, placeholders...)
	if s == nil {
		return nil
	}
	for i, text := range cmds {
		q := strings.Contains(text, "?")
		last := i == len(cmds)-1
		if last && !q {
			p.add(seqKey(key, len(cmds), i), text, "a query (with '?') as the last command", "the reading is never asked for")
			return nil
		}
		if !last && q {
			p.add(seqKey(key, len(cmds), i), text, "commands without '?' before the last one, which is the query", "an answer left unread")
			return nil
		}
	}
	return s
}

func cmdsValue(c Cmds) any {
	if len(c) == 1 {
		return c[0]
	}
	return []string(c)
}
