package profile

import (
	"errors"
	"os"
	"strings"
	"testing"
)

// TestACFilters: ac.filters give the meter's settling per band (the
// band a frequency falls in; below the first, the first's), and bands
// out of order are refused naming the key.
func TestACFilters(t *testing.T) {
	data, err := os.ReadFile("../../configs/dmm-scpi.toml")
	if err != nil {
		t.Fatal(err)
	}
	base := string(data)
	if i := strings.Index(base, "\n[[ac.filters]]"); i >= 0 {
		base = base[:i] // the shipped bands, replaced below
	}
	good := base + "\n[[ac.filters]]\nfrom_hz = 3\ntime_constant_s = 0.5\n[[ac.filters]]\nfrom_hz = 20\ntime_constant_s = 0.05\n"
	d, err := DecodeDMM("dmm.toml", []byte(good))
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct{ hz, want float64 }{{1, 0.5}, {3, 0.5}, {19.9, 0.5}, {20, 0.05}, {1e5, 0.05}} {
		if got := d.AC.SettleTauS(c.hz); got != c.want {
			t.Errorf("SettleTauS(%g) = %g, want %g", c.hz, got, c.want)
		}
	}
	bad := strings.Replace(good, "from_hz = 20", "from_hz = 2", 1)
	_, err = DecodeDMM("dmm.toml", []byte(bad))
	var fe *FieldError
	if !errors.As(err, &fe) || fe.Field != "ac.filters" {
		t.Errorf("bands out of order: %v", err)
	}
}
