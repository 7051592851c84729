package web

import (
	"fmt"
	"testing"
	"time"

	"rolloff/sweep/event"
	"rolloff/sweep/point"
	"rolloff/sweep/store"
	"rolloff/sweep/store/storetest"
)

type listPage struct {
	Runs []struct {
		ID      string
		State   event.State
		Created string
		Plan    struct{ Unit, Batch string }
		Result  *struct {
			HighHz *float64 `json:"high_hz"`
			Mask   *struct {
				Pass          bool
				WorstMarginDB *float64 `json:"worst_margin_db"`
			}
		}
	}
	Total      int
	Offset     int
	Limit      int
	NextOffset *int `json:"next_offset"`
}

// TestRunListPaged: the daemon on a store of 2,000 finished runs lists
// them a page at a time, newest first, filtered by batch, unit, state and
// date, with each run's verdict as the store recorded it.
func TestRunListPaged(t *testing.T) {
	const n = 2000
	dir := t.TempDir()
	ids, err := storetest.Generate(dir, storetest.Opts{Runs: n})
	if err != nil {
		t.Fatal(err)
	}
	d := startDemo(t, demoOpts{dir: dir})
	get := func(q string) listPage {
		t.Helper()
		res, data := d.do("GET", "/api/runs"+q, nil)
		want(t, q, res, data, 200, "")
		return decode[listPage](t, data)
	}
	p := get("")
	if p.Total != n || len(p.Runs) != DefaultRunPage || p.NextOffset == nil || *p.NextOffset != DefaultRunPage {
		t.Fatalf("first page: total %d, %d runs, next %v", p.Total, len(p.Runs), p.NextOffset)
	}
	for i, r := range p.Runs {
		if r.ID != ids[n-1-i] {
			t.Fatalf("run %d is %s, want %s (newest first)", i, r.ID, ids[n-1-i])
		}
	}
	// Paging through a batch finds each of its units once.
	seen := map[string]bool{}
	for off := 0; ; {
		p := get(fmt.Sprintf("?batch=%s&limit=64&offset=%d", storetest.Batch(450, 0), off))
		if p.Total != 200 {
			t.Fatalf("batch total %d, want 200", p.Total)
		}
		for _, r := range p.Runs {
			if seen[r.ID] || r.Plan.Batch != storetest.Batch(450, 0) {
				t.Fatalf("run %s (batch %s) listed twice or in the wrong batch", r.ID, r.Plan.Batch)
			}
			seen[r.ID] = true
		}
		if p.NextOffset == nil {
			break
		}
		off = *p.NextOffset
	}
	if len(seen) != 200 {
		t.Errorf("paged through %d runs of the batch, want 200", len(seen))
	}
	// One unit, with its verdict: unit 467 fails its mask (every 13th).
	for _, i := range []int{467, 466} {
		p = get("?unit=" + storetest.Unit(i))
		if p.Total != 1 || p.Runs[0].Result == nil || p.Runs[0].Result.Mask == nil {
			t.Fatalf("unit %d: %+v", i, p)
		}
		if got := p.Runs[0].Result.Mask.Pass; got != storetest.Pass(i) {
			t.Errorf("unit %d: pass %v, want %v", i, got, storetest.Pass(i))
		}
	}
	// States and dates.
	failed := 0
	for i := range n {
		if storetest.State(i) == event.Failed {
			failed++
		}
	}
	if p = get("?state=failed&limit=1"); p.Total != failed {
		t.Errorf("failed runs: %d, want %d", p.Total, failed)
	}
	// The runs are 7 minutes apart from 2026-01-05 06:00 UTC: first and
	// last are the indices of the first runs of 2026-01-06 and 2026-01-07.
	first := (24*60 - 6*60 + 7 - 1) / 7
	last := (48*60 - 6*60 + 7 - 1) / 7
	if p = get("?from=2026-01-06&to=2026-01-06&limit=1000"); p.Total != last-first {
		t.Errorf("runs of 2026-01-06: %d, want %d", p.Total, last-first)
	}
}

// TestRunOfAnotherProcess: a run written into the daemon's store by
// another process (here another store handle, whose lock the daemon
// cannot take) is found, followed while it is written and listed done
// with its points, without the daemon reading the store whole.
func TestRunOfAnotherProcess(t *testing.T) {
	dir := t.TempDir()
	if _, err := storetest.Generate(dir, storetest.Opts{Runs: 300}); err != nil {
		t.Fatal(err)
	}
	d := startDemo(t, demoOpts{dir: dir})
	other, err := store.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	r, err := other.Create(store.CreateOpts{PlanFile: "cli.toml", PlanData: []byte("name = \"cli run\"\nunit = \"LD-0900\"\nbatch = \"cli\"\n[frequencies]\nstart_hz = 100\nstop_hz = 1000\npoints_per_decade = 1\n[level]\nvrms = 0.1\n")})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if err := r.SetState(event.Reading, ""); err != nil {
		t.Fatal(err)
	}
	find := func(st event.State, points int) {
		t.Helper()
		deadline := time.Now().Add(20 * time.Second)
		for {
			in, err := d.srv.Queue().Get(r.ID())
			if err == nil && in.State == st && in.Points == points {
				if st == event.Reading && !in.External {
					t.Errorf("a run of another process is not marked external")
				}
				return
			}
			if time.Now().After(deadline) {
				t.Fatalf("run of another process: %+v (%v), want %s with %d points", in, err, st, points)
			}
			time.Sleep(50 * time.Millisecond)
		}
	}
	find(event.Reading, 0)
	for i, hz := range []float64{100, 1000} {
		if err := r.AppendPoint(point.Point{Seq: i, Index: i, FreqHz: hz, GainDB: 1}); err != nil {
			t.Fatal(err)
		}
		if err := r.AppendEvent(event.Event{Type: event.TypePoint, Point: &point.Point{Seq: i, Index: i, FreqHz: hz}}); err != nil {
			t.Fatal(err)
		}
	}
	if err := r.SetState(event.Done, "2 points"); err != nil {
		t.Fatal(err)
	}
	find(event.Done, 2)
	res, data := d.do("GET", "/api/runs?unit=LD-0900", nil)
	want(t, "list", res, data, 200, "")
	if p := decode[listPage](t, data); p.Total != 1 || p.Runs[0].State != event.Done {
		t.Errorf("listed %+v", p)
	}
}
