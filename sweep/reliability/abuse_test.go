package reliability

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"rolloff/driver"
	"rolloff/driver/bench"
	"rolloff/driver/sim"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/sched/onbench"
	"rolloff/sweep/store"
	"rolloff/web"
	"rolloff/web/guard"
)

// The daemon under abuse: a flood of submissions, huge plans, other
// sites' pages, special files in a run directory, absurd values, and a
// link dropped while the bench is opened. Each case asserts a refusal
// or a bound and counts as an input rejected with a clear error.

// inDaemon is a daemon served in the test process (so that its open
// files can be counted) on the demo simulated bench.
type inDaemon struct {
	srv *web.Server
	api *apiClient
	g   *rig
}

func startInDaemon(t *testing.T, scale float64, maxQueued int) *inDaemon {
	t.Helper()
	g := openRig(t, scale, "", nil)
	srv, err := web.New(web.Config{Addr: "127.0.0.1:0", Bench: g.b, Store: g.st, Log: zerolog.Nop(), MaxQueued: maxQueued})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- srv.Serve(ctx) }()
	t.Cleanup(func() {
		cancel()
		select {
		case <-done:
		case <-time.After(15 * time.Second):
			t.Errorf("the daemon did not stop")
		}
	})
	return &inDaemon{srv: srv, g: g, api: &apiClient{t: t, base: strings.TrimSuffix(srv.URL(), "/")}}
}

// openFDs counts this process's open file descriptors.
func openFDs(t *testing.T) int {
	t.Helper()
	ents, err := os.ReadDir("/proc/self/fd")
	if err != nil {
		t.Fatalf("counting open files: %v", err)
	}
	return len(ents)
}

// slowPlanJSON is a plan that keeps the bench busy for minutes at time
// scale 1: the live run while the queue fills.
const slowPlanJSON = `{"name": "busy", "frequencies": {"spacing": "log", "start_hz": 20, "stop_hz": 20000, "points_per_decade": 100},
 "level": {"vrms": 0.05}, "settle": {"readings": 5, "tolerance": 0.0001}, "ranging": {"strategy": "remote", "start": "1 V"}}`

// TestQueueFlood: past --max-queued, submissions are refused with 429 and
// Retry-After; a waiting run holds no open file (the process's count of
// open files stays flat however many wait); no refused or half-made run
// is ever listed, and none that waits is taken for interrupted.
func TestQueueFlood(t *testing.T) {
	safe(t, func(t *testing.T) {
		const maxQueued = 24
		d := startInDaemon(t, 1, maxQueued)
		live := d.api.submit([]byte(slowPlanJSON))
		d.api.waitState(live, 30*time.Second, event.Settling, event.Reading)
		// Warm the client's and the server's connection before counting.
		d.api.runs()
		fd0 := openFDs(t)
		var ids []string
		for i := 0; i < maxQueued; i++ {
			ids = append(ids, d.api.submit([]byte(planJSONNamed(fmt.Sprintf("waiting %d", i)))))
		}
		fd1 := openFDs(t)
		refused := 0
		for i := 0; i < 3*maxQueued; i++ {
			code, body, hdr := doHdr(t, d.api, "POST", "/api/runs", []byte(planJSONNamed("one too many")))
			if code != http.StatusTooManyRequests {
				t.Fatalf("submission %d past the bound: %d %s", maxQueued+i+1, code, body)
			}
			if s, err := strconv.Atoi(hdr.Get("Retry-After")); err != nil || s < 1 {
				t.Fatalf("429 without a Retry-After in seconds: %q", hdr.Get("Retry-After"))
			}
			if !strings.Contains(string(body), "queue is full") {
				t.Fatalf("429 does not say why: %s", body)
			}
			refused++
		}
		fd2 := openFDs(t)
		t.Logf("open files: %d with the live run, %d with %d runs waiting, %d after %d refusals", fd0, fd1, maxQueued, fd2, refused)
		// 3 files per waiting run would be 72 more; allow a few for
		// connections of the HTTP client and server.
		if fd1-fd0 > 6 || fd2-fd0 > 6 {
			t.Errorf("open files grew with the queue: %d → %d → %d", fd0, fd1, fd2)
		}
		runs := d.api.runs()
		if len(runs) != 1+maxQueued {
			t.Errorf("%d runs listed, want %d (the live one and %d waiting)", len(runs), 1+maxQueued, maxQueued)
		}
		for _, r := range runs {
			if r.ID != live && r.State != event.Queued {
				t.Errorf("waiting run %s listed %s (%s)", r.ID, r.State, r.Message)
			}
		}
		// The store agrees: as many run directories, each listed
		// queued, nothing half made.
		sums, err := d.g.st.List()
		if err != nil {
			t.Fatal(err)
		}
		if len(sums) != 1+maxQueued {
			t.Errorf("the store lists %d runs, want %d", len(sums), 1+maxQueued)
		}
		for _, s := range sums {
			if s.ID != live && s.State != event.Queued {
				t.Errorf("the store lists waiting run %s as %s", s.ID, s.State)
			}
		}
		if m, _ := filepath.Glob(filepath.Join(d.g.dir, ".creating-*")); len(m) > 0 {
			t.Errorf("half-made run directories left: %v", m)
		}
		// A waiting run is claimed when the bench is free: abort the live
		// one, and the next starts from its stored state.
		if code, body := d.api.do("POST", "/api/runs/"+live+"/abort", []byte("{}")); code != 200 {
			t.Fatalf("abort: %d %s", code, body)
		}
		d.api.waitState(ids[0], 30*time.Second, event.Preparing, event.Settling, event.Reading, event.Done)
		for _, id := range ids {
			d.api.do("POST", "/api/runs/"+id+"/abort", []byte("{}"))
		}
		if !t.Failed() {
			tally.rejected.Add(int64(refused))
		}
	})
}

func planJSONNamed(name string) string {
	return fmt.Sprintf(`{"name": %q, "frequencies": {"spacing": "log", "start_hz": 100, "stop_hz": 10000, "points_per_decade": 2}, "level": {"vrms": 0.05}, "ranging": {"strategy": "remote", "start": "1 V"}}`, name)
}

// doHdr is apiClient.do returning the response headers too.
func doHdr(t *testing.T, a *apiClient, method, path string, body []byte, hdr ...string) (int, []byte, http.Header) {
	t.Helper()
	req, err := http.NewRequest(method, a.base+path, bytes.NewReader(body))
	if err != nil {
		t.Fatal(err)
	}
	if method == http.MethodPost {
		req.Header.Set("Content-Type", "application/json")
		req.Header.Set("Origin", a.base)
	}
	for i := 0; i+1 < len(hdr); i += 2 {
		req.Header.Set(hdr[i], hdr[i+1])
	}
	c := &http.Client{Timeout: 10 * time.Second}
	res, err := c.Do(req)
	if err != nil {
		t.Fatalf("%s %s: %v", method, path, err)
	}
	defer res.Body.Close()
	var buf bytes.Buffer
	_, _ = buf.ReadFrom(res.Body)
	return res.StatusCode, buf.Bytes(), res.Header
}

// TestWaitingRunsListedQueued: runs created and let go of while the
// store's queue lock is held are listed queued by a concurrent lister,
// never interrupted and never half made; without the queue lock (the
// daemon gone) they are interrupted.
func TestWaitingRunsListedQueued(t *testing.T) {
	safe(t, func(t *testing.T) {
		dir := t.TempDir()
		st, err := store.Open(dir)
		if err != nil {
			t.Fatal(err)
		}
		release, err := st.HoldQueue()
		if err != nil {
			t.Fatal(err)
		}
		stop := make(chan struct{})
		listed := make(chan error, 1)
		go func() {
			var bad error
			for {
				select {
				case <-stop:
					listed <- bad
					return
				default:
				}
				sums, err := st.List()
				if err != nil && bad == nil {
					bad = err
				}
				for _, s := range sums {
					if (s.State != event.Queued || s.Err != "") && bad == nil {
						bad = fmt.Errorf("run %s listed %s %s", s.ID, s.State, s.Err)
					}
				}
			}
		}()
		const n = 40
		for i := 0; i < n; i++ {
			r, err := st.Create(store.CreateOpts{PlanFile: "plan.toml", PlanData: []byte(planTOML), State: event.Queued})
			if err != nil {
				t.Fatal(err)
			}
			r.Close()
		}
		close(stop)
		if err := <-listed; err != nil {
			t.Error(err)
		}
		release()
		sums, err := st.List()
		if err != nil {
			t.Fatal(err)
		}
		if len(sums) != n {
			t.Fatalf("%d runs listed, want %d", len(sums), n)
		}
		for _, s := range sums {
			if s.State != event.Interrupted {
				t.Errorf("with no daemon holding the queue, run %s is %s, want interrupted", s.ID, s.State)
			}
		}
		if !t.Failed() {
			tally.rejected.Add(1)
		}
	})
}

// TestLargePlanLinear: a plan of just under the 1 MiB document limit is
// decoded in time and memory linear in its size. The targets proper
// (ms-1mib < 100) are BenchmarkDecode1MiB's in sweep/plan; here the
// bound is ten times looser in CPU time, which a load on the machine
// does not reach but the quadratic position lookup did by far (2 s for
// JSON, 90 s for TOML), and the heap one decoded plan keeps is bounded
// at four times its size.
func TestLargePlanLinear(t *testing.T) {
	safe(t, func(t *testing.T) {
		for _, format := range []string{"json", "toml"} {
			data := largeList(format)
			dec := plan.DecodeTOML
			if format == "json" {
				dec = plan.DecodeJSON
			}
			var before, after runtime.MemStats
			runtime.GC()
			runtime.GC() // twice: go-toml's pooled parser arena goes at the second
			runtime.ReadMemStats(&before)
			cpu0 := cpuTime()
			p, err := dec("large."+format, data)
			cpuMS := float64((cpuTime() - cpu0).Microseconds()) / 1e3
			if err != nil {
				t.Fatal(err)
			}
			runtime.GC()
			runtime.GC()
			runtime.ReadMemStats(&after)
			kept := int64(after.HeapAlloc) - int64(before.HeapAlloc)
			runtime.KeepAlive(p)
			runtime.KeepAlive(data) // alive through both measurements
			t.Logf("%s: the decoded plan keeps %d bytes of heap (%.2f per byte of the document)", format, kept, float64(kept)/float64(len(data)))
			if kept > 4*int64(len(data)) {
				t.Errorf("%s: a decoded plan of %d bytes keeps %d bytes of heap: more than 4 times its size", format, len(data), kept)
			}
			if len(p.Frequencies.ListHz) < 50000 {
				t.Fatalf("%s: %d frequencies", format, len(p.Frequencies.ListHz))
			}
			t.Logf("%s: %d bytes, %d frequencies, %.1f ms of CPU", format, len(data), len(p.Frequencies.ListHz), cpuMS)
			if cpuMS > 1000 {
				t.Errorf("%s: decoding %d bytes took %.0f ms of CPU: not linear", format, len(data), cpuMS)
			}
		}
		// Over the API: estimated; a document over the limit is refused
		// by its size.
		d := startInDaemon(t, 100, 0)
		code, body := d.api.do("POST", "/api/plan/estimate", largeList("json"))
		var est struct{ Points int }
		if code != 200 || json.Unmarshal(body, &est) != nil || est.Points < 50000 {
			t.Errorf("1 MiB plan of some 87 000 frequencies: %d %.200s", code, body)
		}
		big := append(largeList("json"), bytes.Repeat([]byte(" "), 2<<10)...)
		if code, body := d.api.do("POST", "/api/plan/estimate", big); code != 413 {
			t.Errorf("plan over the body limit: %d %.200s", code, body)
		}
		if !t.Failed() {
			tally.rejected.Add(1)
		}
	})
}

// largeList is a list plan of just under plan.MaxFileBytes, one frequency
// per line.
func largeList(format string) []byte {
	var b bytes.Buffer
	head, tail := "[frequencies]\nspacing = \"list\"\nfrequencies_hz = [\n", "]\n[level]\nvrms = 0.05\n"
	if format == "json" {
		head, tail = `{"frequencies": {"spacing": "list", "frequencies_hz": [`+"\n", "]}, \"level\": {\"vrms\": 0.05}}\n"
	}
	b.WriteString(head)
	for i := 0; ; i++ {
		line := "  " + strconv.FormatFloat(20+float64(i)*0.125, 'f', 3, 64)
		if b.Len()+len(line)+3+len(tail) > plan.MaxFileBytes {
			break
		}
		if i > 0 {
			b.WriteString(",\n")
		}
		b.WriteString(line)
	}
	b.WriteString("\n" + tail)
	return b.Bytes()
}

// cpuTime is the process's user + system CPU time.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// TestOtherSites: another site's page gets nothing from the API, not even
// whether a run exists (Fetch Metadata: Sec-Fetch-Site), and every answer
// forbids reading it from another origin (Cross-Origin-Resource-Policy).
func TestOtherSites(t *testing.T) {
	safe(t, func(t *testing.T) {
		d := startInDaemon(t, 100, 0)
		id := d.api.submit([]byte(planJSONNamed("exists")))
		d.api.waitState(id, 60*time.Second, event.Done, event.Failed)
		for _, path := range []string{
			"/api/overlay.png?runs=" + id,
			"/api/runs/" + id + "/files/response.png",
			"/api/runs/20000101-000000-none/files/response.png",
			"/api/runs/" + id,
			"/api/runs",
		} {
			code, body, hdr := doHdr(t, d.api, "GET", path, nil, "Sec-Fetch-Site", "cross-site")
			if code != 403 || !strings.Contains(string(body), "another site") {
				t.Errorf("GET %s from another site: %d %.200s", path, code, body)
			}
			if hdr.Get("Cross-Origin-Resource-Policy") != "same-origin" {
				t.Errorf("GET %s: no Cross-Origin-Resource-Policy", path)
			}
		}
		for _, path := range []string{"/", "/app.js", "/api/runs", "/api/runs/" + id + "/files/response.png", "/api/nothing"} {
			code, _, hdr := doHdr(t, d.api, "GET", path, nil, "Sec-Fetch-Site", "same-origin")
			if hdr.Get("Cross-Origin-Resource-Policy") != "same-origin" {
				t.Errorf("GET %s (%d): Cross-Origin-Resource-Policy %q", path, code, hdr.Get("Cross-Origin-Resource-Policy"))
			}
		}
		if !t.Failed() {
			tally.rejected.Add(5)
		}
	})
}

// TestDefaultPortHost: a daemon on port 80 answers a browser, which
// leaves the default port out of Host and Origin, and still refuses other
// hosts and ports (the guard of a daemon on 127.0.0.1:80, without
// binding the privileged port).
func TestDefaultPortHost(t *testing.T) {
	safe(t, func(t *testing.T) {
		g, err := guard.New(guard.Config{Addr: "127.0.0.1:80"})
		if err != nil {
			t.Fatal(err)
		}
		h := g.Wrap(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) { w.WriteHeader(204) }))
		for _, c := range []struct {
			method, host, origin string
			want                 int
		}{
			{"GET", "localhost", "", 204},
			{"GET", "127.0.0.1", "", 204},
			{"GET", "localhost:80", "", 204},
			{"POST", "localhost", "http://localhost", 204},
			{"POST", "127.0.0.1", "http://127.0.0.1:80", 204},
			{"GET", "localhost:8080", "", 403},
			{"GET", "rebound.example", "", 403},
			{"POST", "localhost", "http://localhost:8080", 403},
		} {
			r := httptest.NewRequest(c.method, "http://"+c.host+"/api/runs", strings.NewReader("{}"))
			r.Host = c.host
			if c.origin != "" {
				r.Header.Set("Origin", c.origin)
			}
			r.Header.Set("Content-Type", "application/json")
			w := httptest.NewRecorder()
			h.ServeHTTP(w, r)
			if w.Code != c.want {
				t.Errorf("%s Host %q Origin %q on port 80: %d, want %d (%s)", c.method, c.host, c.origin, w.Code, c.want, w.Body)
			}
		}
		if !t.Failed() {
			tally.rejected.Add(3)
		}
	})
}

// TestSpecialFilesInRun: a FIFO or a symbolic link out of the run in
// place of an export is answered 404 at once, never waited on, and no
// answer names the store's directory.
func TestSpecialFilesInRun(t *testing.T) {
	safe(t, func(t *testing.T) {
		d := startInDaemon(t, 100, 0)
		id := d.api.submit([]byte(planJSONNamed("special")))
		d.api.waitState(id, 60*time.Second, event.Done)
		rd := filepath.Join(d.g.dir, id)
		for _, f := range []string{"response.csv", "response.png"} {
			if err := os.Remove(filepath.Join(rd, f)); err != nil {
				t.Fatal(err)
			}
		}
		if err := syscall.Mkfifo(filepath.Join(rd, "response.csv"), 0o644); err != nil {
			t.Fatal(err)
		}
		outside := filepath.Join(t.TempDir(), "secret.png")
		if err := os.WriteFile(outside, []byte("not the run's"), 0o644); err != nil {
			t.Fatal(err)
		}
		if err := os.Symlink(outside, filepath.Join(rd, "response.png")); err != nil {
			t.Fatal(err)
		}
		for _, name := range []string{"response.csv", "response.png"} {
			start := time.Now()
			code, body, _ := doHdr(t, d.api, "GET", "/api/runs/"+id+"/files/"+name, nil)
			if code != 404 {
				t.Errorf("%s (special file): %d %.200s", name, code, body)
			}
			if took := time.Since(start); took > 5*time.Second {
				t.Errorf("%s: answered after %v", name, took)
			}
			if strings.Contains(string(body), d.g.dir) || strings.Contains(string(body), "not the run's") {
				t.Errorf("%s: the answer names internal files: %s", name, body)
			}
		}
		// The list and the run's other reads do not hang on the FIFO.
		d.api.runs()
		d.api.points(id)
		// A through run that does not exist: named by id, not by path.
		body := []byte(`{"frequencies": {"spacing": "log", "start_hz": 100, "stop_hz": 10000, "points_per_decade": 2}, "level": {"vrms": 0.05}, "normalize": {"through_run": "20000101-000000-none"}}`)
		code, resp := d.api.do("POST", "/api/plan/estimate", body)
		if code != 400 || !strings.Contains(string(resp), "normalize.through_run") || strings.Contains(string(resp), d.g.dir) {
			t.Errorf("missing through run: %d %s", code, resp)
		}
		if !t.Failed() {
			tally.rejected.Add(3)
		}
	})
}

// TestSmallAbuses: an absurd step is refused in a bounded message, a JSON
// plan file is decoded by the server's strict decoder (keys given twice,
// file:line), and the kept plan file name is made safe and short.
func TestSmallAbuses(t *testing.T) {
	safe(t, func(t *testing.T) {
		d := startInDaemon(t, 100, 0)
		// step_hz = 1e-300.
		body := []byte(`{"frequencies": {"spacing": "linear", "start_hz": 100, "stop_hz": 10000, "step_hz": 1e-300}, "level": {"vrms": 0.05}}`)
		code, resp := d.api.do("POST", "/api/plan/estimate", body)
		msg, field, _ := apiError(t, resp)
		if code != 400 || field != "frequencies.step_hz" || len(msg) > 250 || !strings.Contains(msg, "at most 100000") {
			t.Errorf("step_hz = 1e-300: %d field %q: %q", code, field, msg)
		}
		// A JSON plan file with a key given twice, as the page sends it.
		file := "{\n  \"frequencies\": {\"spacing\": \"log\", \"start_hz\": 100, \"stop_hz\": 10000, \"points_per_decade\": 2},\n  \"level\": {\"vrms\": 0.05},\n  \"level\": {\"vrms\": 0.9}\n}\n"
		up, _ := json.Marshal(map[string]string{"plan_json": file, "file_name": "twice.json"})
		code, resp = d.api.do("POST", "/api/plan/estimate", up)
		msg, _, _ = apiError(t, resp)
		if code != 400 || !strings.Contains(msg, "twice.json:4: level") || !strings.Contains(msg, "given twice") {
			t.Errorf("JSON plan file with a key twice: %d %q", code, msg)
		}
		// The file name as a browser may give it.
		good := "{\"name\": \"named\", \"frequencies\": {\"spacing\": \"log\", \"start_hz\": 100, \"stop_hz\": 10000, \"points_per_decade\": 2},\n \"level\": {\"vrms\": 0.05}, \"ranging\": {\"strategy\": \"remote\", \"start\": \"1 V\"}}"
		name := "evil\x1b[2J\r\nname" + strings.Repeat("x", 300) + ".json"
		up, _ = json.Marshal(map[string]string{"plan_json": good, "file_name": name})
		code, resp = d.api.do("POST", "/api/runs", up)
		if code != 201 {
			t.Fatalf("upload: %d %s", code, resp)
		}
		var v struct{ ID string }
		_ = json.Unmarshal(resp, &v)
		r, err := d.g.st.OpenRun(v.ID)
		if err != nil {
			t.Fatal(err)
		}
		src := r.Meta().PlanSource
		r.Close()
		if len(src) > web.MaxPlanNameBytes || strings.ContainsAny(src, "\x1b\r\n") || !strings.HasSuffix(src, ".json") {
			t.Errorf("kept plan file name %q (%d bytes)", src, len(src))
		}
		d.api.waitState(v.ID, 60*time.Second, event.Done, event.Failed)
		if !t.Failed() {
			tally.rejected.Add(3)
		}
	})
}

// TestInterruptedCount: a run interrupted by Ctrl-C says how many points
// it holds, counted from its points file.
func TestInterruptedCount(t *testing.T) {
	safe(t, func(t *testing.T) {
		dir := t.TempDir()
		benchFile := writeSimBench(t, dir, 2)
		planFile := filepath.Join(dir, "long.toml")
		if err := os.WriteFile(planFile, []byte(longPlanTOML), 0o644); err != nil {
			t.Fatal(err)
		}
		out := filepath.Join(dir, "runs")
		p := startProc(t, "rolloff run", "run", planFile, "--bench", benchFile, "--out", out)
		deadline := time.Now().Add(60 * time.Second)
		var runDir string
		for time.Now().Before(deadline) {
			if ds := runDirs(out); len(ds) == 1 && countLines(filepath.Join(ds[0], store.FilePoints)) >= 3 {
				runDir = ds[0]
				break
			}
			time.Sleep(50 * time.Millisecond)
		}
		if runDir == "" {
			t.Fatal("the run did not store 3 points in 60 s")
		}
		p.signal(syscall.SIGINT)
		if !p.wait(30 * time.Second) {
			t.Fatal("rolloff run did not stop on SIGINT")
		}
		stored := countLines(filepath.Join(runDir, store.FilePoints))
		want := fmt.Sprintf("interrupted after %d of ", stored)
		if !strings.Contains(p.stdout.String(), want) {
			t.Errorf("stdout does not say %q (%d points stored):\n%s", want, stored, p.stdout.String())
		}
		tally.faults.Add(1)
		if !t.Failed() {
			tally.stopped.Add(1)
		}
	})
}

// TestBenchOpenRetried: a link dropped while the bench is opened is
// retried with the sweep's retry policy, as the same drop mid-sweep is;
// a failure that is not transient is not.
func TestBenchOpenRetried(t *testing.T) {
	safe(t, func(t *testing.T) {
		s := startSim(t, 100)
		dir := t.TempDir()
		cfg, err := bench.Load(writeTCPBench(t, dir, s.Addr, ""))
		if err != nil {
			t.Fatal(err)
		}
		ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
		defer cancel()
		// Without retry the drop fails the opening: the fault hits it.
		s.Faults(sim.RoleVoltmeter).DropMidQuery()
		if b, err := bench.Open(ctx, cfg, zerolog.Nop()); err == nil {
			b.Close()
			t.Fatal("bench.Open survived a link dropped while opening: the fault missed")
		} else if !driver.Transient(err) {
			t.Errorf("the drop while opening gave an error that is not transient: %v", err)
		}
		for _, role := range []string{sim.RoleGenerator, sim.RoleVoltmeter, sim.RoleSwitch} {
			before := s.Faults(role).Count(sim.FaultDropMidQuery)
			s.Faults(role).DropMidQuery()
			b, err := onbench.Open(ctx, cfg, zerolog.Nop())
			if err != nil {
				t.Errorf("%s: link dropped while opening: %v", role, err)
				continue
			}
			if s.Faults(role).Count(sim.FaultDropMidQuery) != before+1 {
				t.Errorf("%s: the drop did not take effect while opening", role)
			}
			if s.OutputOn() {
				t.Errorf("%s: the generator output is on after opening", role)
			}
			b.Close()
			tally.faults.Add(1)
		}
		// Not transient: a wrong identity fails at once, in one try.
		bad := *cfg
		gen := *bad.Generator
		gp := *gen.Generator
		gp.Identity.Manufacturer = "NOBODY"
		gen.Generator = &gp
		bad.Generator = &gen
		before := len(s.Received(sim.RoleGenerator))
		if b, err := onbench.Open(ctx, &bad, zerolog.Nop()); err == nil {
			b.Close()
			t.Error("a bench whose generator answers another identity opened")
		}
		idn := 0
		for _, c := range s.Received(sim.RoleGenerator)[before:] {
			if strings.HasPrefix(strings.ToUpper(c), "*IDN?") {
				idn++
			}
		}
		if idn != 1 {
			t.Errorf("a wrong identity was asked %d times, want once (not retried)", idn)
		}
		if !t.Failed() {
			tally.rejected.Add(1)
		}
	})
}

// TestQueuedRunsAfterRestart: runs left waiting by a daemon that stopped
// are found interrupted by the next one (resumable), not taken for runs
// another owner is measuring.
func TestQueuedRunsAfterRestart(t *testing.T) {
	safe(t, func(t *testing.T) {
		g := openRig(t, 1, "", nil)
		serve := func() (*web.Server, *apiClient, func()) {
			srv, err := web.New(web.Config{Addr: "127.0.0.1:0", Bench: g.b, Store: g.st, Log: zerolog.Nop()})
			if err != nil {
				t.Fatal(err)
			}
			ctx, cancel := context.WithCancel(context.Background())
			done := make(chan error, 1)
			go func() { done <- srv.Serve(ctx) }()
			return srv, &apiClient{t: t, base: strings.TrimSuffix(srv.URL(), "/")}, func() {
				cancel()
				select {
				case <-done:
				case <-time.After(15 * time.Second):
					t.Fatal("the daemon did not stop")
				}
			}
		}
		_, api, stop := serve()
		live := api.submit([]byte(slowPlanJSON))
		api.waitState(live, 30*time.Second, event.Settling, event.Reading)
		var waiting []string
		for i := 0; i < 3; i++ {
			waiting = append(waiting, api.submit([]byte(planJSONNamed(fmt.Sprint("left waiting ", i)))))
		}
		stop()
		_, api, stop = serve()
		defer stop()
		for _, id := range append([]string{live}, waiting...) {
			var in struct {
				State    event.State
				External bool
			}
			code, body := api.do("GET", "/api/runs/"+id, nil)
			if code != 200 || json.Unmarshal(body, &in) != nil {
				t.Fatalf("GET %s: %d %s", id, code, body)
			}
			if in.State != event.Interrupted || in.External {
				t.Errorf("run %s after the restart: %s, external %v; want interrupted, this daemon's", id, in.State, in.External)
			}
		}
		if code, body := api.do("POST", "/api/runs/"+waiting[0]+"/resume", []byte("{}")); code != 200 {
			t.Fatalf("resume a run left waiting: %d %s", code, body)
		}
		api.waitState(waiting[0], 60*time.Second, event.Done)
		if !t.Failed() {
			tally.stopped.Add(1)
		}
	})
}
