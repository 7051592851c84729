package web

import (
	"strings"
	"testing"
	"unicode"
)

// TestPlanJSONUpload: a JSON plan file sent as its text is decoded by the
// strict decoder, which names the file and line of a key given twice
// (JSON.parse in a browser would keep the last silently).
func TestPlanJSONUpload(t *testing.T) {
	d := startDemo(t, demoOpts{})
	text := "{\n \"frequencies\": {\"start_hz\": 1000, \"stop_hz\": 10000, \"points_per_decade\": 3},\n \"level\": {\"vrms\": 0.5}\n}\n"
	res, data := d.do("POST", "/api/plan/estimate", map[string]string{"plan_json": text, "file_name": "up.json"})
	want(t, "estimate of a JSON upload", res, data, 200, "")
	if e := decode[Estimate](t, data); e.Points != 4 {
		t.Fatalf("JSON upload estimate %+v", e)
	}
	twice := strings.Replace(text, "\n}\n", ",\n \"level\": {\"vrms\": 0.9}\n}\n", 1)
	res, data = d.do("POST", "/api/plan/estimate", map[string]string{"plan_json": twice, "file_name": "up.json"})
	if res.StatusCode != 400 || !strings.Contains(string(data), "up.json:4: level") || !strings.Contains(string(data), "given twice") {
		t.Fatalf("JSON upload with a key twice: %d %s", res.StatusCode, data)
	}
	res, data = d.do("POST", "/api/plan/estimate", map[string]string{"plan_json": text, "plan_toml": "", "file_name": "up.json"})
	want(t, "both texts", res, data, 400, "plan_json")
}

// TestPlanFileName: the name a plan file was chosen under is kept short
// and printable, with the extension of the format it was decoded as.
func TestPlanFileName(t *testing.T) {
	for _, c := range []struct{ in, ext, want string }{
		{"plan.toml", ".toml", "plan.toml"},
		{"C:\\plans\\my plan.json", ".json", "my plan.json"},
		{"x.json", ".toml", "x.json.toml"},
		{"evil\x1b[2J\r\n.toml", ".toml", "evil__2J__.toml"},
		{"", ".toml", "uploaded-plan.toml"},
		{"..", ".json", "uploaded-plan.json"},
		{"\xff\xfe.toml", ".toml", "_.toml"},
		{"плана.toml", ".toml", "_____.toml"},
	} {
		if got := planFileName(c.in, c.ext); got != c.want {
			t.Errorf("planFileName(%q, %q) = %q, want %q", c.in, c.ext, got, c.want)
		}
	}
	long := planFileName(strings.Repeat("a", 5000)+".toml", ".toml")
	if len(long) > MaxPlanNameBytes || !strings.HasSuffix(long, ".toml") {
		t.Errorf("long name kept as %d bytes: %q", len(long), long)
	}
	for _, r := range planFileName("a\x00b\tc\u202ed.toml", ".toml") {
		if !unicode.IsPrint(r) || r > 127 {
			t.Errorf("kept %q", r)
		}
	}
}
