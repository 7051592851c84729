package sched_test

import (
	"io/fs"
	"strings"
	"testing"
	"testing/fstest"

	"rolloff/configs"
	"rolloff/driver/profile"
)

// editedSimBench returns the demo simulated bench at a time scale with
// its sim-bench.toml changed by edit (the profiles it names unchanged).
func editedSimBench(tb testing.TB, scale float64, edit func(string) string) *profile.BenchFile {
	tb.Helper()
	m := fstest.MapFS{}
	err := fs.WalkDir(configs.FS(), ".", func(path string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		data, err := fs.ReadFile(configs.FS(), path)
		if err != nil {
			return err
		}
		if path == configs.SimBench {
			data = []byte(edit(string(data)))
		}
		m[path] = &fstest.MapFile{Data: data}
		return nil
	})
	if err != nil {
		tb.Fatal(err)
	}
	cfg, err := profile.LoadBenchFS(m, configs.SimBench)
	if err != nil {
		tb.Fatal(err)
	}
	cfg.TimeScale = scale
	return cfg
}

// withPostFilter gives the simulated converter a second pole of postS
// seconds (sim.converter.post_filter_s).
func withPostFilter(postS string) func(string) string {
	return func(s string) string {
		return strings.Replace(s, "[sim.converter]\n", "[sim.converter]\npost_filter_s = "+postS+"\n", 1)
	}
}
