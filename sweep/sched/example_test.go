package sched_test

import (
	"context"
	"fmt"
	"log"
	"math"
	"os"
	"path/filepath"

	"github.com/rs/zerolog"

	"rolloff/configs"
	"rolloff/driver/bench"
	"rolloff/sweep/plan"
	"rolloff/sweep/sched"
	"rolloff/sweep/sched/finish"
	"rolloff/sweep/sched/onbench"
	"rolloff/sweep/store"
)

// A sweep on the simulated demo bench (the line-driver prototype), from a
// plan written in TOML, into a run store, with the usual finish step: the
// analysis and the exports into the run directory.
func ExampleStart() {
	ctx := context.Background()
	const planTOML = `
name = "passband check"
reference_hz = 1000
[frequencies]
spacing = "list"
frequencies_hz = [100, 1000, 10000]
[level]
vrms = 0.05
[ranging]
strategy = "remote"
`
	p, err := plan.DecodeTOML("passband.toml", []byte(planTOML))
	if err != nil {
		log.Fatal(err)
	}
	cfg, err := configs.LoadBench(configs.SimBench)
	if err != nil {
		log.Fatal(err)
	}
	b, err := bench.Open(ctx, cfg, zerolog.Nop())
	if err != nil {
		log.Fatal(err)
	}
	defer b.Close()

	dir, err := os.MkdirTemp("", "rolloff-example")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)
	st, err := store.Open(dir)
	if err != nil {
		log.Fatal(err)
	}
	run, err := st.Create(store.CreateOpts{PlanFile: "passband.toml", PlanData: []byte(planTOML), Plan: p, BenchFile: cfg.Raw})
	if err != nil {
		log.Fatal(err)
	}
	defer run.Close()

	opts := sched.Opts{Finish: finish.Analyze(p, run.Dir(), nil, nil)}
	if i := b.Sim.ConverterRange(); i >= 0 {
		opts.RangeKnown, opts.CurrentRange = true, i // the simulated switch's position
	}
	r := sched.Start(ctx, onbench.Instruments(b, zerolog.Nop()), p, run, opts)
	if err := r.Wait(); err != nil {
		log.Fatal(err)
	}
	pts, err := run.Points()
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(r.State(), len(pts), "points; output on:", b.Sim.OutputOn())
	for _, pt := range pts {
		// The simulator knows its DUT's exact response.
		near := math.Abs(pt.GainDB-b.Sim.DUTGainDB(pt.FreqHz)) < 0.05
		fmt.Printf("%5.0f Hz %+3.0f dB on range %s, within 0.05 dB of the DUT: %v %v\n", pt.FreqHz, pt.GainDB, pt.Range, near, pt.Flags)
	}
	if _, err := os.Stat(filepath.Join(run.Dir(), "response.csv")); err == nil {
		fmt.Println("response.csv written")
	}
	// Output:
	// done 4 points; output on: false
	//   100 Hz +20 dB on range 1 V, within 0.05 dB of the DUT: true []
	//  1000 Hz +20 dB on range 1 V, within 0.05 dB of the DUT: true []
	// 10000 Hz +20 dB on range 1 V, within 0.05 dB of the DUT: true []
	//  1000 Hz +20 dB on range 1 V, within 0.05 dB of the DUT: true [drift-check]
	// response.csv written
}
