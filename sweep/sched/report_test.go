package sched_test

import (
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"testing"

	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/sched"
)

// TestSimReportWithPlanMask runs a plan carrying a limit mask: the finish
// step checks the response against it (the result event has the verdict)
// and writes report.pdf beside the exports.
func TestSimReportWithPlanMask(t *testing.T) {
	cfg := simConfig(t, 100)
	p := shortPlan(plan.RangeRemote)
	p.Unit, p.Batch = "LD-0007", "proto-A"
	// The demo DUT is flat within ±0.5 dB of its 1 kHz gain from 100 Hz
	// to 10 kHz (corners at 8 Hz and 95 kHz).
	p.Mask = plan.Mask{Name: "passband", Relative: true,
		Upper: [][]float64{{100, 0.5}, {10000, 0.5}}, Lower: [][]float64{{100, -0.5}, {10000, -0.5}}}
	res := sweepOn(t, context.Background(), cfg, p, sched.Opts{}, nil)
	if res.err != nil {
		t.Fatal(res.err)
	}
	evs, err := res.run.Events()
	if err != nil {
		t.Fatal(err)
	}
	var verdict struct {
		Mask *struct {
			Name    string `json:"name"`
			Pass    bool   `json:"pass"`
			Checked int    `json:"checked"`
		} `json:"mask"`
	}
	for _, e := range evs {
		if e.Type == event.TypeResult {
			if err := json.Unmarshal(e.Result, &verdict); err != nil {
				t.Fatal(err)
			}
		}
	}
	if verdict.Mask == nil || verdict.Mask.Name != "passband" || !verdict.Mask.Pass || verdict.Mask.Checked < 5 {
		t.Fatalf("mask verdict %+v", verdict.Mask)
	}
	if m := res.run.Meta(); m.Plan.Unit != "LD-0007" || m.Plan.Batch != "proto-A" {
		t.Errorf("meta plan summary: unit %q batch %q", m.Plan.Unit, m.Plan.Batch)
	}
	b, err := os.ReadFile(filepath.Join(res.run.Dir(), "report.pdf"))
	if err != nil || len(b) < 1000 || string(b[:5]) != "%PDF-" {
		t.Fatalf("report.pdf: %v (%d bytes)", err, len(b))
	}
}
