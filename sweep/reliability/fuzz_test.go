package reliability

import (
	"os"
	"path/filepath"
	"regexp"
	"testing"
)

// fuzzTargets are the fuzz targets that guard rolloff's decoders of
// untrusted input, by package directory (relative to the module root).
var fuzzTargets = map[string][]string{
	"driver/scpi":    {"FuzzParseNumber"},                      // instrument responses
	"sweep/plan":     {"FuzzDecodeTOML", "FuzzDecodeJSON"},     // plan files and request bodies
	"driver/profile": {"FuzzDecodeProfile", "FuzzDecodeBench"}, // profiles and bench files
	"sweep/export":   {"FuzzReadCSV"},                          // imported CSV responses
	"web/hub":        {"FuzzDecodeClientMessage"},              // live messages from browsers
	"sweep/store":    {"FuzzRecover"},                          // the run store's recovery scanner
}

// fuzzDecl is how .ci/fuzz finds a fuzz target in a test file.
var fuzzDecl = regexp.MustCompile(`(?m)^func (Fuzz[A-Za-z0-9_]+)\(f \*testing\.F\)`)

// TestFuzzTargetsExist checks that every decoder of untrusted input has
// its fuzz target, declared so that .ci/fuzz (and `make fuzz`) runs it.
func TestFuzzTargetsExist(t *testing.T) {
	root := filepath.Join("..", "..")
	if _, err := os.Stat(filepath.Join(root, "go.mod")); err != nil {
		t.Skipf("module root not found from %s: %v", root, err)
	}
	for dir, names := range fuzzTargets {
		files, _ := filepath.Glob(filepath.Join(root, dir, "*_test.go"))
		found := map[string]bool{}
		for _, f := range files {
			data, err := os.ReadFile(f)
			if err != nil {
				t.Fatal(err)
			}
			for _, m := range fuzzDecl.FindAllSubmatch(data, -1) {
				found[string(m[1])] = true
			}
		}
		for _, n := range names {
			if !found[n] {
				t.Errorf("%s: no fuzz target %s that .ci/fuzz would run", dir, n)
			}
		}
	}
}
