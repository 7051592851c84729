package scpiserver

import (
	"fmt"
	"strconv"
	"strings"
)

// node is one header node of a pattern.
type node struct {
	long, short string // upper case
	optional    bool
	maxSuffix   int // 0: no numeric suffix accepted; n: suffix 1..n, default 1
}

// pattern is a compiled header pattern.
type pattern struct {
	text   string
	common string // "*IDN" for common commands
	nodes  []node
	query  bool
}

// compilePattern compiles the SCPI table notation described in the package
// documentation.
func compilePattern(text string) (pattern, error) {
	p := pattern{text: text}
	body := strings.TrimSpace(text)
	if strings.HasSuffix(body, "?") {
		p.query = true
		body = body[:len(body)-1]
	}
	if body == "" {
		return p, fmt.Errorf("scpiserver: empty pattern %q", text)
	}
	if body[0] == '*' {
		name := strings.ToUpper(body)
		for i := 1; i < len(name); i++ {
			if !isAlpha(name[i]) {
				return p, fmt.Errorf("scpiserver: bad common command pattern %q", text)
			}
		}
		if len(name) < 2 {
			return p, fmt.Errorf("scpiserver: bad common command pattern %q", text)
		}
		p.common = name
		return p, nil
	}
	i := 0
	for i < len(body) {
		switch {
		case body[i] == ':':
			i++
		case body[i] == '[' && i+1 < len(body) && !isDigit(body[i+1]):
			depth := 0
			j := i
			for ; j < len(body); j++ {
				if body[j] == '[' {
					depth++
				} else if body[j] == ']' {
					depth--
					if depth == 0 {
						break
					}
				}
			}
			if j == len(body) {
				return p, fmt.Errorf("scpiserver: unbalanced '[' in pattern %q", text)
			}
			inner := strings.Trim(body[i+1:j], ":")
			n, rest, err := compileNode(inner)
			if err != nil || rest != "" {
				return p, fmt.Errorf("scpiserver: bad optional node %q in pattern %q", inner, text)
			}
			n.optional = true
			p.nodes = append(p.nodes, n)
			i = j + 1
		case isAlpha(body[i]):
			n, rest, err := compileNode(body[i:])
			if err != nil {
				return p, fmt.Errorf("scpiserver: pattern %q: %w", text, err)
			}
			p.nodes = append(p.nodes, n)
			i = len(body) - len(rest)
		default:
			return p, fmt.Errorf("scpiserver: unexpected %q in pattern %q", body[i], text)
		}
	}
	if len(p.nodes) == 0 {
		return p, fmt.Errorf("scpiserver: pattern %q has no nodes", text)
	}
	return p, nil
}

// compileNode reads one mnemonic with an optional "[n]" suffix spec and
// returns the text after it.
func compileNode(s string) (node, string, error) {
	j := 0
	for j < len(s) && isAlpha(s[j]) {
		j++
	}
	if j == 0 {
		return node{}, s, fmt.Errorf("mnemonic expected at %q", s)
	}
	word := s[:j]
	var short strings.Builder
	for k := 0; k < len(word); k++ {
		if word[k] >= 'A' && word[k] <= 'Z' {
			short.WriteByte(word[k])
		}
	}
	if short.Len() == 0 {
		return node{}, s, fmt.Errorf("mnemonic %q has no short form", word)
	}
	n := node{long: strings.ToUpper(word), short: short.String()}
	rest := s[j:]
	if len(rest) > 1 && rest[0] == '[' && isDigit(rest[1]) {
		end := strings.IndexByte(rest, ']')
		if end < 0 {
			return node{}, s, fmt.Errorf("unbalanced suffix spec in %q", s)
		}
		v, err := strconv.Atoi(rest[1:end])
		if err != nil || v < 1 {
			return node{}, s, fmt.Errorf("bad suffix spec in %q", s)
		}
		n.maxSuffix = v
		rest = rest[end+1:]
	}
	return n, rest, nil
}

// nameMatches reports whether a received mnemonic is the node's short or
// long form (SCPI-1999 §6.2.1: nothing in between is accepted).
func (n node) nameMatches(name string) bool {
	return name == n.short || name == n.long
}

// matchResult describes a failed or successful match.
type matchResult struct {
	ok        bool
	badSuffix bool  // a name matched but its suffix was not accepted
	suffixes  []int // per pattern node, 1 for an omitted suffix, 0 when none allowed
}

// match matches received nodes against the pattern.
func (p *pattern) match(h []mnem) matchResult {
	var res matchResult
	sufs := make([]int, len(p.nodes))
	var rec func(i, j int) bool
	rec = func(i, j int) bool {
		if j == len(p.nodes) {
			return i == len(h)
		}
		n := p.nodes[j]
		if i < len(h) && n.nameMatches(h[i].name) {
			s := h[i].suffix
			okSuf := true
			if s >= 0 {
				okSuf = n.maxSuffix > 0 && s >= 1 && s <= n.maxSuffix
			}
			if okSuf {
				if s < 0 && n.maxSuffix > 0 {
					s = 1
				} else if s < 0 {
					s = 0
				}
				sufs[j] = s
				if rec(i+1, j+1) {
					return true
				}
			} else {
				res.badSuffix = true
			}
		}
		if n.optional {
			sufs[j] = 0
			if n.maxSuffix > 0 {
				sufs[j] = 1
			}
			return rec(i, j+1)
		}
		return false
	}
	if rec(0, 0) {
		res.ok = true
		res.badSuffix = false
		res.suffixes = sufs
	}
	return res
}
