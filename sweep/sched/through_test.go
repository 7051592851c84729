package sched

import (
	"errors"
	"testing"
	"time"

	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/store"
)

func TestLoadThrough(t *testing.T) {
	st, err := store.Open(t.TempDir())
	if err != nil {
		t.Fatal(err)
	}
	planData := []byte("name = \"through\"\n[frequencies]\nstart_hz = 10\nstop_hz = 1000\n[level]\nvrms = 0.1\n")
	mk := func(name string, final event.State, n int) string {
		r, err := st.Create(store.CreateOpts{Name: name, PlanFile: "p.toml", PlanData: planData, Now: time.Date(2026, 1, 2, 3, 4, len(name), 0, time.UTC)})
		if err != nil {
			t.Fatal(err)
		}
		defer r.Close()
		for i := 0; i < n; i++ {
			f := 10 * float64(i+1)
			if err := r.AppendPoint(point.Point{Seq: i, Index: i, FreqHz: f, VinVrms: 0.1, VoutVrms: 0.1, Time: time.Now()}); err != nil {
				t.Fatal(err)
			}
		}
		if err := r.SetState(final, ""); err != nil {
			t.Fatal(err)
		}
		return r.ID()
	}
	done := mk("bypass", event.Done, 5)
	aborted := mk("bypass-aborted", event.Aborted, 5)

	p := &plan.Plan{}
	if pts, err := LoadThrough(st, p); err != nil || pts != nil {
		t.Fatalf("no through run named: %v, %v", pts, err)
	}
	p.Normalize.ThroughRun = done
	pts, err := LoadThrough(st, p)
	if err != nil || len(pts) != 5 {
		t.Fatalf("done through run: %d points, %v", len(pts), err)
	}
	for _, id := range []string{aborted, "20260101-000000-missing", "../escape"} {
		p.Normalize.ThroughRun = id
		_, err := LoadThrough(st, p)
		var fe *plan.FieldError
		if !errors.As(err, &fe) || fe.Field != "normalize.through_run" {
			t.Errorf("through run %q: error %v, want a FieldError naming normalize.through_run", id, err)
		}
	}
}
