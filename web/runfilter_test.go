package web

import (
	"net/url"
	"testing"
	"time"

	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/queue"
)

func TestRunFilter(t *testing.T) {
	list := []queue.Info{
		{ID: "a", Plan: &plan.Plan{Unit: "LD-0001", Batch: "B1"}},
		{ID: "b", Plan: &plan.Plan{Unit: "LD-0002", Batch: "B1"}},
		{ID: "c", Plan: &plan.Plan{Unit: "LD-0001", Batch: "B2"}},
		{ID: "d"}, // no plan known
	}
	for _, c := range []struct {
		query string
		want  string
	}{
		{"", "abcd"}, {"unit=LD-0001", "ac"}, {"batch=B1", "ab"}, {"unit=ld-0001&batch=b2", "c"}, {"unit=LD-9", ""},
	} {
		q, _ := url.ParseQuery(c.query)
		f, err := parseRunFilter(q)
		if err != nil {
			t.Fatalf("%q: %v", c.query, err)
		}
		got := ""
		for _, in := range f.filter(list) {
			got += in.ID
		}
		if got != c.want {
			t.Errorf("%q: got runs %q, want %q", c.query, got, c.want)
		}
	}
	for _, bad := range []string{"state=done", "unit=a&unit=b", "batch=" + string(make([]byte, 65))} {
		q, _ := url.ParseQuery(bad)
		if _, err := parseRunFilter(q); err == nil {
			t.Errorf("%q accepted", bad)
		}
	}
}

func TestRunListFilter(t *testing.T) {
	d := startDemo(t, demoOpts{})
	p := smallPlan("fixed")
	p["unit"], p["batch"] = "LD-0042", "proto-A"
	res, data := d.do("POST", "/api/runs", p)
	want(t, "submit", res, data, 201, "")
	id := decode[map[string]string](t, data)["id"]
	d.waitState(t, id, true, 40*time.Second, event.Done)
	for q, n := range map[string]int{"": 1, "?unit=LD-0042": 1, "?batch=proto-A&unit=LD-0042": 1, "?unit=LD-0043": 0} {
		res, data := d.do("GET", "/api/runs"+q, nil)
		want(t, "list "+q, res, data, 200, "")
		if runs := decode[struct{ Runs []map[string]any }](t, data).Runs; len(runs) != n {
			t.Errorf("%q: %d runs, want %d", q, len(runs), n)
		}
	}
	res, data = d.do("GET", "/api/runs?state=done", nil)
	want(t, "unknown filter", res, data, 400, "state")
	// The daemon serves the run's report.
	res, data = d.do("GET", "/api/runs/"+id+"/files/report.pdf", nil)
	if res.StatusCode != 200 || len(data) < 5 || string(data[:5]) != "%PDF-" {
		t.Errorf("report.pdf: %d %.20q", res.StatusCode, data)
	}
}
