package profile_test

import (
	"io/fs"
	"strings"
	"testing"

	"rolloff/configs"
	"rolloff/configs/configstest"
	"rolloff/driver/profile"
	"rolloff/driver/sim"
)

// FuzzDecodeBench feeds arbitrary bench files (against the embedded
// profiles) to the decoder: it must return a bench or an error, never
// panic, and every error must name the file.
func FuzzDecodeBench(f *testing.F) {
	for _, n := range configs.Names() {
		if strings.Contains(n, "bench") {
			data, err := configs.ReadFile(n)
			if err != nil {
				f.Fatal(err)
			}
			f.Add(data)
		}
	}
	m := configstest.MapFS(f)
	read := func(name string) ([]byte, error) { return fs.ReadFile(m, name) }
	f.Fuzz(func(t *testing.T, data []byte) {
		b, err := profile.DecodeBench("fuzz.toml", data, read, func(rel string) string { return rel })
		if err != nil {
			if b != nil {
				t.Fatal("bench and error both returned")
			}
			if !strings.Contains(err.Error(), ".toml") {
				t.Fatalf("error does not name a file: %v", err)
			}
			return
		}
		if b.Generator == nil || b.Generator.Generator == nil || !(b.Limits.MaxVrms > 0) {
			t.Fatalf("accepted a bench without a resolved generator or amplitude limit")
		}
		if b.Sim == nil {
			return
		}
		// The simulator's reconciliation of a [sim] table.
		c, err := sim.FromBenchFile(b)
		if err != nil {
			if c != nil {
				t.Fatal("sim config and error both returned")
			}
			if !strings.Contains(err.Error(), "fuzz.toml") {
				t.Fatalf("error does not name the bench file: %v", err)
			}
		}
	})
}

// FuzzDecodeProfile feeds arbitrary instrument profiles to Decode.
func FuzzDecodeProfile(f *testing.F) {
	for _, n := range configs.Names() {
		if !strings.Contains(n, "bench") && !strings.Contains(n, "plan") {
			data, err := configs.ReadFile(n)
			if err != nil {
				f.Fatal(err)
			}
			f.Add(data)
		}
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		v, err := profile.Decode("fuzz.toml", data)
		if (v == nil) == (err == nil) {
			t.Fatalf("Decode = %v, %v: want exactly one of a profile and an error", v, err)
		}
		if g, ok := v.(*profile.Generator); ok {
			// Every template an accepted profile holds is compiled.
			if g.T.SetFrequency == nil || g.T.SetAmplitude == nil || g.T.OutputOff == nil {
				t.Fatal("accepted generator profile without compiled templates")
			}
			if !(g.MaxVrms() > 0) {
				t.Fatalf("accepted generator profile with MaxVrms %g", g.MaxVrms())
			}
		}
	})
}
