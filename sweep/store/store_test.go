package store

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"rolloff/driver"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
)

const testPlan = `name = "line driver"
[frequencies]
start_hz = 10
stop_hz = 100000
points_per_decade = 3
[level]
vrms = 0.5
`

func newStore(t *testing.T) *Store {
	t.Helper()
	s, err := Open(filepath.Join(t.TempDir(), "runs"))
	if err != nil {
		t.Fatal(err)
	}
	return s
}

func create(t *testing.T, s *Store, name string) *Run {
	t.Helper()
	r, err := s.Create(CreateOpts{Name: name, PlanFile: "demo-plan.toml", PlanData: []byte(testPlan),
		BenchFile: []byte("# bench\n"), Identities: map[string]driver.Identity{
			"generator": {Manufacturer: "rolloff", Model: "SIM-GEN", Serial: "0001", Firmware: "1.0"}}})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { r.Close() })
	return r
}

func pt(seq, index int, hz float64) point.Point {
	return point.Point{Seq: seq, Index: index, FreqHz: hz, VinVrms: 0.5, VoutVrms: 1, GainDB: 20 * math.Log10(2),
		DCVolts: 0.5, RangeIndex: 2, Range: "1 V", RangeFSVrms: 1, FractionFS: 1, Readings: 2,
		Time: time.Date(2026, 12, 1, 18, 45, 12, 0, time.UTC)}
}

func noTemps(t *testing.T, dir string) {
	t.Helper()
	ents, _ := os.ReadDir(dir)
	for _, e := range ents {
		if strings.HasPrefix(e.Name(), ".") {
			t.Errorf("left behind: %s", e.Name())
		}
	}
}

func TestCreateLayout(t *testing.T) {
	s := newStore(t)
	r := create(t, s, "Line Driver / rev B")
	if !regexp.MustCompile(`^\d{8}-\d{6}-line-driver-rev-b$`).MatchString(r.ID()) {
		t.Errorf("id %q", r.ID())
	}
	if !r.Locked() {
		t.Error("a created run is not owned")
	}
	for name, want := range map[string]string{FilePlanTOML: testPlan, FileBench: "# bench\n", FilePoints: ""} {
		b, err := os.ReadFile(filepath.Join(r.Dir(), name))
		if err != nil || string(b) != want {
			t.Errorf("%s: %q %v", name, b, err)
		}
	}
	var m Meta
	b, _ := os.ReadFile(filepath.Join(r.Dir(), FileMeta))
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	if m.ID != r.ID() || m.State != event.Preparing || m.PlanFile != FilePlanTOML || m.Identities["generator"].Model != "SIM-GEN" ||
		m.Plan.Points != 13 || m.Plan.StartHz != 10 || m.Plan.StopHz != 100000 || m.Format != MetaFormat {
		t.Errorf("meta %+v", m)
	}
	evs, err := r.Events()
	if err != nil || len(evs) != 1 || evs[0].Type != event.TypeState || evs[0].State != event.Preparing || evs[0].Run != r.ID() {
		t.Errorf("events %+v %v", evs, err)
	}
	noTemps(t, r.Dir())
	noTemps(t, s.Dir())
	p, err := r.Plan()
	if err != nil || p.Level.Vrms != 0.5 || p.Name != "line driver" {
		t.Errorf("plan %+v %v", p, err)
	}
	// The same name in the same second gets another id.
	r2 := create(t, s, "Line Driver / rev B")
	if r2.ID() == r.ID() {
		t.Error("two runs share an id")
	}
	// A JSON plan is stored as plan.json.
	r3, err := s.Create(CreateOpts{PlanFile: "req.json", PlanData: []byte(`{"name": "j", "frequencies": {"frequencies_hz": [100, 1000]}, "level": {"vrms": 1}, "reference_hz": 100}`)})
	if err != nil {
		t.Fatal(err)
	}
	defer r3.Close()
	if r3.Meta().PlanFile != FilePlanJSON || !strings.HasSuffix(r3.ID(), "-j") {
		t.Errorf("json run %+v", r3.Meta())
	}
	if _, err := os.Stat(filepath.Join(r3.Dir(), FileBench)); !os.IsNotExist(err) {
		t.Error("bench.toml written without a bench file")
	}
	if _, err := s.Create(CreateOpts{PlanFile: "bad.toml", PlanData: []byte("[frequencies]\nbogus = 1\n")}); err == nil {
		t.Error("an undecodable plan was stored")
	}
}

func TestAppendAndRead(t *testing.T) {
	s := newStore(t)
	r := create(t, s, "x")
	for i := range 5 {
		if err := r.AppendPoint(pt(i, i, 10*float64(i+1))); err != nil {
			t.Fatal(err)
		}
	}
	if err := r.AppendEvent(event.Event{Type: event.TypeProgress, Progress: &event.Progress{Done: 5, Total: 13}}); err != nil {
		t.Fatal(err)
	}
	if err := r.SetState(event.Settling, "first point"); err != nil {
		t.Fatal(err)
	}
	pts, err := r.Points()
	if err != nil || len(pts) != 5 || pts[4].FreqHz != 50 || pts[4].Range != "1 V" {
		t.Fatalf("points %v %v", pts, err)
	}
	// Another handle (the web page) reads from disk while the owner lives.
	o, err := s.OpenRun(r.ID())
	if err != nil {
		t.Fatal(err)
	}
	defer o.Close()
	if o.Locked() || o.Recovery().Interrupted || o.Meta().State != event.Settling {
		t.Errorf("reader: locked %v rec %+v state %s", o.Locked(), o.Recovery(), o.Meta().State)
	}
	opts, err := o.Points()
	if err != nil || len(opts) != 5 || !opts[3].Time.Equal(pts[3].Time) || opts[2].GainDB != pts[2].GainDB {
		t.Errorf("reader points %v %v", opts, err)
	}
	if err := o.AppendPoint(pt(5, 5, 60)); !errors.Is(err, ErrNotLocked) {
		t.Errorf("reader wrote: %v", err)
	}
	if err := o.Lock(); !errors.Is(err, ErrLocked) {
		t.Errorf("second owner: %v", err)
	}
	evs, err := o.Events()
	if err != nil || len(evs) != 3 || evs[1].Progress.Done != 5 || evs[2].State != event.Settling || evs[2].From != event.Preparing {
		t.Errorf("events %+v %v", evs, err)
	}
	m, err := o.Measured()
	if err != nil || m.NextSeq != 5 || m.NextIndex != 5 || !m.Indices[4] || m.Indices[5] || len(m.FreqsHz) != 5 {
		t.Errorf("measured %+v %v", m, err)
	}
	if r.NextSeq() != 5 || !r.Has(2) || r.Has(7) {
		t.Error("NextSeq/Has")
	}
}

func TestDuplicateAndBadPoints(t *testing.T) {
	r := create(t, newStore(t), "x")
	if err := r.AppendPoint(pt(0, 3, 100)); err != nil {
		t.Fatal(err)
	}
	before, _ := os.ReadFile(filepath.Join(r.Dir(), FilePoints))
	err := r.AppendPoint(pt(1, 3, 100))
	if !errors.Is(err, ErrDuplicatePoint) {
		t.Fatalf("duplicate: %v", err)
	}
	bad := pt(1, 4, 200)
	bad.GainDB = math.Inf(-1)
	var fe *plan.FieldError
	if err := r.AppendPoint(bad); !errors.As(err, &fe) || fe.Field != "point.gain_db" || fe.Value != "-Inf" {
		t.Errorf("-Inf gain: %v", err)
	}
	if err := r.AppendPoint(pt(5, 4, 200)); !errors.As(err, &fe) || fe.Field != "point.seq" {
		t.Errorf("wrong seq: %v", err)
	}
	after, _ := os.ReadFile(filepath.Join(r.Dir(), FilePoints))
	if !bytes.Equal(before, after) {
		t.Error("refused points changed the file")
	}
	if err := r.AppendPoint(pt(1, 4, 200)); err != nil {
		t.Errorf("good point after refusals: %v", err)
	}
	// A duplicate that reached the file by other means is corruption,
	// even on the last line.
	r.Close()
	f, _ := os.OpenFile(filepath.Join(r.Dir(), FilePoints), os.O_APPEND|os.O_WRONLY, 0)
	line, _ := json.Marshal(pt(2, 3, 100))
	f.Write(append(line, '\n'))
	f.Close()
	_, err = r.store.OpenRun(r.ID())
	var ce *CorruptError
	if !errors.As(err, &ce) || ce.Line != 3 || !errors.Is(err, ErrDuplicatePoint) {
		t.Errorf("stored duplicate: %v", err)
	}
}

func TestAtomicReplace(t *testing.T) {
	r := create(t, newStore(t), "x")
	a := bytes.Repeat([]byte("a"), 64<<10)
	b := bytes.Repeat([]byte("b"), 48<<10)
	if err := r.WriteFileAtomic("result.json", a); err != nil {
		t.Fatal(err)
	}
	stop := make(chan struct{})
	var wg sync.WaitGroup
	var bad error
	wg.Add(1)
	go func() {
		defer wg.Done()
		for {
			select {
			case <-stop:
				return
			default:
			}
			got, err := os.ReadFile(filepath.Join(r.Dir(), "result.json"))
			if err == nil && !bytes.Equal(got, a) && !bytes.Equal(got, b) {
				bad = fmt.Errorf("read a mix: %d bytes", len(got))
				return
			}
			mb, err := os.ReadFile(filepath.Join(r.Dir(), FileMeta))
			var m Meta
			if err != nil || json.Unmarshal(mb, &m) != nil {
				bad = fmt.Errorf("meta.json unreadable during replace: %v", err)
				return
			}
		}
	}()
	for i := range 20 {
		data := a
		if i%2 == 0 {
			data = b
		}
		if err := r.WriteFileAtomic("result.json", data); err != nil {
			t.Fatal(err)
		}
		if err := r.SetState([]event.State{event.Settling, event.Reading}[i%2], "step"); err != nil {
			t.Fatal(err)
		}
	}
	close(stop)
	wg.Wait()
	if bad != nil {
		t.Fatal(bad)
	}
	noTemps(t, r.Dir())
	if got, _ := os.ReadFile(filepath.Join(r.Dir(), "result.json")); !bytes.Equal(got, a) {
		t.Error("last write lost")
	}
}

func TestTornLineCut(t *testing.T) {
	s := newStore(t)
	var logBuf bytes.Buffer
	s.SetLogger(zerolog.New(&logBuf))
	r := create(t, s, "x")
	for i := range 3 {
		if err := r.AppendPoint(pt(i, i, float64(100*(i+1)))); err != nil {
			t.Fatal(err)
		}
	}
	if err := r.SetState(event.Reading, ""); err != nil {
		t.Fatal(err)
	}
	r.Close()
	path := filepath.Join(r.Dir(), FilePoints)
	good, _ := os.ReadFile(path)
	line, _ := json.Marshal(pt(3, 3, 400))
	half := line[:len(line)/2]
	os.WriteFile(path, append(append([]byte{}, good...), half...), 0o644)
	// And a stale temp file from a crash in the middle of a replace.
	os.WriteFile(filepath.Join(r.Dir(), tempPrefix+"meta.json-123"), []byte("{"), 0o644)

	o, err := s.OpenRun(r.ID())
	if err != nil {
		t.Fatal(err)
	}
	defer o.Close()
	rec := o.Recovery()
	if rec.PointsCutBytes != int64(len(half)) || rec.TempsRemoved != 1 || !rec.Interrupted || rec.PrevState != event.Reading {
		t.Errorf("recovery %+v", rec)
	}
	if got, _ := os.ReadFile(path); !bytes.Equal(got, good) {
		t.Errorf("points.jsonl not cut back to its last good line")
	}
	pts, err := o.Points()
	if err != nil || len(pts) != 3 || pts[2].FreqHz != 300 {
		t.Errorf("points %v %v", pts, err)
	}
	if !strings.Contains(logBuf.String(), "cut a torn last line") || !strings.Contains(logBuf.String(), fmt.Sprintf(`"bytes":%d`, len(half))) {
		t.Errorf("log: %s", logBuf.String())
	}
	// A complete but invalid last line (a zero-filled block after a
	// crash) is cut too.
	os.WriteFile(path, append(append([]byte{}, good...), "\x00\x00\x00\x00\n"...), 0o644)
	o2, err := s.OpenRun(r.ID())
	if err != nil {
		t.Fatal(err)
	}
	o2.Close()
	if o2.Recovery().PointsCutBytes != 5 || o2.Recovery().Interrupted {
		t.Errorf("second recovery %+v", o2.Recovery())
	}
	noTemps(t, r.Dir())
	// The owner can carry on where the file ends.
	if err := o.Lock(); err != nil {
		t.Fatal(err)
	}
	if err := o.AppendPoint(pt(3, 3, 400)); err != nil {
		t.Fatal(err)
	}
}

func TestMidFileCorruption(t *testing.T) {
	s := newStore(t)
	r := create(t, s, "x")
	for i := range 3 {
		r.AppendPoint(pt(i, i, float64(100*(i+1))))
	}
	r.Close()
	path := filepath.Join(r.Dir(), FilePoints)
	data, _ := os.ReadFile(path)
	lines := bytes.SplitAfter(data, []byte("\n"))
	lines[1] = []byte("{\"seq\": 1, \"index\": 1, \"freq_hz\": 2\x0000}\n")
	os.WriteFile(path, bytes.Join(lines, nil), 0o644)
	_, err := s.OpenRun(r.ID())
	var ce *CorruptError
	if !errors.As(err, &ce) || ce.Line != 2 || ce.File != path || !errors.Is(err, ErrCorrupt) {
		t.Fatalf("got %v", err)
	}
	if !strings.Contains(err.Error(), "points.jsonl:2:") {
		t.Errorf("message %q", err)
	}
	if got, _ := os.ReadFile(path); !bytes.Equal(got, bytes.Join(lines, nil)) {
		t.Error("a corrupt file was changed")
	}
	// List still shows the run.
	l, err := s.List()
	if err != nil || len(l) != 1 || l[0].ID != r.ID() {
		t.Errorf("list %+v %v", l, err)
	}
}

func TestIDs(t *testing.T) {
	s := newStore(t)
	for _, id := range []string{"../x", "a/b", "", ".x", "..", "a\x00b", strings.Repeat("x", 129)} {
		_, err := s.OpenRun(id)
		var fe *plan.FieldError
		if !errors.As(err, &fe) || fe.Field != "id" {
			t.Errorf("OpenRun(%q): %v", id, err)
		}
	}
	if _, err := s.OpenRun("20261201-184512-none"); !errors.Is(err, ErrNotFound) {
		t.Errorf("missing run: %v", err)
	}
	for name, want := range map[string]string{"Line Driver": "line-driver", "": "run", "µ-preamp 2": "preamp-2",
		"../../etc": "etc", strings.Repeat("ab", 40): strings.Repeat("ab", 20)} {
		if got := slug(name); got != want {
			t.Errorf("slug(%q) = %q, want %q", name, got, want)
		}
	}
}

func TestOpenFile(t *testing.T) {
	r := create(t, newStore(t), "x")
	if err := r.WriteFileAtomic("response.csv", []byte("f,g\n")); err != nil {
		t.Fatal(err)
	}
	f, err := r.OpenFile("response.csv")
	if err != nil {
		t.Fatal(err)
	}
	b, _ := io.ReadAll(f)
	f.Close()
	if string(b) != "f,g\n" {
		t.Errorf("read %q", b)
	}
	if f, err := r.OpenFile(FileMeta); err != nil {
		t.Error(err)
	} else {
		f.Close()
	}
	os.Symlink("/etc/passwd", filepath.Join(r.Dir(), "evil.txt"))
	for _, name := range []string{"../" + FileMeta, "lock", "/etc/passwd", "x/../meta.json", ".tmp-meta.json", "evil.txt", "a..json", "Result.json", "result.exe"} {
		if f, err := r.OpenFile(name); err == nil {
			f.Close()
			t.Errorf("OpenFile(%q) allowed", name)
		}
	}
	for _, name := range []string{FileMeta, FilePoints, FileEvents, FilePlanTOML, "../result.json", "lock"} {
		if err := r.WriteFileAtomic(name, []byte("{}")); err == nil {
			t.Errorf("WriteFileAtomic(%q) allowed", name)
		}
	}
	if _, err := r.OpenFile("result.json"); !errors.Is(err, ErrNotFound) {
		t.Errorf("missing file: %v", err)
	}
}

func TestList(t *testing.T) {
	s := newStore(t)
	var ids []string
	for i, name := range []string{"old", "mid", "new"} {
		r, err := s.Create(CreateOpts{Name: name, PlanFile: "p.toml", PlanData: []byte(testPlan),
			Now: time.Date(2026, 12, 1+i, 10, 0, 0, 0, time.UTC)})
		if err != nil {
			t.Fatal(err)
		}
		for j := range i {
			r.AppendPoint(pt(j, j, float64(10+j)))
		}
		if i == 1 {
			r.WriteFileAtomic(FileResult, []byte(`{"corners": {"low_hz": 19.5, "high_hz": 81000}, "peaking_db": 0.1}`))
			r.SetState(event.Done, "")
		}
		if i == 2 {
			r.WriteFileAtomic(FileResult, []byte(`{"low_hz": "not a number"`))
		}
		ids = append(ids, r.ID())
		if i != 2 {
			r.Close() // "new" stays owned
		} else {
			defer r.Close()
		}
	}
	os.Mkdir(filepath.Join(s.Dir(), ".creating-zz"), 0o755)
	os.Mkdir(filepath.Join(s.Dir(), "not a run"), 0o755)
	l, err := s.List()
	if err != nil {
		t.Fatal(err)
	}
	if len(l) != 3 || l[0].ID != ids[2] || l[2].ID != ids[0] {
		t.Fatalf("list %+v", l)
	}
	if l[0].State != event.Preparing || l[0].Points != 2 || l[0].LowHz != nil {
		t.Errorf("owned run %+v", l[0])
	}
	if l[1].State != event.Done || l[1].Points != 1 || l[1].LowHz == nil || *l[1].LowHz != 19.5 || *l[1].HighHz != 81000 {
		t.Errorf("done run %+v", l[1])
	}
	if l[2].State != event.Interrupted || l[2].PlanPoints != 13 {
		t.Errorf("abandoned run %+v", l[2])
	}
	// List only reads: meta.json still says preparing.
	b, _ := os.ReadFile(filepath.Join(s.Dir(), ids[0], FileMeta))
	if !bytes.Contains(b, []byte(`"state": "preparing"`)) {
		t.Errorf("List rewrote meta: %s", b)
	}
}

func TestDefaultDaemonDir(t *testing.T) {
	t.Setenv("XDG_DATA_HOME", "/data/x")
	if d, err := DefaultDaemonDir(); err != nil || d != "/data/x/rolloff/runs" {
		t.Errorf("%q %v", d, err)
	}
	t.Setenv("XDG_DATA_HOME", "relative")
	t.Setenv("HOME", "/home/op")
	if d, err := DefaultDaemonDir(); err != nil || d != "/home/op/.local/share/rolloff/runs" {
		t.Errorf("%q %v", d, err)
	}
}

// failFile is a points file on a disk that fills up: it writes the first
// room bytes of each write to the real file, then fails with ENOSPC.
type failFile struct {
	*os.File
	room        int
	failTrunc   bool
	truncations int
}

func (f *failFile) Write(b []byte) (int, error) {
	n := min(f.room, len(b))
	f.File.Write(b[:n])
	f.room -= n
	if n < len(b) {
		return n, syscall.ENOSPC
	}
	return n, nil
}

func (f *failFile) Truncate(size int64) error {
	f.truncations++
	if f.failTrunc {
		return syscall.EIO
	}
	return f.File.Truncate(size)
}

func TestDiskFull(t *testing.T) {
	s := newStore(t)
	r := create(t, s, "x")
	for i := range 2 {
		r.AppendPoint(pt(i, i, float64(10+i)))
	}
	path := filepath.Join(r.Dir(), FilePoints)
	before, _ := os.ReadFile(path)
	real := r.points.(*os.File)
	ff := &failFile{File: real, room: 40}
	r.points = ff
	err := r.AppendPoint(pt(2, 2, 12))
	if !errors.Is(err, syscall.ENOSPC) || ff.truncations != 1 {
		t.Fatalf("disk full: %v (truncations %d)", err, ff.truncations)
	}
	if got, _ := os.ReadFile(path); !bytes.Equal(got, before) {
		t.Errorf("a partial line stayed behind: %q", got[len(before):])
	}
	if pts, _ := r.Points(); len(pts) != 2 {
		t.Errorf("%d points in memory", len(pts))
	}
	// Room again: the run goes on, the point recorded once.
	ff.room = 1 << 20
	if err := r.AppendPoint(pt(2, 2, 12)); err != nil {
		t.Fatal(err)
	}
	// A failure that cannot be undone stops every later write.
	ff.room, ff.failTrunc = 10, true
	if err := r.AppendPoint(pt(3, 3, 13)); err == nil {
		t.Fatal("write on a full disk succeeded")
	}
	if err := r.AppendPoint(pt(3, 3, 13)); !errors.Is(err, ErrFailed) {
		t.Errorf("after an undo failure: %v", err)
	}
	if err := r.SetState(event.Failed, "disk full"); !errors.Is(err, ErrFailed) {
		t.Errorf("state after failure: %v", err)
	}
	// What was written before stays readable (the torn 10 bytes are cut
	// by the next recovery).
	r.Close()
	o, err := s.OpenRun(r.ID())
	if err != nil {
		t.Fatal(err)
	}
	defer o.Close()
	if pts, err := o.Points(); err != nil || len(pts) != 3 {
		t.Errorf("after the failure: %d points, %v", len(pts), err)
	}
	if o.Recovery().PointsCutBytes != 10 {
		t.Errorf("recovery %+v", o.Recovery())
	}
}

// TestReadOnlyFiles makes the run's files immutable (chattr +i, which
// binds root too) under a live owner: writes fail cleanly and the points
// stay readable.
func TestReadOnlyFiles(t *testing.T) {
	if _, err := exec.LookPath("chattr"); err != nil {
		t.Skip("no chattr")
	}
	s := newStore(t)
	r := create(t, s, "x")
	r.AppendPoint(pt(0, 0, 10))
	files := []string{filepath.Join(r.Dir(), FilePoints), filepath.Join(r.Dir(), FileEvents), r.Dir()}
	if out, err := exec.Command("chattr", append([]string{"+i"}, files...)...).CombinedOutput(); err != nil {
		t.Skipf("chattr +i: %v %s", err, out)
	}
	t.Cleanup(func() { exec.Command("chattr", append([]string{"-i"}, files...)...).Run() })
	if err := r.AppendPoint(pt(1, 1, 20)); err == nil || !strings.Contains(err.Error(), FilePoints) {
		t.Errorf("append to an immutable file: %v", err)
	}
	if err := r.SetState(event.Failed, "read-only"); err == nil {
		t.Error("state change on an immutable run")
	}
	if err := r.WriteFileAtomic("result.json", []byte("{}")); err == nil {
		t.Error("result written into an immutable directory")
	}
	o, err := s.OpenRun(r.ID())
	if err != nil {
		t.Fatal(err)
	}
	defer o.Close()
	if pts, err := o.Points(); err != nil || len(pts) != 1 {
		t.Errorf("points %v %v", pts, err)
	}
	if pts, _ := r.Points(); len(pts) != 1 {
		t.Errorf("owner points %v", pts)
	}
}

func TestConcurrentReaders(t *testing.T) {
	s := newStore(t)
	r := create(t, s, "x")
	o, err := s.OpenRun(r.ID())
	if err != nil {
		t.Fatal(err)
	}
	defer o.Close()
	const n = 100
	done := make(chan struct{})
	var wg sync.WaitGroup
	errc := make(chan error, 4)
	for _, h := range []*Run{r, o} {
		wg.Add(1)
		go func() {
			defer wg.Done()
			last := 0
			for {
				pts, err := h.Points()
				if err != nil {
					errc <- err
					return
				}
				if len(pts) < last {
					errc <- fmt.Errorf("points went from %d to %d", last, len(pts))
					return
				}
				last = len(pts)
				if _, err := h.Events(); err != nil {
					errc <- err
					return
				}
				_ = h.Meta()
				select {
				case <-done:
					return
				default:
				}
			}
		}()
	}
	for i := range n {
		if err := r.AppendPoint(pt(i, i, float64(i+1))); err != nil {
			t.Fatal(err)
		}
		if i%10 == 0 {
			r.AppendEvent(event.Event{Type: event.TypeLog, Message: "x"})
		}
	}
	close(done)
	wg.Wait()
	close(errc)
	for err := range errc {
		t.Error(err)
	}
	if pts, _ := o.Points(); len(pts) != n {
		t.Errorf("%d points", len(pts))
	}
}

// TestHelperHoldRun is the child process of TestInterruptedAfterKill: it
// creates a run, stores a point, prints the run id and waits to be killed.
func TestHelperHoldRun(t *testing.T) {
	dir := os.Getenv("ROLLOFF_STORE_HOLD")
	if dir == "" {
		t.Skip("helper process only")
	}
	s, err := Open(dir)
	if err != nil {
		fmt.Println("error", err)
		os.Exit(2)
	}
	r, err := s.Create(CreateOpts{Name: "held", PlanFile: "p.toml", PlanData: []byte(testPlan)})
	if err == nil {
		err = r.SetState(event.Settling, "")
	}
	if err == nil {
		err = r.AppendPoint(pt(0, 0, 10))
	}
	if err != nil {
		fmt.Println("error", err)
		os.Exit(2)
	}
	fmt.Println("id", r.ID())
	time.Sleep(60 * time.Second)
	os.Exit(3)
}

func TestInterruptedAfterKill(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "runs")
	cmd := exec.Command(os.Args[0], "-test.run=^TestHelperHoldRun$")
	cmd.Env = append(os.Environ(), "ROLLOFF_STORE_HOLD="+dir)
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	defer cmd.Process.Kill()
	sc := bufio.NewScanner(out)
	id := ""
	for sc.Scan() {
		if f := strings.Fields(sc.Text()); len(f) == 2 && f[0] == "id" {
			id = f[1]
			break
		} else if len(f) > 0 && f[0] == "error" {
			t.Fatal(sc.Text())
		}
	}
	if id == "" {
		t.Fatal("helper gave no run id")
	}
	s, err := Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	// While the owner lives the run is settling and cannot be taken.
	l, _ := s.List()
	if len(l) != 1 || l[0].State != event.Settling {
		t.Fatalf("live run listed as %+v", l)
	}
	live, err := s.OpenRun(id)
	if err != nil {
		t.Fatal(err)
	}
	if live.Recovery().Interrupted || live.Meta().State != event.Settling {
		t.Errorf("live run: %+v", live.Recovery())
	}
	if err := live.Lock(); !errors.Is(err, ErrLocked) || !strings.Contains(err.Error(), fmt.Sprint(cmd.Process.Pid)) {
		t.Errorf("Lock of a live run: %v", err)
	}
	live.Close()

	cmd.Process.Signal(syscall.SIGKILL)
	cmd.Wait()

	l, _ = s.List()
	if len(l) != 1 || l[0].State != event.Interrupted || l[0].Points != 1 {
		t.Fatalf("after kill -9: %+v", l)
	}
	r, err := s.OpenRun(id)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	rec := r.Recovery()
	if !rec.Interrupted || rec.PrevState != event.Settling || r.Meta().State != event.Interrupted {
		t.Errorf("recovery %+v, state %s", rec, r.Meta().State)
	}
	evs, _ := r.Events()
	if last := evs[len(evs)-1]; last.State != event.Interrupted || last.From != event.Settling {
		t.Errorf("last event %+v", last)
	}
	// Recorded on disk, not just reported.
	m, _ := r.loadMeta()
	if m.State != event.Interrupted {
		t.Errorf("meta.json says %s", m.State)
	}
	// Resume: take the run over and carry on after the stored point.
	if err := r.Lock(); err != nil {
		t.Fatal(err)
	}
	mm, _ := r.Measured()
	if mm.NextSeq != 1 || !mm.Indices[0] {
		t.Errorf("measured %+v", mm)
	}
	if err := r.SetState(event.Settling, "resumed"); err != nil {
		t.Fatal(err)
	}
	if err := r.AppendPoint(pt(1, 1, 20)); err != nil {
		t.Fatal(err)
	}
}

func BenchmarkAppendPoint(b *testing.B) {
	s, err := Open(b.TempDir())
	if err != nil {
		b.Fatal(err)
	}
	r, err := s.Create(CreateOpts{PlanFile: "p.toml", PlanData: []byte(testPlan)})
	if err != nil {
		b.Fatal(err)
	}
	defer r.Close()
	b.ResetTimer()
	start := time.Now()
	for i := 0; b.Loop(); i++ {
		if err := r.AppendPoint(pt(i, i, float64(i+1))); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(time.Since(start).Microseconds())/float64(b.N), "µs/point")
}
