package web

import (
	"net/http"
	"net/url"
	"sort"
	"strconv"
	"strings"
	"time"

	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/queue"
)

// Run-list paging: a page holds DefaultRunPage runs unless the request
// asks for another number, at most MaxRunPage.
const (
	DefaultRunPage = 100
	MaxRunPage     = 1000
)

// runFilter selects runs of the list: GET /api/runs?unit=LD-0042&
// batch=proto-A&state=done,failed&from=2026-12-01&to=2026-12-02&limit=50&
// offset=100. unit and batch match the plan's, ignoring case; state is a
// comma-separated list of run states; from and to bound the creation time
// (a date, YYYY-MM-DD in UTC, or an RFC 3339 time; from includes, to
// excludes, and a date given as to includes that whole day). An empty
// field selects any value.
type runFilter struct {
	unit, batch string
	states      map[event.State]bool
	from, to    time.Time
	limit       int
	offset      int
}

// runStates are the states a filter may name.
var runStates = []event.State{event.Queued, event.Preparing, event.Settling, event.Reading, event.Paused,
	event.WaitingOperator, event.Done, event.Aborted, event.Failed, event.Interrupted}

// parseRunFilter reads the filter from a query; any other parameter, a
// parameter given twice or a value out of range is refused.
func parseRunFilter(q url.Values) (runFilter, error) {
	f := runFilter{limit: DefaultRunPage}
	keys := make([]string, 0, len(q))
	for k := range q {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		vs := q[k]
		switch k {
		case "unit", "batch", "state", "from", "to", "limit", "offset":
		default:
			return f, badRequest(k, "query parameter %q: the run list is filtered by unit, batch, state, from and to, and paged by limit and offset", clip(k))
		}
		if len(vs) != 1 {
			return f, badRequest(k, "query parameter %q given %d times: give it once", k, len(vs))
		}
		v := vs[0]
		if len(v) > plan.MaxUnitBytes && k != "state" {
			return f, badRequest(k, "%s %q…: at most %d bytes", k, clip(v), plan.MaxUnitBytes)
		}
		var err error
		switch k {
		case "unit":
			f.unit = v
		case "batch":
			f.batch = v
		case "state":
			f.states, err = parseStates(v)
		case "from":
			f.from, err = parseWhen(k, v, false)
		case "to":
			f.to, err = parseWhen(k, v, true)
		case "limit":
			f.limit, err = parseCount(k, v, 1, MaxRunPage)
		case "offset":
			f.offset, err = parseCount(k, v, 0, 1<<31-1)
		}
		if err != nil {
			return f, err
		}
	}
	if !f.from.IsZero() && !f.to.IsZero() && !f.to.After(f.from) {
		return f, badRequest("to", "to %s is not after from %s", f.to.Format(time.RFC3339), f.from.Format(time.RFC3339))
	}
	return f, nil
}

func parseStates(v string) (map[event.State]bool, error) {
	out := map[event.State]bool{}
	for _, s := range strings.Split(v, ",") {
		known := false
		for _, st := range runStates {
			if event.State(s) == st {
				known = true
			}
		}
		if !known {
			names := make([]string, len(runStates))
			for i, st := range runStates {
				names[i] = string(st)
			}
			return nil, badRequest("state", "state %q: want a comma-separated list of %s", clip(s), strings.Join(names, ", "))
		}
		out[event.State(s)] = true
	}
	return out, nil
}

// parseWhen reads a date (YYYY-MM-DD, UTC) or an RFC 3339 time; a date
// given as the end of a range is the end of that day.
func parseWhen(k, v string, end bool) (time.Time, error) {
	if d, err := time.Parse("2006-01-02", v); err == nil {
		if end {
			d = d.AddDate(0, 0, 1)
		}
		return d, nil
	}
	t, err := time.Parse(time.RFC3339Nano, v)
	if err != nil {
		return time.Time{}, badRequest(k, "%s %q: want a date (2026-12-01) or an RFC 3339 time (2026-12-01T08:00:00Z)", k, clip(v))
	}
	return t, nil
}

func parseCount(k, v string, lo, hi int) (int, error) {
	n, err := strconv.Atoi(v)
	if err != nil || n < lo || n > hi {
		return 0, badRequest(k, "%s %q: want a whole number from %d to %d", k, clip(v), lo, hi)
	}
	return n, nil
}

// keep reports whether in passes the filter (paging aside).
func (f runFilter) keep(in *queue.Info) bool {
	if f.states != nil && !f.states[in.State] {
		return false
	}
	if !f.from.IsZero() && in.Created.Before(f.from) || !f.to.IsZero() && !in.Created.Before(f.to) {
		return false
	}
	if f.unit == "" && f.batch == "" {
		return true
	}
	var unit, batch string
	if in.Plan != nil {
		unit, batch = in.Plan.Unit, in.Plan.Batch
	}
	return (f.unit == "" || strings.EqualFold(unit, f.unit)) && (f.batch == "" || strings.EqualFold(batch, f.batch))
}

// all reports whether the filter selects every run.
func (f runFilter) all() bool {
	return f.unit == "" && f.batch == "" && f.states == nil && f.from.IsZero() && f.to.IsZero()
}

// filter returns the runs of list that pass, in order (paging aside).
func (f runFilter) filter(list []queue.Info) []queue.Info {
	out := make([]queue.Info, 0, len(list))
	for i := range list {
		if f.keep(&list[i]) {
			out = append(out, list[i])
		}
	}
	return out
}

// runPage is the body of GET /api/runs.
type runPage struct {
	Runs []queue.Info `json:"runs"`
	// Total is how many runs pass the filter; Offset and Limit are the
	// page's; NextOffset, when there are more, the offset of the next.
	Total      int  `json:"total"`
	Offset     int  `json:"offset"`
	Limit      int  `json:"limit"`
	NextOffset *int `json:"next_offset,omitempty"`
}

// listRuns answers GET /api/runs: one page of the runs, newest first,
// those of a unit, batch, state or time range when asked.
func (s *Server) listRuns(w http.ResponseWriter, r *http.Request) {
	f, err := parseRunFilter(r.URL.Query())
	if err != nil {
		s.fail(w, err)
		return
	}
	keep := f.keep
	if f.all() {
		keep = nil
	}
	runs, total := s.queue.Page(keep, f.offset, f.limit)
	p := runPage{Runs: runs, Total: total, Offset: f.offset, Limit: f.limit}
	if next := f.offset + len(runs); next < total {
		p.NextOffset = &next
	}
	writeJSON(w, http.StatusOK, p)
}
