package plan_test

import (
	"errors"
	"strings"
	"testing"

	"rolloff/sweep/plan"
)

// TestPredictSwitch decodes settle.predict from TOML and JSON (the web
// API's form): absent is off, true and false as written, anything else
// an error naming the field.
func TestPredictSwitch(t *testing.T) {
	base := `{"name": "p", "frequencies": {"spacing": "log", "start_hz": 10, "stop_hz": 1000, "points_per_decade": 3}, "level": {"vrms": 0.1}, "settle": {"tolerance": 0.002%s}}`
	for _, c := range []struct {
		extra string
		want  bool
	}{{"", false}, {`, "predict": true`, true}, {`, "predict": false`, false}, {`, "predict": null`, false}} {
		p, err := plan.DecodeJSON("p.json", []byte(strings.Replace(base, "%s", c.extra, 1)))
		if err != nil {
			t.Fatalf("%q: %v", c.extra, err)
		}
		if p.Settle.Predicting() != c.want {
			t.Errorf("JSON %q: predicting %v, want %v", c.extra, p.Settle.Predicting(), c.want)
		}
	}
	_, err := plan.DecodeJSON("p.json", []byte(strings.Replace(base, "%s", `, "predict": "yes"`, 1)))
	var fe *plan.FieldError
	if !errors.As(err, &fe) || fe.Field != "settle.predict" {
		t.Errorf(`"predict": "yes": %v, want a FieldError on settle.predict`, err)
	}
	for _, c := range []struct {
		line string
		want bool
	}{{"", false}, {"predict = true\n", true}, {"predict = false\n", false}} {
		src := "name = \"p\"\n[frequencies]\nspacing = \"log\"\nstart_hz = 10\nstop_hz = 1000\npoints_per_decade = 3\n[level]\nvrms = 0.1\n[settle]\ntolerance = 0.002\n" + c.line
		p, err := plan.DecodeTOML("p.toml", []byte(src))
		if err != nil {
			t.Fatalf("%q: %v", c.line, err)
		}
		if p.Settle.Predicting() != c.want {
			t.Errorf("TOML %q: predicting %v, want %v", c.line, p.Settle.Predicting(), c.want)
		}
	}
}
