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
	for _, bad := range []string{"colour=red", "state=sleeping", "unit=a&unit=b", "batch=" + string(make([]byte, 65)),
		"limit=0", "limit=1001", "offset=-1", "from=yesterday", "from=2026-12-02&to=2026-12-01"} {
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
	res, data = d.do("GET", "/api/runs?state=sleeping", nil)
	want(t, "unknown state", res, data, 400, "state")
	res, data = d.do("GET", "/api/runs?colour=red", nil)
	want(t, "unknown filter", res, data, 400, "colour")
	// The daemon serves the run's report.
	res, data = d.do("GET", "/api/runs/"+id+"/files/report.pdf", nil)
	if res.StatusCode != 200 || len(data) < 5 || string(data[:5]) != "%PDF-" {
		t.Errorf("report.pdf: %d %.20q", res.StatusCode, data)
	}
}

func TestRunFilterStateTime(t *testing.T) {
	day := time.Date(2026, 12, 1, 0, 0, 0, 0, time.UTC)
	list := []queue.Info{
		{ID: "a", State: event.Done, Created: day.Add(30 * time.Hour)},
		{ID: "b", State: event.Failed, Created: day.Add(23 * time.Hour)},
		{ID: "c", State: event.Done, Created: day},
		{ID: "d", State: event.Interrupted, Created: day.Add(-time.Second)},
	}
	for _, c := range []struct{ query, want string }{
		{"state=done", "ac"}, {"state=done,failed", "abc"}, {"state=interrupted", "d"},
		{"from=2026-12-01", "abc"}, {"to=2026-12-01", "bcd"}, {"from=2026-12-01&to=2026-12-01", "bc"},
		{"from=2026-12-01T23:00:00Z", "ab"}, {"to=2026-12-01T23:00:00Z", "cd"},
		{"from=2026-12-01&state=done", "ac"},
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
}
