package web

import "testing"

// TestSubmitRefusesBenchMismatch: a plan naming a range the converter
// does not have is answered 400 naming ranging.start, on estimate and on
// submit, and nothing reaches the simulated instruments.
func TestSubmitRefusesBenchMismatch(t *testing.T) {
	d := startDemo(t, demoOpts{})
	before := map[string]int{}
	for _, role := range []string{"generator", "voltmeter", "switch"} {
		before[role] = len(d.b.Sim.Received(role))
	}
	bad := smallPlan("remote")
	bad["ranging"] = map[string]any{"strategy": "remote", "start": "7 V"}
	res, data := d.do("POST", "/api/plan/estimate", bad)
	want(t, "estimate with no such range", res, data, 400, "ranging.start")
	res, data = d.do("POST", "/api/runs", bad)
	want(t, "run with no such range", res, data, 400, "ranging.start")
	for role, n := range before {
		if got := d.b.Sim.Received(role); len(got) != n {
			t.Errorf("%s received %q after a refused plan", role, got[n:])
		}
	}
	ok := smallPlan("remote")
	res, data = d.do("POST", "/api/plan/estimate", ok)
	want(t, "a plan the bench can run", res, data, 200, "")
}
