package store_test

import (
	"fmt"
	"os"
	"path/filepath"
	"time"

	"rolloff/sweep/event"
	"rolloff/sweep/point"
	"rolloff/sweep/store"
)

func Example() {
	dir, _ := os.MkdirTemp("", "runs")
	defer os.RemoveAll(dir)
	s, err := store.Open(dir)
	if err != nil {
		fmt.Println(err)
		return
	}
	plan := []byte("name = \"line driver\"\n[frequencies]\nstart_hz = 10\nstop_hz = 100000\n[level]\nvrms = 0.5\n")
	r, err := s.Create(store.CreateOpts{PlanFile: "demo-plan.toml", PlanData: plan,
		Now: time.Date(2026, 12, 1, 18, 45, 12, 0, time.UTC)})
	if err != nil {
		fmt.Println(err)
		return
	}
	defer r.Close()
	fmt.Println(r.ID())
	// A point is on disk when AppendPoint returns.
	err = r.AppendPoint(point.Point{Seq: r.NextSeq(), Index: 0, FreqHz: 10, VinVrms: 0.5, VoutVrms: 0.9, GainDB: 5.1})
	fmt.Println(err)
	fmt.Println(r.AppendPoint(point.Point{Seq: r.NextSeq(), Index: 0, FreqHz: 10}))
	r.SetState(event.Done, "")
	list, _ := s.List()
	fmt.Println(list[0].State, list[0].Points, "of", list[0].PlanPoints)
	ents, _ := os.ReadDir(filepath.Join(dir, r.ID()))
	for _, e := range ents {
		fmt.Print(e.Name(), " ")
	}
	fmt.Println()
	// Output:
	// 20261201-184512-line-driver
	// <nil>
	// store: run 20261201-184512-line-driver: plan index 0 (10 Hz, seq 0): store: point already recorded
	// done 1 of 41
	// events.jsonl lock meta.json plan.toml points.jsonl
}
