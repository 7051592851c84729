package plan_test

import (
	"errors"
	"math"
	"os"
	"reflect"
	"strings"
	"testing"

	toml "github.com/pelletier/go-toml/v2"

	"rolloff/driver"
	"rolloff/sweep/plan"
)

func TestErrorFormat(t *testing.T) {
	doc := "name = \"line driver\"\n\n[frequencies]\nspacing = \"log\"\n# from 5 Hz below zero\n\nstart_hz = -5\nstop_hz = 1000\n[level]\nvrms = 1\n"
	p, err := plan.DecodeTOML("demo.toml", []byte(doc))
	if err != nil {
		t.Fatal(err)
	}
	err = p.Validate(benchLim)
	want := "demo.toml:7: frequencies.start_hz = -5: must be > 0 on a log plan"
	if err == nil || err.Error() != want {
		t.Fatalf("got %v\nwant %s", err, want)
	}
	var fe *plan.FieldError
	if !errors.As(err, &fe) || fe.Line != 7 || fe.Field != "frequencies.start_hz" || fe.Value != "-5" {
		t.Errorf("FieldError %+v", fe)
	}
}

// base is a valid plan; each case below breaks one thing.
const base = `name = "t"
[frequencies]
spacing = "log"
start_hz = 20
stop_hz = 20000
points_per_decade = 10
[level]
vrms = 1
[settle]
tolerance = 0.002
[ranging]
strategy = "fixed"
`

func TestValidationTable(t *testing.T) {
	if p, err := plan.DecodeTOML("t.toml", []byte(base)); err != nil {
		t.Fatal(err)
	} else if err := p.Validate(benchLim); err != nil {
		t.Fatalf("base plan: %v", err)
	}
	cases := []struct {
		name, old, new string
		lim            *driver.GeneratorLimits
		field, msg     string
		line           int
	}{
		{"start above stop", "start_hz = 20\n", "start_hz = 30000\n", nil, "frequencies.stop_hz", "must be > frequencies.start_hz (30000)", 5},
		{"zero start on log", "start_hz = 20\n", "start_hz = 0\n", nil, "frequencies.start_hz", "must be > 0 on a log plan", 4},
		{"negative stop", "stop_hz = 20000\n", "stop_hz = -1\n", nil, "frequencies.stop_hz", "must be > 0 on a log plan", 5},
		{"amplitude above bench", "vrms = 1\n", "vrms = 5\n", nil, "level.vrms", "limit 2 Vrms", 8},
		{"amplitude zero", "vrms = 1\n", "vrms = 0\n", nil, "level.vrms", "must be > 0 Vrms", 8},
		{"no bench limit", "", "", &driver.GeneratorLimits{}, "level.vrms", "gives no amplitude limit", 8},
		{"too many points", "spacing = \"log\"\nstart_hz = 20\nstop_hz = 20000\npoints_per_decade = 10\n",
			"spacing = \"linear\"\nstart_hz = 20\nstop_hz = 20000\nstep_hz = 0.01\n", nil, "frequencies.step_hz", "at most 100000", 6},
		{"too many with refinement", "spacing = \"log\"\nstart_hz = 20\nstop_hz = 20000\npoints_per_decade = 10\n",
			"spacing = \"log\"\nstart_hz = 20\nstop_hz = 20000\npoints = 100000\n[refine]\nenabled = true\n", nil, "frequencies", "refinement included", 2},
		{"drift end", "strategy = \"fixed\"\n", "strategy = \"fixed\"\n[drift]\nend = \"yes\"\n", nil, "drift.end", `"on" or "off"`, 14},
		{"drift every", "strategy = \"fixed\"\n", "strategy = \"fixed\"\n[drift]\nevery_points = -3\n", nil, "drift.every_points", "must be 0 (only at the end) to 100000", 14},
		{"unknown key", "points_per_decade = 10\n", "points_per_decade = 10\nstart_khz = 1\n", nil, "frequencies.start_khz", "allowed in [frequencies]: bands_per_octave", 7},
		{"unknown table", "[settle]\n", "[setle]\n", nil, "setle", "allowed in the top level", 9},
		{"string for number", "start_hz = 20\n", "start_hz = \"10kHz\"\n", nil, "frequencies.start_hz", "want a number, got a TOML string", 4},
		{"float for integer", "points_per_decade = 10\n", "points_per_decade = 10.5\n", nil, "frequencies.points_per_decade", "want an integer", 6},
		{"NaN", "start_hz = 20\n", "start_hz = nan\n", nil, "frequencies.start_hz", "finite", 4},
		{"infinite amplitude", "vrms = 1\n", "vrms = inf\n", nil, "level.vrms", "finite", 8},
		{"bad strategy", "strategy = \"fixed\"\n", "strategy = \"auto\"\n", nil, "ranging.strategy", "fixed, operator, remote, level", 12},
		{"bad spacing", "spacing = \"log\"\n", "spacing = \"octaves\"\n", nil, "frequencies.spacing", "log, linear, bands, list", 3},
		{"bad bands", "spacing = \"log\"\nstart_hz = 20\nstop_hz = 20000\npoints_per_decade = 10\n",
			"spacing = \"bands\"\nstart_hz = 20\nstop_hz = 20000\nbands_per_octave = 5\n", nil, "frequencies.bands_per_octave", "1, 2, 3, 6, 12 or 24", 6},
		{"tolerance too large", "tolerance = 0.002\n", "tolerance = 0.5\n", nil, "settle.tolerance", "(0, 0.1]", 10},
		{"readings", "tolerance = 0.002\n", "tolerance = 0.002\nreadings = 500\n", nil, "settle.readings", "1..100", 11},
		{"timeout", "tolerance = 0.002\n", "tolerance = 0.002\ntimeout_s = -1\n", nil, "settle.timeout_s", "(0, 86400]", 11},
		{"duplicate list", "spacing = \"log\"\nstart_hz = 20\nstop_hz = 20000\npoints_per_decade = 10\n",
			"frequencies_hz = [100, 1000,\n  100]\n", nil, "frequencies.frequencies_hz[2]", "given twice", 4},
		{"negative list", "spacing = \"log\"\nstart_hz = 20\nstop_hz = 20000\npoints_per_decade = 10\n",
			"frequencies_hz = [100,\n -1000]\n", nil, "frequencies.frequencies_hz[1]", "must be > 0", 4},
		{"points per decade", "points_per_decade = 10\n", "points_per_decade = 2000\n", nil, "frequencies.points_per_decade", "1..1000", 6},
		{"both counts", "points_per_decade = 10\n", "points_per_decade = 10\npoints = 50\n", nil, "frequencies.points", "not both", 7},
		{"step on log", "points_per_decade = 10\n", "points_per_decade = 10\nstep_hz = 5\n", nil, "frequencies.step_hz", "not used on a log plan", 7},
		{"above generator", "stop_hz = 20000\n", "stop_hz = 2e6\n", nil, "frequencies.stop_hz", "above the generator's range", 5},
		{"reference outside", "name = \"t\"\n", "name = \"t\"\nreference_hz = 50000\n", nil, "reference_hz", "within the plan's frequencies", 2},
		{"key twice", "vrms = 1\n", "vrms = 1\nvrms = 1.5\n", nil, "level.vrms", "key given twice (first on line 8)", 9},
		{"through run", "name = \"t\"\n", "name = \"t\"\n[normalize]\nthrough_run = \"../etc\"\n", nil, "normalize.through_run", "must not start with '.'", 3},
		{"level above bench", "vrms = 1\n[settle]\ntolerance = 0.002\n[ranging]\nstrategy = \"fixed\"\n",
			"vrms = 1\nmax_vrms = 3\n[settle]\ntolerance = 0.002\n[ranging]\nstrategy = \"level\"\n", nil, "level.max_vrms", "protects the DUT", 9},
		{"level strategy", "strategy = \"fixed\"\n", "strategy = \"level\"\n", nil, "", "", 0}, // valid: defaults fill min/max
		{"level max unused", "vrms = 1\n", "vrms = 1\nmax_vrms = 1.5\n", nil, "level.max_vrms", "not used unless ranging.strategy = \"level\"", 9},
		{"refine level", "name = \"t\"\n", "name = \"t\"\n[refine]\nlevel_db = 3\n", nil, "refine.level_db", "[-60, 0)", 3},
		{"syntax", "vrms = 1\n", "vrms = 1e\n", nil, "", "TOML syntax", 8},
		{"control char in name", "name = \"t\"\n", "name = \"t\\u0007\"\n", nil, "name", "control characters", 1},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			doc := base
			if c.old != "" {
				if !strings.Contains(doc, c.old) {
					t.Fatalf("base has no %q", c.old)
				}
				doc = strings.Replace(doc, c.old, c.new, 1)
			}
			lim := benchLim
			if c.lim != nil {
				lim = *c.lim
			}
			p, err := plan.DecodeTOML("t.toml", []byte(doc))
			if err == nil {
				err = p.Validate(lim)
			}
			if c.msg == "" {
				if err != nil {
					t.Fatalf("valid plan refused: %v", err)
				}
				return
			}
			if err == nil {
				t.Fatalf("accepted:\n%s", doc)
			}
			fes := plan.FieldErrors(err)
			if len(fes) == 0 {
				t.Fatalf("not a FieldError: %T %v", err, err)
			}
			for _, fe := range fes {
				if fe.Field == c.field && strings.Contains(fe.Allowed, c.msg) {
					if fe.Line != c.line {
						t.Errorf("line %d, want %d: %v", fe.Line, c.line, fe)
					}
					if fe.File != "t.toml" {
						t.Errorf("file %q", fe.File)
					}
					return
				}
			}
			t.Errorf("no error for %s containing %q in:\n%v", c.field, c.msg, err)
		})
	}
}

func TestJSONDecode(t *testing.T) {
	good := `{"name": "j", "frequencies": {"spacing": "bands", "start_hz": 20, "stop_hz": 20000},
 "level": {"vrms": 0.5}, "refine": {"enabled": true}, "normalize": {"through_run": null}}`
	p, err := plan.DecodeJSON("req", []byte(good))
	if err != nil {
		t.Fatal(err)
	}
	if err := p.Validate(benchLim); err != nil {
		t.Fatal(err)
	}
	if p.Frequencies.BandsPerOctave != 3 || p.Refine.LevelDB != plan.HalfPowerDB || !p.Refine.Enabled {
		t.Errorf("defaults %+v", p)
	}
	// The same plan in TOML decodes to the same value.
	q, err := plan.DecodeTOML("t", []byte("name = \"j\"\n[frequencies]\nspacing = \"bands\"\nstart_hz = 20\nstop_hz = 20000\n[level]\nvrms = 0.5\n[refine]\nenabled = true\n"))
	if err != nil {
		t.Fatal(err)
	}
	pf, _ := p.Freqs()
	qf, _ := q.Freqs()
	if p.Name != q.Name || len(pf) != len(qf) || p.Level != q.Level || p.Refine != q.Refine || p.Settle != q.Settle {
		t.Errorf("JSON and TOML differ:\n%+v\n%+v", p, q)
	}

	cases := []struct {
		name, doc, field, msg string
		line                  int
	}{
		{"unknown", "{\"frequencies\": {\"start_hz\": 20,\n \"stop_khz\": 2}}", "frequencies.stop_khz", "unknown key; allowed in [frequencies]", 2},
		{"case differs", "{\"Level\": {\"vrms\": 1}}", "Level", "unknown key", 1},
		{"string for number", "{\"level\":\n {\"vrms\": \"1 V\"}}", "level.vrms", "want a number, got a string", 2},
		{"number for table", "{\"level\": 1}", "level", "want an object, got a number", 1},
		{"float for int", "{\"settle\": {\"readings\": 2.5}}", "settle.readings", "want an integer", 1},
		{"huge", "{\"level\": {\"vrms\": 1e999}}", "level.vrms", "out of range", 1},
		{"twice", "{\"name\": \"a\",\n\"name\": \"b\"}", "name", "key given twice (first on line 1)", 2},
		{"trailing", "{\"name\": \"a\"}\n{\"name\": \"b\"}", "", "trailing data", 2},
		{"not an object", "[1, 2]", "", "want an object, got an array", 1},
		{"syntax", "{\"name\": \"a\",\n\n}", "", "JSON syntax", 3},
		{"truncated", "{\"name\": \"a\"", "", "unexpected end", 1},
		{"list entry", "{\"frequencies\": {\"frequencies_hz\": [1,\n true]}}", "frequencies.frequencies_hz[1]", "want a number, got a boolean", 2},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := plan.DecodeJSON("req.json", []byte(c.doc))
			var fe *plan.FieldError
			if !errors.As(err, &fe) {
				t.Fatalf("got %T %v", err, err)
			}
			if fe.Field != c.field || !strings.Contains(fe.Allowed, c.msg) || fe.Line != c.line || fe.File != "req.json" {
				t.Errorf("got %+v, want field %q msg %q line %d", fe, c.field, c.msg, c.line)
			}
		})
	}
}

func TestDefaults(t *testing.T) {
	var p plan.Plan
	p.Level.Vrms = 1
	p.Ranging.Strategy = plan.RangeLevel
	p.Frequencies.StartHz, p.Frequencies.StopHz = 10, 1e5
	p.Defaults()
	q := p
	q.Defaults()
	if !reflect.DeepEqual(p, q) {
		t.Error("Defaults is not idempotent")
	}
	if p.Frequencies.Spacing != plan.SpacingLog || p.Frequencies.PointsPerDecade != 10 || p.ReferenceHz != 1000 ||
		p.Settle.Readings != 2 || p.Settle.Tolerance != 0.002 || !(p.Settle.TimeoutS > 0) ||
		p.Level.MaxVrms != 1 || p.Level.MinVrms != 0.01 || p.Refine.MaxPoints <= 0 || p.Refine.ResolutionRel != 0.002 {
		t.Errorf("defaults: %+v", p)
	}
	// Half power, 10·log10(1/2) dB.
	if math.Abs(plan.HalfPowerDB-10*math.Log10(0.5)) > 1e-15 {
		t.Errorf("HalfPowerDB = %v", plan.HalfPowerDB)
	}
	if err := p.Validate(benchLim); err != nil {
		t.Errorf("a plan built in Go: %v", err)
	}
	var r plan.Plan
	r.Frequencies.ListHz = []float64{100, 1000}
	r.Defaults()
	if r.Frequencies.Spacing != plan.SpacingList || r.Ranging.Strategy != plan.RangeFixed {
		t.Errorf("list defaults: %+v", r.Frequencies)
	}
}

func TestCheckRunID(t *testing.T) {
	for _, id := range []string{"20261201-184512-line-driver", "a", "run_1.b"} {
		if err := plan.CheckRunID(id); err != nil {
			t.Errorf("%q: %v", id, err)
		}
	}
	for _, id := range []string{"", "../x", "a/b", ".hidden", "a..b", "a\x00b", "-x", strings.Repeat("a", 129), "a b", "a\\b"} {
		if plan.CheckRunID(id) == nil {
			t.Errorf("%q accepted", id)
		}
	}
}

func TestLoad(t *testing.T) {
	// The shipped plans must run on the demo bench: read its [limits].
	var bench struct {
		Limits struct {
			MinFreqHz float64 `toml:"min_freq_hz"`
			MaxFreqHz float64 `toml:"max_freq_hz"`
			MinVrms   float64 `toml:"min_vrms"`
			MaxVrms   float64 `toml:"max_vrms"`
		} `toml:"limits"`
	}
	lim := driver.GeneratorLimits{MinFreqHz: 1, MaxFreqHz: 2e6, MinVrms: 1e-4, MaxVrms: 1}
	if b, err := os.ReadFile("../../configs/sim-bench.toml"); err == nil {
		if err := toml.Unmarshal(b, &bench); err == nil && bench.Limits.MaxVrms > 0 {
			l := bench.Limits
			lim = driver.GeneratorLimits{MinFreqHz: l.MinFreqHz, MaxFreqHz: l.MaxFreqHz, MinVrms: l.MinVrms, MaxVrms: l.MaxVrms}
		}
	}
	for _, name := range []string{"../../configs/demo-plan.toml", "../../configs/example-plan.toml"} {
		p, err := plan.Load(name)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if err := p.Validate(lim); err != nil {
			t.Errorf("%s on the demo bench %+v: %v", name, lim, err)
		}
	}
	p, _ := plan.Load("../../configs/demo-plan.toml")
	if fs, _ := p.Freqs(); len(fs) < 20 || fs[0].Hz > 8 || fs[len(fs)-1].Hz < 95e3 {
		t.Errorf("the demo plan does not span the demo DUT's corners: %v", fs)
	}
	if _, err := plan.Load("testdata/none.toml"); err == nil {
		t.Error("missing file loaded")
	}
}
