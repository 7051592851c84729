// Package configstest copies the embedded configuration files of package
// configs into an in-memory file system, for tests that load a bench from
// edited profiles or bench files (profile.LoadBenchFS).
package configstest

import (
	"io/fs"
	"strings"
	"testing"
	"testing/fstest"

	"rolloff/configs"
)

// MapFS returns every embedded file of package configs, by its base
// name, in a fresh file system the caller may edit and add to.
func MapFS(tb testing.TB) fstest.MapFS {
	tb.Helper()
	m := fstest.MapFS{}
	for _, n := range configs.Names() {
		data, err := fs.ReadFile(configs.FS(), n)
		if err != nil {
			tb.Fatal(err)
		}
		m[n] = &fstest.MapFile{Data: data}
	}
	return m
}

// Edit applies (old, new) pairs to m's file name in order, each
// replacing the first occurrence of old; an old text the file does not
// hold fails tb, so that an edit cannot silently miss.
func Edit(tb testing.TB, m fstest.MapFS, name string, pairs ...string) {
	tb.Helper()
	f, ok := m[name]
	if !ok {
		tb.Fatalf("%s: no such file", name)
	}
	s := string(f.Data)
	for i := 0; i+1 < len(pairs); i += 2 {
		if !strings.Contains(s, pairs[i]) {
			tb.Fatalf("%s: %q not found", name, pairs[i])
		}
		s = strings.Replace(s, pairs[i], pairs[i+1], 1)
	}
	m[name] = &fstest.MapFile{Data: []byte(s)}
}
