package store_test

import (
	"os"
	"path/filepath"
	"reflect"
	"sync/atomic"
	"testing"
	"time"

	"rolloff/sweep/event"
	"rolloff/sweep/point"
	"rolloff/sweep/store"
	"rolloff/sweep/store/storetest"
)

// countReads counts the run summaries read from run directories.
func countReads(t *testing.T) *atomic.Int64 {
	var n atomic.Int64
	store.SetTestHookSummaryRead(func(string) { n.Add(1) })
	t.Cleanup(func() { store.SetTestHookSummaryRead(nil) })
	return &n
}

// sameRuns checks that the index lists what a full List of the store
// finds, field by field.
func sameRuns(t *testing.T, what string, x *store.Index, s *store.Store) {
	t.Helper()
	want, err := s.List()
	if err != nil {
		t.Fatal(err)
	}
	got := x.Runs()
	if len(got) != len(want) {
		t.Fatalf("%s: index lists %d runs, the store holds %d", what, len(got), len(want))
	}
	for i := range want {
		if !reflect.DeepEqual(got[i], want[i]) {
			t.Fatalf("%s: run %d: index %+v, store %+v", what, i, got[i], want[i])
		}
	}
}

// waitTick lets the directories' modification times leave the window in
// which the index does not trust them.
func waitTick() { time.Sleep(2100 * time.Millisecond) }

func TestIndex2000(t *testing.T) {
	const n = 2000
	dir := filepath.Join(t.TempDir(), "runs")
	ids, err := storetest.Generate(dir, storetest.Opts{Runs: n})
	if err != nil {
		t.Fatal(err)
	}
	s, err := store.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	reads := countReads(t)
	x, err := s.OpenIndex()
	if err != nil {
		t.Fatal(err)
	}
	if reads.Load() != n {
		t.Errorf("a new index read %d runs, want each of the %d once", reads.Load(), n)
	}
	sameRuns(t, "new index", x, s)
	runs := x.Runs()
	if runs[0].ID != ids[n-1] || runs[n-1].ID != ids[0] {
		t.Errorf("order: first %s last %s, want newest first", runs[0].ID, runs[n-1].ID)
	}
	// The generated figures come through: every 13th unit fails its mask.
	for _, r := range runs[:50] {
		var i int
		for k, id := range ids {
			if id == r.ID {
				i = k
			}
		}
		if storetest.State(i) != event.Done {
			continue
		}
		want := "pass"
		if !storetest.Pass(i) {
			want = "fail"
		}
		if got := r.Figures.Verdict(); got != want {
			t.Errorf("run %s: verdict %q, want %q", r.ID, got, want)
		}
		if r.Plan.Unit != storetest.Unit(i) || r.Points != 5 {
			t.Errorf("run %s: unit %q points %d", r.ID, r.Plan.Unit, r.Points)
		}
	}

	// Idle: once the runs just written are old enough for their
	// directories' times to be trusted, a refresh reads nothing.
	waitTick()
	if _, err := x.Refresh(); err != nil {
		t.Fatal(err)
	}
	reads.Store(0)
	for range 3 {
		if ch, err := x.Refresh(); err != nil || len(ch) != 0 {
			t.Fatalf("idle refresh: %d changed, %v", len(ch), err)
		}
	}
	if r := reads.Load(); r != 0 {
		t.Errorf("idle refreshes read %d runs", r)
	}

	// Another process creates a run, measures a point, finishes it.
	r, err := s.Create(store.CreateOpts{PlanFile: "p.toml", PlanData: []byte("name = \"x\"\n[frequencies]\nstart_hz = 100\nstop_hz = 1000\npoints_per_decade = 1\n[level]\nvrms = 0.1\n")})
	if err != nil {
		t.Fatal(err)
	}
	ch, err := x.Refresh()
	if err != nil || len(ch) != 1 || ch[0].ID != r.ID() || ch[0].State != event.Preparing {
		t.Fatalf("new run: %+v %v", ch, err)
	}
	if err := r.AppendPoint(point.Point{Seq: 0, Index: 0, FreqHz: 100, Time: time.Now()}); err != nil {
		t.Fatal(err)
	}
	if err := r.SetState(event.Done, "1 points"); err != nil {
		t.Fatal(err)
	}
	r.Close()
	ch, err = x.Refresh()
	if err != nil || len(ch) != 1 || ch[0].State != event.Done || ch[0].Points != 1 {
		t.Fatalf("finished run: %+v %v", ch, err)
	}
	sameRuns(t, "after a run", x, s)
	waitTick()
	if _, err := x.Refresh(); err != nil {
		t.Fatal(err)
	}
	if err := x.Save(); err != nil {
		t.Fatal(err)
	}

	// A restart reads the index file and no run.
	reads.Store(0)
	x2, err := s.OpenIndex()
	if err != nil {
		t.Fatal(err)
	}
	if reads.Load() != 0 {
		t.Errorf("reopening read %d runs", reads.Load())
	}
	sameRuns(t, "reopened", x2, s)

	// A crash after a change, before the index was saved: the changed
	// run is read again, and only it (with any run still too recent).
	waitTick()
	old := runs[10].ID
	ro, err := s.OpenRun(old)
	if err != nil {
		t.Fatal(err)
	}
	if err := ro.WriteFileAtomic(store.FileResult, []byte(`{"low_hz": 5, "high_hz": 7, "mask": {"pass": false, "worst_margin_db": -2}}`)); err != nil {
		t.Fatal(err)
	}
	ro.Close()
	reads.Store(0)
	x3, err := s.OpenIndex()
	if err != nil {
		t.Fatal(err)
	}
	if got := reads.Load(); got != 1 {
		t.Errorf("a stale index read %d runs, want 1", got)
	}
	if sum, ok := x3.Get(old); !ok || sum.Figures.Verdict() != "fail" || *sum.HighHz != 7 {
		t.Errorf("analysed again: %+v", sum)
	}
	sameRuns(t, "stale index", x3, s)

	// A damaged index file: what cannot be read is read from the runs.
	p := filepath.Join(dir, store.DirIndex, store.FileIndex)
	data, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(p, data[:len(data)/2], 0o644); err != nil {
		t.Fatal(err)
	}
	reads.Store(0)
	x4, err := s.OpenIndex()
	if err != nil {
		t.Fatal(err)
	}
	if got := reads.Load(); got < n/3 || got > n*2/3+2 {
		t.Errorf("half an index: %d runs read, want about %d", got, n/2)
	}
	sameRuns(t, "damaged index", x4, s)

	// A run removed by hand leaves the index at the next refresh.
	if err := os.RemoveAll(filepath.Join(dir, runs[20].ID)); err != nil {
		t.Fatal(err)
	}
	if _, err := x4.Refresh(); err != nil {
		t.Fatal(err)
	}
	if _, ok := x4.Get(runs[20].ID); ok || x4.Len() != n {
		t.Errorf("removed run still listed (%d runs)", x4.Len())
	}
}

// TestIndexLegacy: a store written before meta.json recorded the points
// and figures is indexed from its points and result files, once.
func TestIndexLegacy(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "runs")
	if _, err := storetest.Generate(dir, storetest.Opts{Runs: 300, Legacy: true}); err != nil {
		t.Fatal(err)
	}
	s, err := store.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	x, err := s.OpenIndex()
	if err != nil {
		t.Fatal(err)
	}
	sameRuns(t, "legacy", x, s)
	for _, r := range x.Runs() {
		if r.State == event.Done && (r.Points != 5 || r.Figures == nil || r.Figures.Mask == nil) {
			t.Fatalf("run %s: points %d figures %+v", r.ID, r.Points, r.Figures)
		}
	}
}

// TestIndexOwnerGone: a run whose owner stops without a word is listed
// interrupted at the next refresh.
func TestIndexOwnerGone(t *testing.T) {
	s, err := store.Open(filepath.Join(t.TempDir(), "runs"))
	if err != nil {
		t.Fatal(err)
	}
	r, err := s.Create(store.CreateOpts{PlanFile: "p.toml", PlanData: []byte("name = \"x\"\n[frequencies]\nstart_hz = 100\nstop_hz = 1000\npoints_per_decade = 1\n[level]\nvrms = 0.1\n")})
	if err != nil {
		t.Fatal(err)
	}
	x, err := s.OpenIndex()
	if err != nil {
		t.Fatal(err)
	}
	if sum, _ := x.Get(r.ID()); sum.State != event.Preparing {
		t.Fatalf("live run listed %s", sum.State)
	}
	r.Close() // the lock goes, meta.json stays as it was
	ch, err := x.Refresh()
	if err != nil || len(ch) != 1 || ch[0].State != event.Interrupted {
		t.Fatalf("owner gone: %+v %v", ch, err)
	}
}
