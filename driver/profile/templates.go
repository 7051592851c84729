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
