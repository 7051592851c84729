package scpi

import (
	"fmt"
	"strings"
)

// Seq is the command sequence of one profile key: one or more compiled
// templates sent in order. For a query (a reading, a read-back) every
// command but the last is written and the last one is queried, e.g.
// INITiate then FETCh?. A nil *Seq is an absent key.
type Seq struct {
	key string
	ts  []*Template
}

// NewSeq returns the sequence of ts under key; it panics on an empty
// list, which a profile loader refuses before.
func NewSeq(key string, ts ...*Template) *Seq {
	if len(ts) == 0 {
		panic("scpi: NewSeq: no commands for " + key)
	}
	return &Seq{key: key, ts: append([]*Template(nil), ts...)}
}

// CompileSeq compiles texts as the sequence of key: a single text keeps
// key as its name, a list names its elements key[i].
func CompileSeq(key string, texts ...string) (*Seq, error) {
	if len(texts) == 0 {
		return nil, &TemplateError{Key: key, Reason: "empty command list"}
	}
	s := &Seq{key: key}
	for i, t := range texts {
		k := key
		if len(texts) > 1 {
			k = fmt.Sprintf("%s[%d]", key, i)
		}
		c, err := Compile(k, t)
		if err != nil {
			return nil, err
		}
		s.ts = append(s.ts, c)
	}
	return s, nil
}

// Key returns the profile key of the sequence.
func (s *Seq) Key() string { return s.key }

// Templates returns the commands of the sequence in order.
func (s *Seq) Templates() []*Template { return append([]*Template(nil), s.ts...) }

// Len returns the number of commands.
func (s *Seq) Len() int { return len(s.ts) }

// Text returns the commands joined by " then ", for messages.
func (s *Seq) Text() string {
	t := make([]string, len(s.ts))
	for i, c := range s.ts {
		t[i] = c.Text()
	}
	return strings.Join(t, " then ")
}

// Placeholders returns the distinct placeholder names of all commands in
// order of first appearance.
func (s *Seq) Placeholders() []string {
	var out []string
	seen := map[string]bool{}
	for _, t := range s.ts {
		for _, n := range t.names {
			if !seen[n] {
				seen[n] = true
				out = append(out, n)
			}
		}
	}
	return out
}

// Has reports whether any command of s (which may be nil) carries {name}.
func (s *Seq) Has(name string) bool {
	if s == nil {
		return false
	}
	for _, t := range s.ts {
		if t.has(name) {
			return true
		}
	}
	return false
}

// Format fills every command: each takes the arguments whose placeholders
// it carries. Every argument must be used by some command and every
// placeholder must have an argument.
func (s *Seq) Format(args ...Arg) ([]string, error) {
	for _, a := range args {
		if !s.Has(a.name) {
			return nil, &TemplateError{Key: s.key, Placeholder: a.name, Value: a.value(), Reason: "no such placeholder in " + fmt.Sprintf("%q", s.Text())}
		}
	}
	out := make([]string, len(s.ts))
	for i, t := range s.ts {
		var mine []Arg
		for _, a := range args {
			if t.has(a.name) {
				mine = append(mine, a)
			}
		}
		cmd, err := t.Format(mine...)
		if err != nil {
			return nil, err
		}
		out[i] = cmd
	}
	return out, nil
}
