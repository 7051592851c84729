package reliability

import (
	"encoding/json"
	"errors"
	"net/http"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/gorilla/websocket"

	"rolloff/configs"
	"rolloff/driver"
	"rolloff/driver/profile"
	"rolloff/driver/scpi"
	"rolloff/driver/sim"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/store"
	"rolloff/web/hub"
)

// benchLimits are the generator limits of the bench writeTCPBench writes:
// its [limits] table (1 Hz to 2 MHz, at most 1 Vrms) within the generator
// profile's (1 mHz to 20 MHz, 7.07 Vrms).
var benchLimits = driver.GeneratorLimits{MinFreqHz: 1, MaxFreqHz: 2e6, MinVrms: 1e-4, MaxVrms: 1}

// apiReq is a request to the daemon and the answer it must give.
type apiReq struct {
	method, path string
	body         []byte
	hdr          []string
	status       int
}

// badCase is one bad input and the field its error must name.
type badCase struct {
	name  string
	field string // the exact field (plan), key (profile, bench) or API "field"
	value string // when set, the error must quote the bad value

	planTOML, planJSON string // a plan document: decoded, and submitted to the daemon
	kind, doc          string // a profile ("generator", "switch", "converter") or "bench" file
	api                *apiReq
	ws                 string                                     // a live message sent by a client
	check              func(t *testing.T) (field string, ok bool) // another check
}

// replaceOnce replaces old by new in s, which must hold old.
func replaceOnce(t *testing.T, s, old, new string) string {
	t.Helper()
	if !strings.Contains(s, old) {
		t.Fatalf("%q not found", old)
	}
	return strings.Replace(s, old, new, 1)
}

func shipped(t *testing.T, name string) string {
	t.Helper()
	data, err := configs.ReadFile(name)
	if err != nil {
		t.Fatal(err)
	}
	return string(data)
}

// planWith returns planTOML with one line replaced.
func planWith(t *testing.T, old, new string) string { return replaceOnce(t, planTOML, old, new) }

func badCases(t *testing.T) []badCase {
	gen := shipped(t, "generator-scpi.toml")
	sw := shipped(t, "switch-scpi.toml")
	conv := shipped(t, "converter-10db-relay.toml")
	const jsonPlan = `{"name":"json plan","frequencies":{"spacing":"log","start_hz":100,"stop_hz":100000,"points_per_decade":3},"level":{"vrms":0.05},"ranging":{"strategy":"remote","start":"1 V"}}`
	big := make([]byte, 2<<20)
	for i := range big {
		big[i] = ' '
	}
	copy(big, jsonPlan)
	manyIDs := strings.Repeat("a1,", 8) + "a9"
	return []badCase{
		// Plans.
		{name: "start above stop", field: "frequencies.stop_hz", planTOML: planWith(t, "stop_hz = 100000", "stop_hz = 50")},
		{name: "zero start on a log plan", field: "frequencies.start_hz", planTOML: planWith(t, "start_hz = 100", "start_hz = 0")},
		{name: "negative start on a log plan", field: "frequencies.start_hz", planTOML: planWith(t, "start_hz = 100", "start_hz = -10")},
		{name: "amplitude above the bench limit", field: "level.vrms", value: "5", planTOML: planWith(t, "vrms = 0.05", "vrms = 5")},
		{name: "too many points", field: "frequencies.points", planTOML: planWith(t, "points_per_decade = 3", "points = 200000")},
		{name: "too many points from a step", field: "frequencies.step_hz", value: "0.001", planTOML: planWith(t, "spacing = \"log\"\nstart_hz = 100\nstop_hz = 100000\npoints_per_decade = 3", "spacing = \"linear\"\nstart_hz = 100\nstop_hz = 100000\nstep_hz = 0.001")},
		{name: "unknown key", field: "frequencies.stepsize", planTOML: planWith(t, "points_per_decade = 3", "points_per_decade = 3\nstepsize = 2")},
		{name: "a unit in a number (TOML)", field: "frequencies.start_hz", value: "10kHz", planTOML: planWith(t, "start_hz = 100", `start_hz = "10kHz"`)},
		{name: "a unit in a number (JSON)", field: "frequencies.start_hz", value: "10kHz", planJSON: strings.Replace(jsonPlan, `"start_hz":100`, `"start_hz":"10kHz"`, 1)},
		{name: "unknown key (JSON)", field: "level.volts", planJSON: strings.Replace(jsonPlan, `{"vrms":0.05}`, `{"vrms":0.05,"volts":1}`, 1)},
		{name: "not a number", field: "frequencies.start_hz", planTOML: planWith(t, "start_hz = 100", "start_hz = nan")},
		{name: "unknown spacing", field: "frequencies.spacing", planTOML: planWith(t, `spacing = "log"`, `spacing = "logarithmic"`)},
		{name: "tolerance too loose", field: "settle.tolerance", planTOML: planWith(t, "tolerance = 0.002", "tolerance = 0.5")},
		{name: "too many readings", field: "settle.readings", planTOML: planWith(t, "readings = 2", "readings = 500")},
		{name: "frequency listed twice", field: "frequencies.frequencies_hz[2]", planTOML: planWith(t, "spacing = \"log\"\nstart_hz = 100\nstop_hz = 100000\npoints_per_decade = 3", "spacing = \"list\"\nfrequencies_hz = [100, 1000, 100]")},
		{name: "reference outside the plan", field: "reference_hz", planTOML: planWith(t, "reference_hz = 1000", "reference_hz = 5")},
		{name: "above the generator's range", field: "frequencies.stop_hz", planTOML: planWith(t, "stop_hz = 100000", "stop_hz = 5e6")},
		{name: "unknown range strategy", field: "ranging.strategy", planTOML: planWith(t, `strategy = "remote"`, `strategy = "auto"`)},
		{name: "a second command in a range name", field: "ranging.start", planTOML: planWith(t, `start = "1 V"`, `start = "1 V;*RST"`)},
		{name: "a run id with ../", field: "normalize.through_run", planTOML: planTOML + "[normalize]\nthrough_run = \"../../etc/passwd\"\n"},
		{name: "control characters in the name", field: "name", planTOML: planWith(t, `name = "reliability"`, `name = "bell\u0007"`)},

		// Profiles and bench files.
		{name: "a second SCPI command in a template", field: "commands.set_frequency", kind: "generator",
			doc: replaceOnce(t, gen, `set_frequency = "SOURce:FREQuency {freq_hz}"`, `set_frequency = "SOURce:FREQuency {freq_hz};*RST"`)},
		{name: "a line break in a template", field: "commands.output_off", kind: "generator",
			doc: replaceOnce(t, gen, `output_off = "OUTPut OFF"`, `output_off = "OUTPut OFF\n*RST"`)},
		{name: "an unknown placeholder", field: "commands.set_frequency", kind: "generator",
			doc: replaceOnce(t, gen, `set_frequency = "SOURce:FREQuency {freq_hz}"`, `set_frequency = "SOURce:FREQuency {f}"`)},
		{name: "an unknown profile key", field: "commands.set_freq", kind: "generator",
			doc: replaceOnce(t, gen, `output_on = "OUTPut ON"`, "output_on = \"OUTPut ON\"\nset_freq = \"FREQ {freq_hz}\"")},
		{name: "a unit in a profile number", field: "limits.max_amplitude", value: "7V", kind: "generator",
			doc: replaceOnce(t, gen, "max_amplitude = 7.07", `max_amplitude = "7V"`)},
		{name: "an unknown amplitude unit", field: "output.unit", kind: "generator",
			doc: replaceOnce(t, gen, `unit = "vrms"`, `unit = "volts"`)},
		{name: "a quote in a switch template", field: "commands.close", kind: "switch",
			doc: replaceOnce(t, sw, `close = "ROUTe:CLOSe (@{channel})"`, `close = "ROUTe:CLOSe '(@{channel})'"`)},
		{name: "converter ranges not ascending", field: "ranges[1].full_scale_vrms", kind: "converter",
			doc: replaceOnce(t, conv, "full_scale_vrms = 0.0031622776601683794", "full_scale_vrms = 0.0005")},
		{name: "no amplitude limit on the bench", field: "limits.max_vrms", kind: "bench", doc: "max_vrms = 1.0|max_vrms = 0"},
		{name: "a port out of range", field: "generator.address", value: "99999", kind: "bench", doc: "GENADDR|tcp://127.0.0.1:99999"},
		{name: "a time scale on a real bench", field: "time_scale", kind: "bench", doc: `voltmeter_mode = "converter"|voltmeter_mode = "converter"` + "\ntime_scale = 50"},

		// A word argument carrying a second command.
		{name: "a word argument with ';'", field: "commands.set_unit {unit}", check: func(t *testing.T) (string, bool) {
			tpl, err := scpi.Compile("commands.set_unit", "SOURce:VOLTage:UNIT {unit}")
			if err != nil {
				t.Fatal(err)
			}
			cmd, err := tpl.Format(scpi.Word("unit", "VRMS;*RST"))
			var te *scpi.TemplateError
			if !errors.As(err, &te) {
				t.Errorf("Format(Word(\"VRMS;*RST\")) = %q, %v; want a TemplateError", cmd, err)
				return "", false
			}
			return te.Key + " {" + te.Placeholder + "}", strings.Contains(err.Error(), "commands.set_unit")
		}},

		// API requests.
		{name: "wrong content type", field: "content-type", api: &apiReq{method: "POST", path: "/api/runs", body: []byte(jsonPlan), hdr: []string{"Content-Type", "text/plain"}, status: 415}},
		{name: "oversize body", field: "body", api: &apiReq{method: "POST", path: "/api/runs", body: big, status: 413}},
		{name: "body not JSON", field: "body", api: &apiReq{method: "POST", path: "/api/runs", body: []byte("name=x&vrms=0.05"), status: 400}},
		{name: "foreign origin", field: "origin", api: &apiReq{method: "POST", path: "/api/runs", body: []byte(jsonPlan), hdr: []string{"Origin", "http://evil.example"}, status: 403}},
		{name: "null origin", field: "origin", api: &apiReq{method: "POST", path: "/api/runs", body: []byte(jsonPlan), hdr: []string{"Origin", "null"}, status: 403}},
		{name: "foreign host name", field: "host", api: &apiReq{method: "GET", path: "/api/runs", hdr: []string{"Host", "rebind.example:80"}, status: 403}},
		{name: "method not allowed", field: "method", api: &apiReq{method: "PUT", path: "/api/runs", body: []byte(jsonPlan), status: 405}},
		{name: "a run id with ../", field: "id", api: &apiReq{method: "GET", path: "/api/runs/..%2F..%2Fetc%2Fpasswd", status: 400}},
		{name: "a run id of ..", field: "id", api: &apiReq{method: "GET", path: "/api/runs/%2E%2E/points", status: 400}},
		{name: "a file name with ../", field: "path", api: &apiReq{method: "GET", path: "/api/runs/{done}/files/..%2Fmeta.json", status: 400}},
		{name: "an unknown run", field: "id", api: &apiReq{method: "POST", path: "/api/runs/20991231-000000-nothing/resume", body: []byte("{}"), status: 404}},
		{name: "resuming a done run", field: "state", api: &apiReq{method: "POST", path: "/api/runs/{done}/resume", body: []byte("{}"), status: 409}},
		{name: "fields on pause", field: "body", api: &apiReq{method: "POST", path: "/api/runs/{done}/pause", body: []byte(`{"now":true}`), status: 400}},
		{name: "a string prompt id", field: "body", api: &apiReq{method: "POST", path: "/api/runs/{done}/confirm", body: []byte(`{"prompt_id":"1","range_index":2}`), status: 400}},
		{name: "a negative from_seq", field: "from_seq", api: &apiReq{method: "GET", path: "/api/runs/{done}/points?from_seq=-1", status: 400}},
		{name: "an unknown upload field", field: "plan_toml", api: &apiReq{method: "POST", path: "/api/runs", body: []byte(`{"plan_toml":"name = \"x\"","path":"/etc/passwd"}`), status: 400}},
		{name: "a bad plan to estimate", field: "frequencies.stop_hz", api: &apiReq{method: "POST", path: "/api/plan/estimate", body: []byte(strings.Replace(jsonPlan, `"stop_hz":100000`, `"stop_hz":10`, 1)), status: 400}},
		{name: "an overlay of a run id with ../", field: "id", api: &apiReq{method: "GET", path: "/api/overlay.png?runs=..%2Fetc", status: 400}},
		{name: "an overlay of too many runs", field: "runs", api: &apiReq{method: "GET", path: "/api/overlay.svg?runs=" + manyIDs, status: 400}},

		// Live messages.
		{name: "a negative replay position", field: "from_seq", ws: `{"type":"replay","from_seq":-5}`},
		{name: "an unknown live message", field: "type", ws: `{"type":"start_run"}`},
		{name: "an unknown field in a live message", field: "plan", ws: `{"type":"ping","plan":{}}`},
	}
}

// genAddrLine matches the generator's address in a bench file.
var genAddrLine = regexp.MustCompile(`(\[generator\]\nprofile = "[^"]*"\naddress = )"[^"]*"`)

// profileKeys returns the keys of every *profile.FieldError in err.
func profileKeys(err error) []string {
	var out []string
	var walk func(error)
	walk = func(e error) {
		if e == nil {
			return
		}
		if fe, ok := e.(*profile.FieldError); ok {
			out = append(out, fe.Field)
			return
		}
		switch u := e.(type) {
		case interface{ Unwrap() []error }:
			for _, x := range u.Unwrap() {
				walk(x)
			}
		case interface{ Unwrap() error }:
			walk(u.Unwrap())
		}
	}
	walk(err)
	return out
}

// received counts what every simulated instrument has received.
func received(s *sim.Bench) map[string]int {
	m := map[string]int{}
	for _, role := range sim.Roles {
		m[role] = len(s.Received(role))
	}
	return m
}

// TestBadInput feeds bad plans, profiles, bench files, API requests and
// live messages to the decoders and to a running daemon (and a daemon
// starting) on a simulated bench. Each must be refused with an error
// naming the exact field, and nothing may reach any instrument.
func TestBadInput(t *testing.T) {
	t.Parallel()
	safe(t, func(t *testing.T) {
		s := startSim(t, 100)
		dir := t.TempDir()
		benchFile := writeTCPBench(t, dir, s.Addr, "")
		data := filepath.Join(dir, "runs")
		// A finished run for the requests that name one.
		st, err := store.Open(data)
		if err != nil {
			t.Fatal(err)
		}
		done, err := st.Create(store.CreateOpts{PlanFile: "plan.toml", PlanData: []byte(planTOML)})
		if err != nil {
			t.Fatal(err)
		}
		if err := done.SetState(event.Done, "measured earlier"); err != nil {
			t.Fatal(err)
		}
		doneID := done.ID()
		done.Close()
		daemon, api := startServe(t, "rolloff serve", benchFile, data)
		time.Sleep(50 * time.Millisecond)
		base := received(s)
		for _, c := range badCases(t) {
			t.Run(c.name, func(t *testing.T) {
				safe(t, func(t *testing.T) {
					before := received(s)
					ok := badInput(t, c, api, dir, doneID)
					if after := received(s); !equalCounts(before, after) {
						ok = false
						t.Errorf("instruments received commands: before %v, after %v", before, after)
					}
					if ok && !t.Failed() {
						tally.rejected.Add(1)
					}
				})
			})
		}
		if after := received(s); !equalCounts(base, after) {
			t.Errorf("instruments received commands during the bad inputs: %v → %v", base, after)
		}
		if daemon.exited() {
			t.Errorf("the daemon exited: %v", daemon.err)
		}
	})
}

func equalCounts(a, b map[string]int) bool {
	for k, v := range a {
		if b[k] != v {
			return false
		}
	}
	return len(a) == len(b)
}

// apiError decodes the daemon's error format.
func apiError(t *testing.T, data []byte) (msg, field string, ok bool) {
	t.Helper()
	var e struct {
		Error string `json:"error"`
		Field string `json:"field"`
	}
	if err := json.Unmarshal(data, &e); err != nil || e.Error == "" {
		t.Errorf("body %.200q is not the error format", data)
		return "", "", false
	}
	return e.Error, e.Field, true
}

// badInput checks one case; it reports whether the input was refused with
// the right field everywhere it was tried.
func badInput(t *testing.T, c badCase, api *apiClient, dir, doneID string) bool {
	switch {
	case c.planTOML != "" || c.planJSON != "":
		var p *plan.Plan
		var err error
		name := "bad-plan.toml"
		if c.planJSON != "" {
			name = "bad-plan.json"
			p, err = plan.DecodeJSON(name, []byte(c.planJSON))
		} else {
			p, err = plan.DecodeTOML(name, []byte(c.planTOML))
		}
		if err == nil {
			p.Defaults()
			err = p.Validate(benchLimits)
		}
		fes := plan.FieldErrors(err)
		if len(fes) == 0 {
			t.Errorf("plan accepted or refused without a FieldError: %v", err)
			return false
		}
		if fes[0].Field != c.field {
			t.Errorf("plan error names %q, want %q: %v", fes[0].Field, c.field, err)
			return false
		}
		if !strings.Contains(err.Error(), name) || !strings.Contains(err.Error(), c.field) {
			t.Errorf("plan error %q does not name the file and the field", err)
		}
		if c.value != "" && !strings.Contains(err.Error(), c.value) {
			t.Errorf("plan error %q does not quote the bad value %q", err, c.value)
		}
		body := []byte(c.planJSON)
		if c.planTOML != "" {
			body, _ = json.Marshal(map[string]string{"plan_toml": c.planTOML, "file_name": name})
		}
		code, data := api.do("POST", "/api/runs", body)
		msg, field, ok := apiError(t, data)
		if code != http.StatusBadRequest || !ok || field != c.field {
			t.Errorf("POST /api/runs: %d, field %q, want 400 and %q: %s", code, field, c.field, msg)
			return false
		}
		t.Logf("%s", msg)
		return true

	case c.kind != "":
		return badProfile(t, c, dir)

	case c.api != nil:
		a := *c.api
		path := strings.ReplaceAll(a.path, "{done}", doneID)
		code, data := api.do(a.method, path, a.body, a.hdr...)
		msg, field, ok := apiError(t, data)
		if code != a.status || !ok || field != c.field {
			t.Errorf("%s %s: %d, field %q, want %d and %q: %s", a.method, path, code, field, a.status, c.field, msg)
			return false
		}
		t.Logf("%d %s", code, msg)
		return true

	case c.ws != "":
		_, err := hub.DecodeClientMessage([]byte(c.ws))
		var me *hub.MessageError
		if !errors.As(err, &me) || me.Field != c.field {
			t.Errorf("DecodeClientMessage(%s) = %v, want a MessageError naming %q", c.ws, err, c.field)
			return false
		}
		return liveRefuses(t, api, doneID, c.ws)

	case c.check != nil:
		field, ok := c.check(t)
		if !ok || field != c.field {
			t.Errorf("refusal names %q, want %q", field, c.field)
			return false
		}
		return true
	}
	t.Fatalf("case %q checks nothing", c.name)
	return false
}

// liveRefuses sends msg on a run's live connection: the daemon must close
// it as a policy violation.
func liveRefuses(t *testing.T, api *apiClient, id, msg string) bool {
	t.Helper()
	url := "ws" + strings.TrimPrefix(api.base, "http") + "/api/runs/" + id + "/live"
	d := websocket.Dialer{HandshakeTimeout: 10 * time.Second, Subprotocols: []string{"rolloff.live.v1"}}
	c, _, err := d.Dial(url, http.Header{"Origin": {api.base}})
	if err != nil {
		t.Errorf("dial %s: %v", url, err)
		return false
	}
	defer c.Close()
	if err := c.WriteMessage(websocket.TextMessage, []byte(msg)); err != nil {
		t.Errorf("send: %v", err)
		return false
	}
	_ = c.SetReadDeadline(time.Now().Add(10 * time.Second))
	for {
		_, _, err := c.ReadMessage()
		if err == nil {
			continue // the replay of the run
		}
		var ce *websocket.CloseError
		if errors.As(err, &ce) && ce.Code == websocket.ClosePolicyViolation {
			t.Logf("closed: %d %s", ce.Code, ce.Text)
			return true
		}
		t.Errorf("after %s the connection ended with %v, want a policy-violation close", msg, err)
		return false
	}
}

// badProfile checks a bad profile or bench file: the decoder names the
// key, and a daemon given a bench with it refuses to start, naming the
// key, before it sends anything to an instrument.
func badProfile(t *testing.T, c badCase, dir string) bool {
	cdir := t.TempDir()
	writeProfiles(t, cdir)
	benchText, err := os.ReadFile(filepath.Join(dir, "tcp-bench.toml"))
	if err != nil {
		t.Fatal(err)
	}
	var decodeErr error
	switch c.kind {
	case "bench":
		old, new, _ := strings.Cut(c.doc, "|")
		if old == "GENADDR" {
			m := genAddrLine.FindString(string(benchText))
			if m == "" {
				t.Fatal("no generator address in the bench file")
			}
			old, new = m, genAddrLine.ReplaceAllString(m, "${1}"+strconv.Quote(new))
		}
		benchText = []byte(replaceOnce(t, string(benchText), old, new))
		path := filepath.Join(cdir, "tcp-bench.toml")
		if err := os.WriteFile(path, benchText, 0o644); err != nil {
			t.Fatal(err)
		}
		_, decodeErr = profile.LoadBench(path)
	default:
		name := map[string]string{"generator": "generator-scpi.toml", "switch": "switch-scpi.toml", "converter": "converter-10db-relay.toml"}[c.kind]
		if err := os.WriteFile(filepath.Join(cdir, name), []byte(c.doc), 0o644); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(cdir, "tcp-bench.toml"), benchText, 0o644); err != nil {
			t.Fatal(err)
		}
		_, decodeErr = profile.Decode(name, []byte(c.doc))
	}
	keys := profileKeys(decodeErr)
	if len(keys) == 0 || keys[0] != c.field {
		t.Errorf("decoder: keys %q, want %q first: %v", keys, c.field, decodeErr)
		return false
	}
	t.Logf("%v", decodeErr)
	if c.value != "" && !strings.Contains(decodeErr.Error(), c.value) {
		t.Errorf("the error %q does not quote the bad value %q", decodeErr, c.value)
	}
	p := startProc(t, "rolloff serve (bad bench)", "serve", "--bench", filepath.Join(cdir, "tcp-bench.toml"), "--addr", "127.0.0.1:0", "--data", filepath.Join(cdir, "runs"))
	if !p.wait(20 * time.Second) {
		t.Errorf("the daemon started on a bad %s file", c.kind)
		return false
	}
	if p.exitCode() == 0 || strings.Contains(p.stdout.String(), "rolloff serving") {
		t.Errorf("the daemon exited %d on a bad %s file: %s", p.exitCode(), c.kind, p.stdout.String())
		return false
	}
	if !strings.Contains(p.stderr.String(), c.field) {
		t.Errorf("the daemon's refusal does not name %q:\n%s", c.field, tail(p.stderr.String(), 2000))
		return false
	}
	return true
}
