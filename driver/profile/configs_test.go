package profile_test

import (
	"strings"
	"testing"

	"rolloff/configs"
	"rolloff/driver/profile"
)

// TestEmbeddedProfilesValidate decodes every embedded instrument profile
// and bench file: the shipped files must load as they are.
func TestEmbeddedProfilesValidate(t *testing.T) {
	n := 0
	for _, name := range configs.Names() {
		if strings.Contains(name, "plan") {
			continue // plans belong to the plan package
		}
		data, err := configs.ReadFile(name)
		if err != nil {
			t.Fatal(err)
		}
		if strings.HasPrefix(name, "bench") || strings.HasPrefix(name, "sim-bench") {
			b, err := configs.LoadBench(name)
			if err != nil {
				t.Errorf("%s: %v", name, err)
				continue
			}
			if b.Generator == nil || b.Generator.Generator == nil {
				t.Errorf("%s: generator profile not resolved", name)
			}
			n++
			continue
		}
		if _, err := profile.Decode(name, data); err != nil {
			t.Errorf("%s: %v", name, err)
		}
		n++
	}
	if n < 5 {
		t.Errorf("only %d embedded files checked, want at least 5", n)
	}
}
