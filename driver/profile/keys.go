package profile

import (
	"strconv"
	"strings"

	"github.com/pelletier/go-toml/v2/unstable"
)

// keyLines maps a dotted key path ("commands.set_frequency",
// "ranges[2].name") to the 1-based line where it is written.
type keyLines map[string]int

// line returns the line of key, or of its closest written parent, or 0.
func (k keyLines) line(key string) int {
	for key != "" {
		if l, ok := k[key]; ok {
			return l
		}
		i := strings.LastIndexAny(key, ".[")
		if i < 0 {
			break
		}
		key = key[:i]
	}
	return 0
}

// indexKeys parses data and records the line of every key. A document
// that does not parse gives a partial index; the decoder reports the
// syntax error itself.
func indexKeys(data []byte) (lines keyLines) {
	lines = keyLines{}
	defer func() {
		// The index only improves messages; never let it take the
		// decoder down.
		if recover() != nil {
			lines = keyLines{}
		}
	}()
	var p unstable.Parser
	p.Reset(data)
	prefix := ""
	arrays := map[string]int{}
	for p.NextExpression() {
		n := p.Expression()
		switch n.Kind {
		case unstable.Table:
			prefix = joinKey(keyParts(n))
			lines.set(prefix, lineOf(&p, n.Child()))
		case unstable.ArrayTable:
			base := joinKey(keyParts(n))
			i := arrays[base]
			arrays[base] = i + 1
			// Reset the counters of arrays nested under an earlier element.
			for k := range arrays {
				if strings.HasPrefix(k, base+"[") {
					delete(arrays, k)
				}
			}
			prefix = base + "[" + strconv.Itoa(i) + "]"
			lines.set(base, lineOf(&p, n.Child()))
			lines.set(prefix, lineOf(&p, n.Child()))
		case unstable.KeyValue:
			indexKeyValue(&p, lines, prefix, n)
		}
	}
	return lines
}

func indexKeyValue(p *unstable.Parser, lines keyLines, prefix string, n *unstable.Node) {
	key := joinKey(keyParts(n))
	if prefix != "" {
		key = prefix + "." + key
	}
	it := n.Key()
	it.Next()
	l := lineOf(p, it.Node())
	lines.set(key, l)
	indexValue(p, lines, key, n.Value(), l)
}

func indexValue(p *unstable.Parser, lines keyLines, key string, v *unstable.Node, l int) {
	switch v.Kind {
	case unstable.InlineTable:
		it := v.Children()
		for it.Next() {
			c := it.Node()
			if c.Kind == unstable.KeyValue {
				indexKeyValue(p, lines, key, c)
			}
		}
	case unstable.Array:
		it := v.Children()
		i := 0
		for it.Next() {
			c := it.Node()
			if c.Kind == unstable.Comment {
				continue
			}
			ck := key + "[" + strconv.Itoa(i) + "]"
			cl := lineOf(p, c)
			if cl == 0 {
				cl = l
			}
			lines.set(ck, cl)
			indexValue(p, lines, ck, c, cl)
			i++
		}
	}
}

// has reports whether key, or any key under it, is written.
func (k keyLines) has(key string) bool {
	if _, ok := k[key]; ok {
		return true
	}
	for w := range k {
		if strings.HasPrefix(w, key+".") || strings.HasPrefix(w, key+"[") {
			return true
		}
	}
	return false
}

func (k keyLines) set(key string, line int) {
	if line <= 0 {
		return
	}
	if _, ok := k[key]; !ok {
		k[key] = line
	}
}

func keyParts(n *unstable.Node) []string {
	var parts []string
	it := n.Key()
	for it.Next() {
		parts = append(parts, string(it.Node().Data))
	}
	return parts
}

func joinKey(parts []string) string { return strings.Join(parts, ".") }

func lineOf(p *unstable.Parser, n *unstable.Node) int {
	if n == nil || n.Raw.Length == 0 {
		return 0
	}
	return p.Shape(n.Raw).Start.Line
}
