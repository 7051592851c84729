package profile_test

import (
	"strings"
	"testing"

	"rolloff/driver/profile"
)

// TestCommandLists: any command key may hold a list, each command still
// one SCPI command, and a reading's last command is its query.
func TestCommandLists(t *testing.T) {
	text := edit(t, "dmm-scpi.toml", `read = "READ?"`, `read = ["INITiate", "FETCh?"]`)
	d, err := profile.DecodeDMM("dmm-scpi.toml", []byte(text))
	if err != nil {
		t.Fatal(err)
	}
	if n := d.T.DCRead.Len(); n != 2 || d.T.DCRead.Text() != "INITiate then FETCh?" {
		t.Fatalf("dc.read = %d commands %q", n, d.T.DCRead.Text())
	}
	for _, c := range []struct{ name, from, to, key, msg string }{
		{"query first", `read = "READ?"`, `read = ["FETCh?", "INITiate"]`, "dc.read[0]", "an answer left unread"},
		{"no query", `read = "READ?"`, `read = ["INITiate", "INITiate"]`, "dc.read[1]", "never asked for"},
		{"second command in an element", `read = "READ?"`, `read = ["INITiate;FETCh?"]`, "dc.read", "';'"},
		{"terminator in an element", `configure = "CONFigure:VOLTage:DC"`, `configure = ["CONFigure:VOLTage:DC", "*CLS\n"]`, "dc.configure[1]", "line break"},
		{"number in a list", `configure = "CONFigure:VOLTage:DC"`, `configure = ["CONFigure:VOLTage:DC", 5]`, "dc.configure", ""},
		{"range in no command", `set_range = "SENSe:VOLTage:DC:RANGe {range_v}"`, `set_range = ["SENSe:VOLTage:DC:RANGe:AUTO OFF", "SENSe:VOLTage:DC:RANGe 10"]`, "dc.set_range", "{range_v} missing"},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := profile.DecodeDMM("dmm-scpi.toml", []byte(edit(t, "dmm-scpi.toml", c.from, c.to)))
			if err == nil || !strings.Contains(err.Error(), c.key) || !strings.Contains(err.Error(), c.msg) {
				t.Fatalf("err = %v, want one naming %s (%s)", err, c.key, c.msg)
			}
		})
	}
	// A meter given its range with each reading needs no set_range.
	m := edit(t, "dmm-scpi.toml", `read = "READ?"`, `read = "MEASure:VOLTage:DC? {range_v}"`,
		`set_range = "SENSe:VOLTage:DC:RANGe {range_v}"`, `set_range = ""`)
	if _, err := profile.DecodeDMM("dmm-scpi.toml", []byte(m)); err == nil || !strings.Contains(err.Error(), "dc.set_auto_range") {
		t.Fatalf("MEASure with {range_v} and an autorange command: %v, want dc.set_auto_range refused", err)
	}
	m = strings.Replace(m, `set_auto_range = "SENSe:VOLTage:DC:RANGe:AUTO ON"`, `set_auto_range = ""`, 1)
	if _, err := profile.DecodeDMM("dmm-scpi.toml", []byte(m)); err != nil {
		t.Fatalf("MEASure with {range_v}: %v", err)
	}
}

// TestApplyStyleCarriesEveryParameter: an instrument fills an omitted
// APPLy parameter with its default, so the profile must carry all three.
func TestApplyStyleCarriesEveryParameter(t *testing.T) {
	for _, c := range []struct{ to, missing string }{
		{`set_frequency = "APPLy:SINusoid {freq_hz}"`, "{amplitude}"},
		{`set_frequency = "APPLy:SINusoid {freq_hz},{amplitude}"`, "{offset_v}"},
		{`set_frequency = "SOURce:FREQuency {freq_hz},{offset_v}"`, "{amplitude}"},
		{`set_frequency = ["SOURce:FUNCtion SINusoid", "APPLy:SINusoid {freq_hz},{amplitude}"]`, "{offset_v}"},
	} {
		_, err := profile.DecodeGenerator("generator-scpi.toml", []byte(edit(t, "generator-scpi.toml", `set_frequency = "SOURce:FREQuency {freq_hz}"`, c.to)))
		if err == nil || !strings.Contains(err.Error(), "commands.set_frequency") || !strings.Contains(err.Error(), "apply-style command without "+c.missing) {
			t.Errorf("%s: err = %v, want commands.set_frequency refused for %s", c.to, err, c.missing)
		}
	}
	// Every generator placeholder in any generator command, literals still refused.
	ok := edit(t, "generator-scpi.toml", `set_frequency = "SOURce:FREQuency {freq_hz}"`, `set_frequency = "APPLy:SINusoid {freq_hz},{amplitude},{offset_v}"`,
		`set_amplitude = "SOURce:VOLTage {amplitude}"`, `set_amplitude = "APPLy:SINusoid {freq_hz},{amplitude},{offset_v}"`,
		`set_offset = ""`, `set_offset = "APPLy:SINusoid {freq_hz},{amplitude},{offset_v}"`)
	if _, err := profile.DecodeGenerator("generator-scpi.toml", []byte(ok)); err != nil {
		t.Fatalf("apply-style everywhere: %v", err)
	}
	lit := edit(t, "generator-scpi.toml", `set_frequency = "SOURce:FREQuency {freq_hz}"`, `set_frequency = ["SOURce:FREQuency {freq_hz}", "SOURce:VOLTage 1.5"]`)
	if _, err := profile.DecodeGenerator("generator-scpi.toml", []byte(lit)); err == nil || !strings.Contains(err.Error(), "commands.set_frequency[1]") || !strings.Contains(err.Error(), "numeric literal") {
		t.Errorf("literal in a list: err = %v", err)
	}
}

func TestDialectKeys(t *testing.T) {
	for _, c := range []struct{ name, add, key string }{
		{"check_errors without an error query", "[dialect]\nerror_query = \"\"\n", "dialect.error_query"},
		{"opc wait without opc query", "[dialect]\nopc_query = \"\"\nwait_after_settings = \"opc\"\n", "dialect.wait_after_settings"},
		{"delay wait without a delay", "[dialect]\nwait_after_settings = \"delay\"\n", "dialect.delay_after_settings_s"},
		{"opc query not a query", "[dialect]\nopc_query = \"*OPC\"\n", "dialect.opc_query"},
		{"too many digits", "[dialect]\ndigits = 40\n", "dialect.digits"},
		{"bad overload word", "[response]\noverload_words = [\"9.9E37\"]\n", "response.overload_words[0]"},
	} {
		t.Run(c.name, func(t *testing.T) {
			text := edit(t, "dmm-scpi.toml") + "\n" + c.add
			_, err := profile.DecodeDMM("dmm-scpi.toml", []byte(text))
			if err == nil || !strings.Contains(err.Error(), c.key) {
				t.Fatalf("err = %v, want one naming %s", err, c.key)
			}
		})
	}
	text := edit(t, "dmm-scpi.toml", "check_errors = true", "check_errors = false") + "\n[dialect]\nclear = \"\"\nerror_query = \"\"\nopc_query = \"\"\ndigits = 4\nnumber_form = \"nr3\"\n"
	d, err := profile.DecodeDMM("dmm-scpi.toml", []byte(text))
	if err != nil {
		t.Fatal(err)
	}
	o := profile.SessionOpts(d.Framing, d.Dialect, d.Response)
	if !o.NoErrorQuery || !o.NoOPCQuery || d.Dialect.ClearCommand() != "" {
		t.Errorf("absent common commands: %+v, clear %q", o, d.Dialect.ClearCommand())
	}
	if s, _ := d.Dialect.NumberFormat().Text(0.07924465962305567); s != "7.924E-02" {
		t.Errorf("4 digits NR3: %q", s)
	}
}
