// Package storetest fills a run store with many synthetic finished runs,
// quickly, for the tests and benchmarks of whatever lists a store: each
// run has a meta.json as the store writes it, a small points.jsonl, an
// empty events.jsonl, a plan.toml and, for a done run, a result.json with
// corners and a mask verdict. Nothing is fsynced; the runs are not
// measurements.
package storetest

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"sync"
	"time"

	"rolloff/sweep/event"
	"rolloff/sweep/store"
)

// Opts describe the generated runs.
//
// With Legacy set, meta.json is written as an earlier version of the
// store wrote it: without the number of points and the figures.
type Opts struct {
	// Runs is how many runs to write.
	Runs int
	// Start is the creation time of the first run (default 2026-01-05
	// 06:00 UTC); each next run is Step later (default 7 minutes).
	Start time.Time
	Step  time.Duration
	// Points is the number of points of each run (default 5).
	Points int
	// UnitsPerBatch is how many units make one batch (default 200: a
	// day of a line).
	UnitsPerBatch int
	// Workers write in parallel (default 4).
	Workers int
	Legacy  bool
}

// Unit is the serial number of generated run i.
func Unit(i int) string { return fmt.Sprintf("LD-%06d", i) }

// Batch is the batch of generated run i.
func Batch(i, perBatch int) string {
	if perBatch <= 0 {
		perBatch = 200
	}
	return fmt.Sprintf("B%04d", i/perBatch)
}

// State is the state of generated run i: mostly done, every 37th
// failed, every 101st aborted.
func State(i int) event.State {
	switch {
	case i%101 == 100:
		return event.Aborted
	case i%37 == 36:
		return event.Failed
	}
	return event.Done
}

// Pass is the mask verdict of generated done run i: every 13th fails.
func Pass(i int) bool { return i%13 != 12 }

// ID is the id of generated run i given its creation time.
func ID(i int, created time.Time) string {
	return created.UTC().Format("20060102-150405") + "-unit-" + strconv.Itoa(i)
}

const planTOML = "name = \"line test\"\n[frequencies]\nspacing = \"log\"\nstart_hz = 20\nstop_hz = 100000\npoints_per_decade = 1\n[level]\nvrms = 0.05\n"

// Generate writes o.Runs runs into the store directory dir and returns
// their ids in creation order.
func Generate(dir string, o Opts) ([]string, error) {
	if o.Start.IsZero() {
		o.Start = time.Date(2026, 1, 5, 6, 0, 0, 0, time.UTC)
	}
	if o.Step <= 0 {
		o.Step = 7 * time.Minute
	}
	if o.Points <= 0 {
		o.Points = 5
	}
	if o.Workers <= 0 {
		o.Workers = 4
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, err
	}
	ids := make([]string, o.Runs)
	var wg sync.WaitGroup
	errs := make(chan error, o.Workers)
	for w := range o.Workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := w; i < o.Runs; i += o.Workers {
				id, err := one(dir, i, o)
				if err != nil {
					errs <- err
					return
				}
				ids[i] = id
			}
		}()
	}
	wg.Wait()
	close(errs)
	if err := <-errs; err != nil {
		return nil, err
	}
	return ids, nil
}

func one(dir string, i int, o Opts) (string, error) {
	created := o.Start.Add(time.Duration(i) * o.Step).UTC()
	id := ID(i, created)
	rd := filepath.Join(dir, id)
	if err := os.Mkdir(rd, 0o755); err != nil {
		return "", err
	}
	st := State(i)
	n := o.Points
	if st != event.Done {
		n = o.Points / 2
	}
	pts := make([]byte, 0, 256*n)
	for k := range n {
		f := 20 * float64(k+1)
		pts = fmt.Appendf(pts, `{"seq":%d,"index":%d,"freq_hz":%g,"vin_vrms":0.05,"vout_vrms":0.5,"gain_db":20,"dc_v":0.5,"range_index":3,"range":"1 V","range_fs_vrms":1,"fraction_fs":0.5,"readings":4,"std_rel":1e-4,"conv_acc_rel":1e-3,"dc_acc_v":1e-4,"settle_s":0.1,"time":%q}`+"\n",
			k, k, f, created.Add(time.Duration(k)*time.Second).Format(time.RFC3339Nano))
	}
	points := n
	meta := store.Meta{
		Format: store.MetaFormat, ID: id, Name: "line test", Created: created, Updated: created.Add(3 * time.Minute),
		State: st, PlanFile: store.FilePlanTOML, PlanSource: "line.toml",
		Plan: store.PlanSummary{Spacing: "log", StartHz: 20, StopHz: 100000, Points: o.Points, Vrms: 0.05,
			Strategy: "auto", ReferenceHz: 1000, Unit: Unit(i), Batch: Batch(i, o.UnitsPerBatch)},
	}
	meta.PointsStored = &points
	files := map[string][]byte{store.FilePlanTOML: []byte(planTOML), store.FilePoints: pts, store.FileEvents: nil}
	if st == event.Done {
		low, high := 18.0+float64(i%7)*0.1, 52000.0+float64(i%11)*100
		margin := 0.4 + float64(i%5)*0.1
		if !Pass(i) {
			margin = -0.3
		}
		res := map[string]any{"low_hz": low, "high_hz": high, "low_u_hz": 0.2, "high_u_hz": 300, "peaking_db": 0.05,
			"mask": map[string]any{"name": "line", "relative": true, "pass": Pass(i), "checked": n, "failed": 0,
				"worst_margin_db": margin, "worst_hz": high, "worst_limit": "lower"}}
		rb, err := json.Marshal(res)
		if err != nil {
			return "", err
		}
		files[store.FileResult] = rb
		meta.Figures = store.FiguresOf(rb)
	}
	if o.Legacy {
		meta.PointsStored, meta.Figures = nil, nil
	}
	mb, err := json.MarshalIndent(meta, "", "  ")
	if err != nil {
		return "", err
	}
	files[store.FileMeta] = append(mb, '\n')
	for name, data := range files {
		if err := os.WriteFile(filepath.Join(rd, name), data, 0o644); err != nil {
			return "", err
		}
	}
	return id, nil
}
