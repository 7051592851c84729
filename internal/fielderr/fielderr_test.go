package fielderr

import (
	"errors"
	"fmt"
	"testing"
)

type reasoned struct{ reason string }

func (r *reasoned) Error() string   { return "scpi: profile key \"k\": " + r.reason }
func (r *reasoned) Summary() string { return r.reason }

// TestError pins the message forms the decoders have always printed: the
// profile form (what is wrong, the cause, "(allowed: …)") and the plan
// form (Allowed alone says what is wrong and what is allowed).
func TestError(t *testing.T) {
	cause := errors.New("open g.toml: no such file or directory")
	for _, c := range []struct {
		e    *Error
		want string
	}{
		{&Error{File: "g.toml", Line: 3, Field: "commands.set_frequency", Value: `"FREQ"`, Msg: "missing placeholder", Allowed: "{freq_hz}"},
			`g.toml:3: commands.set_frequency = "FREQ": missing placeholder (allowed: {freq_hz})`},
		{&Error{File: "b.toml", Msg: "cannot read bench file", Err: cause}, "b.toml: cannot read bench file: " + cause.Error()},
		{&Error{File: "b.toml", Field: "generator.profile", Err: cause, Allowed: "a profile"}, "b.toml: generator.profile: " + cause.Error() + " (allowed: a profile)"},
		{&Error{File: "g.toml", Line: 9, Field: "commands.x", Msg: "bad command template: has ;", Err: &reasoned{"has ;"}},
			"g.toml:9: commands.x: bad command template: has ;"},
		{&Error{File: "p.toml", Line: 4, Field: "frequencies.start_hz", Value: "-1", Allowed: "must be > 0"}, "p.toml:4: frequencies.start_hz = -1: must be > 0"},
		{&Error{Line: 2, Field: "level.vrms", Allowed: "must be > 0"}, "line 2: level.vrms: must be > 0"},
		{&Error{Field: "id", Value: `"..x"`, Allowed: "no \"..\""}, `id = "..x": no ".."`},
		{&Error{File: "g.toml", Field: "kind"}, "g.toml: kind: invalid value"},
	} {
		if got := c.e.Error(); got != c.want {
			t.Errorf("got  %s\nwant %s", got, c.want)
		}
	}
	wrapped := fmt.Errorf("load: %w", errors.Join(&Error{Field: "a"}, cause, &Error{Field: "b"}))
	if all := All(wrapped); len(all) != 2 || all[0].Field != "a" || all[1].Field != "b" {
		t.Errorf("All found %v", all)
	}
	if !errors.Is(&Error{Err: cause}, cause) {
		t.Error("the cause is not unwrapped")
	}
	for v, want := range map[any]string{nil: "", "x": `"x"`, 0.5: "0.5", 12: "12"} {
		if got := FormatValue(v); got != want {
			t.Errorf("FormatValue(%v) = %q, want %q", v, got, want)
		}
	}
	if got := FormatValue([]float64{1, 0.1}); got != "[1, 0.1]" {
		t.Errorf("FormatValue(list) = %q", got)
	}
}
