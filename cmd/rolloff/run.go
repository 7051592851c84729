package main

import (
	"bufio"
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/mattn/go-isatty"
	"github.com/schollz/progressbar/v3"

	"rolloff/driver/bench"
	"rolloff/sweep/analysis"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/sched"
	"rolloff/sweep/sched/finish"
	"rolloff/sweep/sched/onbench"
	"rolloff/sweep/store"
)

func init() {
	register(&command{
		name:    "run",
		summary: "measure a plan on a bench, headless, into a run directory",
		run:     runRunCmd,
	})
}

func runRunCmd(ctx context.Context, env *cmdEnv, args []string) error {
	fs := flag.NewFlagSet("rolloff run", flag.ContinueOnError)
	fs.SetOutput(env.stderr)
	benchPath := fs.String("bench", "", "bench file (required)")
	out := fs.String("out", "runs", "run store directory; the run gets a directory inside it")
	bf := addBrokerFlags(fs, true)
	fs.Usage = func() {
		fmt.Fprintf(env.stderr, "usage: rolloff run PLAN --bench BENCH [--out DIR]\n\n")
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 1 || *benchPath == "" {
		fs.Usage()
		return &exitError{code: 2, err: errors.New("want one PLAN and --bench BENCH")}
	}
	planData, err := os.ReadFile(pos[0])
	if err != nil {
		return fmt.Errorf("plan: %w", err)
	}
	p, err := decodePlanFile(pos[0], planData)
	if err != nil {
		return err
	}
	cfg, err := bench.Load(*benchPath)
	if err != nil {
		return err
	}
	if err := onbench.CheckPlan(cfg, p); err != nil {
		return &exitError{code: 2, err: err} // refused before any instrument is opened
	}
	st, err := store.Open(*out)
	if err != nil {
		return fmt.Errorf("--out %s: %w", *out, err)
	}
	st.SetLogger(env.log)
	stopPub, err := bf.startPublisher(env, st.Dir(), *benchPath, -1)
	if err != nil {
		return err
	}
	defer stopPub(5 * time.Second)
	through, err := sched.LoadThrough(st, p)
	if err != nil {
		return fmt.Errorf("%s: %w", pos[0], err)
	}
	b, err := onbench.Open(ctx, cfg, env.log)
	if err != nil {
		return fmt.Errorf("--bench %s: %w", *benchPath, err)
	}
	defer b.Close()
	run, err := st.Create(store.CreateOpts{PlanFile: filepath.Base(pos[0]), PlanData: planData, Plan: p, BenchFile: cfg.Raw, Identities: b.Identities})
	if err != nil {
		return err
	}
	defer run.Close()
	opts := sched.Opts{Operator: terminalOperator(env), Finish: finish.Analyze(p, run.Dir(), through, finish.SpecOf(cfg, p))}
	if b.Sim != nil {
		opts.Operator = simOperator(env, b, opts.Operator)
	}
	return sweepAndReport(ctx, env, b, p, run, opts, nil)
}

// simOperator is the operator of a simulated bench: it turns the
// simulated converter's range switch (sim.SelectRange), after asking on
// the terminal when stdin is one, at once otherwise.
func simOperator(env *cmdEnv, b *bench.Bench, ask sched.Operator) sched.Operator {
	interactive := false
	if f, ok := env.stdin.(*os.File); ok {
		interactive = isatty.IsTerminal(f.Fd())
	}
	return func(ctx context.Context, p event.Prompt) (int, error) {
		i := p.RangeIndex
		if interactive && ask != nil {
			var err error
			if i, err = ask(ctx, p); err != nil {
				return 0, err
			}
		} else {
			env.log.Info().Int("prompt", p.ID).Str("range", p.Range).Msg("simulated operator turns the range switch")
		}
		if err := b.Sim.SelectRange(i); err != nil {
			return 0, fmt.Errorf("simulated range switch: %w", err)
		}
		return i, nil
	}
}

// decodePlanFile decodes a plan file by its extension.
func decodePlanFile(name string, data []byte) (*plan.Plan, error) {
	if strings.EqualFold(filepath.Ext(name), ".json") {
		return plan.DecodeJSON(name, data)
	}
	return plan.DecodeTOML(name, data)
}

// sweepAndReport runs the sweep on bench b into run, shows its progress,
// and prints the run directory and the corners. afterCorners, when set,
// prints more about the corners (the demo's comparison).
func sweepAndReport(ctx context.Context, env *cmdEnv, b *bench.Bench, p *plan.Plan, run *store.Run, opts sched.Opts, afterCorners func(res map[string]any) error) error {
	inst := onbench.Instruments(b, env.log)
	if b.Sim != nil && !opts.RangeKnown {
		if i := b.Sim.ConverterRange(); i >= 0 {
			opts.RangeKnown, opts.CurrentRange = true, i
		}
	}
	if opts.Resume {
		if pts, err := run.Points(); err == nil && len(pts) > 0 && !opts.RangeKnown {
			// The range switch is where the last point left it.
			opts.RangeKnown, opts.CurrentRange = true, pts[len(pts)-1].RangeIndex
		}
	}
	_ = b.SetRunID(run.ID()) // named to a controller refused by the bench lock
	start := time.Now()
	r := sched.Start(ctx, inst, p, run, opts)
	events, cancel := r.Subscribe()
	defer cancel()
	var result json.RawMessage
	prog := newProgress(env)
	for ev := range events {
		prog.show(ev, r.Status())
		if ev.Type == event.TypeResult {
			result = ev.Result
		}
	}
	prog.finish()
	err := r.Wait()
	fmt.Fprintf(env.stdout, "run %s: %s\n", run.ID(), run.Dir())
	if err != nil {
		st := r.Status()
		if st.State == event.Interrupted {
			done, total := storedCount(run, p, st.Done, st.Total)
			fmt.Fprintf(env.stdout, "interrupted after %d of %d points; continue with: rolloff resume %s\n", done, total, run.Dir())
		}
		return err
	}
	return reportDone(env, r.Status().Done, time.Since(start), result, afterCorners)
}

// storedCount is how many points run holds and how many its plan has:
// counted from the store and the plan, not from the scheduler's status,
// which knows only the points of this session and may have ended before
// its first progress report.
func storedCount(run *store.Run, p *plan.Plan, done, total int) (int, int) {
	if pts, err := run.Points(); err == nil {
		done = max(done, len(pts))
	}
	if fs, err := p.Freqs(); err == nil {
		total = max(total, len(fs))
	}
	return done, total
}

// reportDone prints a finished run's point count, time and corners, then
// runs afterCorners (the demo's comparison) on its result.
func reportDone(env *cmdEnv, points int, took time.Duration, result json.RawMessage, afterCorners func(res map[string]any) error) error {
	fmt.Fprintf(env.stdout, "done: %d points in %s\n", points, took.Round(time.Millisecond))
	var res map[string]any
	if len(result) > 0 {
		if err := json.Unmarshal(result, &res); err != nil {
			return fmt.Errorf("result: %w", err)
		}
	}
	printCorners(env.stdout, res)
	if afterCorners != nil {
		return afterCorners(res)
	}
	return nil
}

// printCorners prints the result's corners with their uncertainty.
func printCorners(w io.Writer, res map[string]any) {
	if res == nil {
		fmt.Fprintf(w, "no analysis result\n")
		return
	}
	for _, c := range []struct{ name, key, ukey, beyond string }{
		{"low corner", "low_hz", "low_u_hz", "low_beyond_hz"},
		{"high corner", "high_hz", "high_u_hz", "high_beyond_hz"},
	} {
		v, ok := res[c.key].(float64)
		if !ok {
			if bnd, ok := res[c.beyond].(float64); ok {
				fmt.Fprintf(w, "%s: beyond the sweep (past %s)\n", c.name, analysis.FormatHz(bnd, 5))
			} else {
				fmt.Fprintf(w, "%s: none\n", c.name)
			}
			continue
		}
		if u, ok := res[c.ukey].(float64); ok {
			fmt.Fprintf(w, "%s: %s (k = 2)\n", c.name, analysis.FormatWithU(v, u))
		} else {
			fmt.Fprintf(w, "%s: %s\n", c.name, analysis.FormatHz(v, 6))
		}
	}
	printMaskVerdict(w, res)
	printDrift(w, res)
}

// printDrift prints the drift check of a result (nothing when it has
// none).
func printDrift(w io.Writer, res map[string]any) {
	raw, ok := res["drift"].(map[string]any)
	if !ok {
		return
	}
	b, err := json.Marshal(raw)
	if err != nil {
		return
	}
	var d analysis.Drift
	if json.Unmarshal(b, &d) != nil {
		return
	}
	if line := d.Line(); line != "" {
		fmt.Fprintf(w, "drift check: %s\n", line)
	}
}

// progress shows a run's progress: a bar on a terminal, log lines
// otherwise.
type progress struct {
	env  *cmdEnv
	bar  *progressbar.ProgressBar
	last event.State
}

func newProgress(env *cmdEnv) *progress {
	pr := &progress{env: env}
	if env.tty {
		pr.bar = progressbar.NewOptions(1,
			progressbar.OptionSetWriter(env.stderr),
			progressbar.OptionSetWidth(30),
			progressbar.OptionShowCount(),
			progressbar.OptionClearOnFinish(),
			progressbar.OptionThrottle(100*time.Millisecond),
		)
	}
	return pr
}

func (pr *progress) show(ev event.Event, st sched.Status) {
	if pr.bar != nil {
		if st.Total > 0 {
			pr.bar.ChangeMax(st.Total)
		}
		eta := st.ETA.Round(time.Second)
		pr.bar.Describe(fmt.Sprintf("%-9s %12s  ETA %s", st.State, analysis.FormatHz(st.FreqHz, 4), eta))
		_ = pr.bar.Set(st.Done)
		if ev.Type == event.TypePrompt || (ev.Type == event.TypeLog && ev.Message != "") {
			pr.bar.Clear()
			fmt.Fprintf(pr.env.stderr, "\r%s\n", ev.Message)
		}
		return
	}
	l := pr.env.log
	switch ev.Type {
	case event.TypePoint:
		pt := ev.Point
		e := l.Info().Int("seq", pt.Seq).Float64("freq_hz", pt.FreqHz).Float64("gain_db", pt.GainDB).
			Str("range", pt.Range).Float64("settle_s", pt.SettleS).Int("done", st.Done).Int("total", st.Total).
			Float64("eta_s", st.ETA.Seconds())
		if len(pt.Flags) > 0 {
			e = e.Strs("flags", pt.Flags)
		}
		e.Msg("point")
	case event.TypeState:
		if ev.State != pr.last && ev.State != event.Settling && ev.State != event.Reading {
			l.Info().Str("state", string(ev.State)).Str("from", string(ev.From)).Msg(ev.Message)
		}
		pr.last = ev.State
	case event.TypeLog:
		l.Info().Msg(ev.Message)
	case event.TypePrompt:
		l.Warn().Int("prompt", ev.Prompt.ID).Str("range", ev.Prompt.Range).Msg(ev.Message)
	}
}

func (pr *progress) finish() {
	if pr.bar != nil {
		_ = pr.bar.Finish()
		fmt.Fprintln(pr.env.stderr)
	}
}

// lineReader reads stdin lines in one goroutine, for prompts that must
// stop waiting when the run is cancelled.
type lineReader struct {
	once  sync.Once
	in    io.Reader
	lines chan string
}

func (lr *lineReader) next(ctx context.Context) (string, error) {
	lr.once.Do(func() {
		lr.lines = make(chan string)
		go func() {
			sc := bufio.NewScanner(lr.in)
			for sc.Scan() {
				lr.lines <- sc.Text()
			}
			close(lr.lines)
		}()
	})
	select {
	case l, ok := <-lr.lines:
		if !ok {
			return "", io.EOF
		}
		return l, nil
	case <-ctx.Done():
		return "", ctx.Err()
	}
}

// terminalOperator asks on the terminal: the operator turns the range
// switch and presses Enter (or types the index of the range selected).
func terminalOperator(env *cmdEnv) sched.Operator {
	lr := &lineReader{in: env.stdin}
	return func(ctx context.Context, p event.Prompt) (int, error) {
		fmt.Fprintf(env.stderr, "\n>>> Set the converter to range %s", p.Range)
		if p.FromRange != "" {
			fmt.Fprintf(env.stderr, " (now %s)", p.FromRange)
		}
		fmt.Fprintf(env.stderr, ": %s.\n    The generator output is off. Press Enter when done (or type the range index selected, %d for %s): ", p.Reason, p.RangeIndex, p.Range)
		for {
			line, err := lr.next(ctx)
			if err != nil {
				return 0, fmt.Errorf("waiting for the operator: %w", err)
			}
			line = strings.TrimSpace(line)
			if line == "" {
				return p.RangeIndex, nil
			}
			i, err := strconv.Atoi(line)
			if err == nil && i >= 0 {
				return i, nil
			}
			fmt.Fprintf(env.stderr, "    %q is not a range index; press Enter for %s: ", line, p.Range)
		}
	}
}
