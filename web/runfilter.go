package web

import (
	"net/http"
	"net/url"
	"sort"
	"strings"

	"rolloff/sweep/plan"
	"rolloff/sweep/queue"
)

// runFilter selects runs of the list by the unit and batch their plans
// name: GET /api/runs?unit=LD-0042&batch=proto-A. An empty field selects
// any value.
type runFilter struct{ unit, batch string }

// parseRunFilter reads the filter from a query; any other parameter, a
// parameter given twice or a value longer than a unit may be is refused.
func parseRunFilter(q url.Values) (runFilter, error) {
	var f runFilter
	keys := make([]string, 0, len(q))
	for k := range q {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		vs := q[k]
		if k != "unit" && k != "batch" {
			return f, badRequest(k, "query parameter %q: the run list is filtered by unit and batch only", clip(k))
		}
		if len(vs) != 1 {
			return f, badRequest(k, "query parameter %q given %d times: give it once", k, len(vs))
		}
		if len(vs[0]) > plan.MaxUnitBytes {
			return f, badRequest(k, "%s %q…: at most %d bytes", k, clip(vs[0]), plan.MaxUnitBytes)
		}
		if k == "unit" {
			f.unit = vs[0]
		} else {
			f.batch = vs[0]
		}
	}
	return f, nil
}

// keep reports whether in passes the filter.
func (f runFilter) keep(in queue.Info) bool {
	var unit, batch string
	if in.Plan != nil {
		unit, batch = in.Plan.Unit, in.Plan.Batch
	}
	return (f.unit == "" || strings.EqualFold(unit, f.unit)) && (f.batch == "" || strings.EqualFold(batch, f.batch))
}

// filter returns the runs of list that pass, in order.
func (f runFilter) filter(list []queue.Info) []queue.Info {
	if f == (runFilter{}) {
		return list
	}
	out := make([]queue.Info, 0, len(list))
	for _, in := range list {
		if f.keep(in) {
			out = append(out, in)
		}
	}
	return out
}

// listRuns answers GET /api/runs: every run, newest first, or those of a
// unit and/or batch.
func (s *Server) listRuns(w http.ResponseWriter, r *http.Request) {
	f, err := parseRunFilter(r.URL.Query())
	if err != nil {
		s.fail(w, err)
		return
	}
	writeJSON(w, http.StatusOK, map[string]any{"runs": f.filter(s.queue.List())})
}
