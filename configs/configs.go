// Package configs holds rolloff's shipped profiles, bench files and plans,
// embedded in the binary so that the demo and the tests work from any
// directory. The files are documented key by key in their comments.
package configs

import (
	"embed"
	"io/fs"
	"sort"

	"rolloff/driver/profile"
)

//go:embed *.toml
var files embed.FS

// SimBench is the name of the demo simulated bench file.
const SimBench = "sim-bench.toml"

// FS returns the embedded files, named by their base names
// ("sim-bench.toml", "generator-scpi.toml", ...).
func FS() fs.FS { return files }

// ReadFile returns the bytes of one embedded file.
func ReadFile(name string) ([]byte, error) { return files.ReadFile(name) }

// Names lists the embedded files, sorted.
func Names() []string {
	ents, _ := files.ReadDir(".")
	out := make([]string, 0, len(ents))
	for _, e := range ents {
		out = append(out, e.Name())
	}
	sort.Strings(out)
	return out
}

// LoadBench reads and validates an embedded bench file and the embedded
// profiles it names.
func LoadBench(name string) (*profile.BenchFile, error) {
	return profile.LoadBenchFS(files, name)
}
