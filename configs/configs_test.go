package configs

import (
	"strings"
	"testing"
)

// TestEmbedded: the shipped files are embedded under their base names and
// the demo bench loads from them.
func TestEmbedded(t *testing.T) {
	names := strings.Join(Names(), " ")
	for _, want := range []string{"generator-scpi.toml", "dmm-scpi.toml", "converter-10db.toml", "converter-10db-relay.toml", "switch-scpi.toml", SimBench, "bench-example.toml"} {
		if !strings.Contains(names, want) {
			t.Errorf("%s not embedded (have %s)", want, names)
		}
	}
	b, err := LoadBench(SimBench)
	if err != nil {
		t.Fatal(err)
	}
	if b.Sim == nil || b.Converter == nil || b.Converter.Spec == nil || len(b.Converter.Spec.Ranges) != 12 {
		t.Errorf("demo bench: sim %v, converter %+v", b.Sim != nil, b.Converter)
	}
	if _, err := LoadBench("no-such.toml"); err == nil {
		t.Error("a missing embedded file loaded")
	}
}
