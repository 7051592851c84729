package web

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"sort"
	"sync"
	"time"

	"github.com/rs/zerolog"

	"rolloff/driver"
	"rolloff/driver/bench"
	"rolloff/sweep/analysis"
	"rolloff/sweep/event"
	"rolloff/sweep/export"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/queue"
	"rolloff/sweep/sched"
	"rolloff/sweep/sched/finish"
	"rolloff/sweep/sched/onbench"
	"rolloff/sweep/store"
)

var errNoFile = errors.New("web: no such file")

// New builds the daemon's server for cfg.Bench and cfg.Store and listens
// on cfg.Addr (loopback by default; any other address requires a token,
// generated when cfg.Token is empty). Runs the store holds unfinished are
// listed as interrupted. Serve starts serving.
func New(cfg Config) (*Server, error) {
	if cfg.Bench == nil {
		return nil, errors.New("web: no bench")
	}
	if cfg.Store == nil {
		return nil, errors.New("web: no run store")
	}
	be := &bridge{b: cfg.Bench, st: cfg.Store, log: cfg.Log, tune: cfg.Sched, owned: map[string]*store.Run{}}
	be.openIndex()
	s, err := newServer(cfg, be)
	if err != nil {
		return nil, err
	}
	// Taken after the queue has listed the store: runs an earlier daemon
	// left queued are found interrupted; from now on a run waiting here
	// is listed queued.
	release, err := cfg.Store.HoldQueue()
	if err != nil {
		// Runs waiting here may then look interrupted to other readers
		// of the store; they are still run.
		msg := "store queue lock not taken"
		if errors.Is(err, store.ErrLocked) {
			msg += ": another daemon keeps a queue on this store"
		}
		cfg.Log.Warn().Err(err).Msg(msg)
		release = func() {}
	}
	be.mu.Lock()
	be.releaseQueue = release
	be.mu.Unlock()
	return s, nil
}

// closeQueue lets the store's queue lock go when the server shuts down.
func (g *bridge) closeQueue() {
	g.mu.Lock()
	release := g.releaseQueue
	g.releaseQueue = nil
	g.mu.Unlock()
	if release != nil {
		release()
	}
	g.saveIndex(true)
}

// bridge implements backend with the real bench, scheduler and store.
type bridge struct {
	b    *bench.Bench
	st   *store.Store
	log  zerolog.Logger
	tune func(*sched.Opts)

	mu    sync.Mutex
	owned map[string]*store.Run // runs this daemon holds (locked) while they run

	releaseQueue func() // lets the store's queue lock go

	idx      *store.Index // nil: the store is listed whole
	idxSaved time.Time    // guarded by mu
	unseen   map[string]bool
}

var _ backend = (*bridge)(nil)

func (g *bridge) Create(ctx context.Context, p *plan.Plan, src queue.Source) (string, error) {
	r, err := g.st.Create(store.CreateOpts{
		Name: p.Name, PlanFile: src.Name, PlanData: src.Data, Plan: p,
		BenchFile: g.b.Raw, Identities: g.b.Identities, State: event.Queued,
	})
	if err != nil {
		return "", err
	}
	// A waiting run holds no open file: the store's queue lock (held by
	// the server) keeps it from being taken for an interrupted one, and
	// Start claims it.
	id := r.ID()
	if err := r.Close(); err != nil {
		return "", err
	}
	return id, nil
}

// claim returns the locked handle of run id for starting it: a run
// waiting in the queue is claimed from the store, any other opened and
// locked.
func (g *bridge) claim(id string) (*store.Run, error) {
	g.mu.Lock()
	if r := g.owned[id]; r != nil {
		g.mu.Unlock()
		return r, nil
	}
	g.mu.Unlock()
	r, err := g.st.Claim(id)
	if errors.Is(err, store.ErrNotQueued) {
		return g.own(id)
	}
	if err != nil {
		return nil, err
	}
	g.mu.Lock()
	g.owned[id] = r
	g.mu.Unlock()
	return r, nil
}

// own returns the locked handle of run id, opening and locking it when
// this daemon does not hold it yet (a run of an earlier daemon).
func (g *bridge) own(id string) (*store.Run, error) {
	g.mu.Lock()
	defer g.mu.Unlock()
	if r := g.owned[id]; r != nil {
		return r, nil
	}
	r, err := g.st.OpenRun(id)
	if err != nil {
		return nil, err
	}
	if err := r.Lock(); err != nil {
		r.Close()
		return nil, err
	}
	g.owned[id] = r
	return r, nil
}

func (g *bridge) release(id string) {
	g.mu.Lock()
	r := g.owned[id]
	delete(g.owned, id)
	g.mu.Unlock()
	if r != nil {
		r.Close()
	}
}

// reader returns a handle to read run id and a function to let it go.
func (g *bridge) reader(id string) (*store.Run, func(), error) {
	g.mu.Lock()
	r := g.owned[id]
	g.mu.Unlock()
	if r != nil {
		return r, func() {}, nil
	}
	r, err := g.st.OpenRun(id)
	if err != nil {
		if errors.Is(err, store.ErrNotFound) {
			return nil, nil, fmt.Errorf("run %q: %w", id, queue.ErrNotFound)
		}
		return nil, nil, err
	}
	return r, func() { r.Close() }, nil
}

func (g *bridge) Start(ctx context.Context, id string, p *plan.Plan, resume bool) (queue.Run, error) {
	r, err := g.claim(id)
	if err != nil {
		return nil, err
	}
	if resume || p == nil {
		if p, err = r.Plan(); err != nil {
			g.release(id)
			return nil, err
		}
		if err := p.Validate(g.Limits()); err != nil {
			g.release(id)
			return nil, err
		}
	}
	through, err := sched.LoadThrough(g.st, p)
	if err != nil {
		g.release(id)
		return nil, err
	}
	opts := sched.Opts{Resume: resume, SubscriberBuffer: 4096, Finish: finish.Analyze(p, r.Dir(), through, finish.SpecOf(g.b.Config, p))}
	if g.b.Sim != nil {
		opts.RangeKnown, opts.CurrentRange = true, g.b.Sim.ConverterRange()
	}
	if g.tune != nil {
		g.tune(&opts)
	}
	_ = g.b.SetRunID(r.ID()) // named to a controller refused by the bench lock
	run := sched.Start(ctx, onbench.Instruments(g.b, g.log), p, r, opts)
	go func() {
		<-run.Done()
		_ = g.b.SetRunID("")
		g.release(id)
	}()
	return schedRun{run}, nil
}

// schedRun adapts a scheduler run to the queue.
type schedRun struct{ *sched.Run }

var _ queue.Run = schedRun{}

func (r schedRun) Snapshot() queue.Snapshot {
	st := r.Status()
	sn := queue.Snapshot{State: st.State, Prompt: st.Prompt}
	if st.Total > 0 {
		sn.Progress = &event.Progress{Done: st.Done, Total: st.Total, FreqHz: st.FreqHz, ETA: st.ETA, Elapsed: st.Elapsed}
	}
	return sn
}

func (g *bridge) List(ctx context.Context) ([]queue.Stored, error) {
	var sums []store.Summary
	if g.idx != nil {
		sums = g.idx.Runs()
	} else {
		var err error
		if sums, err = g.st.List(); err != nil {
			return nil, err
		}
	}
	return g.stored(sums), nil
}

func (g *bridge) stored(sums []store.Summary) []queue.Stored {
	out := make([]queue.Stored, 0, len(sums))
	for _, s := range sums {
		if s.Err != "" {
			g.log.Warn().Str("run", s.ID).Str("error", s.Err).Msg("run cannot be read; not listed")
			continue
		}
		out = append(out, storedOf(s))
	}
	return out
}

func (g *bridge) Events(ctx context.Context, id string, from int) ([]event.Event, error) {
	r, done, err := g.reader(id)
	if err != nil {
		return nil, err
	}
	defer done()
	evs, err := r.Events()
	if err != nil {
		return nil, err
	}
	if from > len(evs) {
		from = len(evs)
	}
	return evs[from:], nil
}

func (g *bridge) SetState(ctx context.Context, id string, s event.State, msg string) error {
	g.mu.Lock()
	r := g.owned[id]
	g.mu.Unlock()
	if r == nil {
		var err error
		if r, err = g.own(id); err != nil {
			return err
		}
	}
	err := r.SetState(s, msg)
	if s == event.Queued {
		g.release(id) // waits again with no open file; Start claims it
	}
	if s.Ended() {
		// Nothing will run it in this daemon: let the lock go, so that
		// a later daemon (or the CLI) may resume it.
		if s.Final() {
			g.release(id)
		}
	}
	return err
}

func (g *bridge) Info() BenchInfo {
	b := g.b
	in := BenchInfo{Simulated: b.Sim != nil, TimeScale: b.TimeScale, LineHz: b.LineHz, Limits: g.Limits()}
	if b.Config != nil {
		in.Name = b.Config.File
	}
	roles := map[string]bool{}
	add := func(role string, present bool) {
		if present {
			roles[role] = true
		}
	}
	add("generator", b.Generator != nil)
	add("dc_voltmeter", b.DCVoltmeter != nil)
	add("converter", b.Converter != nil)
	add("ac_voltmeter", b.ACVoltmeter != nil)
	add("vin", b.Vin != nil)
	add("range_switch", b.Switch != nil)
	for r := range roles {
		in.Roles = append(in.Roles, r)
	}
	sort.Strings(in.Roles)
	for role, id := range b.Identities {
		in.Instruments = append(in.Instruments, Instrument{Role: role, Identity: id, Connected: true})
	}
	sort.Slice(in.Instruments, func(i, j int) bool { return in.Instruments[i].Role < in.Instruments[j].Role })
	if b.Converter != nil {
		in.Ranges = b.Converter.Ranges()
		w := b.Converter.Window()
		in.Window = &w
	}
	return in
}

func (g *bridge) CheckThrough(p *plan.Plan) error {
	_, err := sched.LoadThrough(g.st, p)
	return err
}

func (g *bridge) Limits() driver.GeneratorLimits {
	if g.b.Generator != nil {
		return g.b.Generator.Limits()
	}
	return g.b.Limits
}

func (g *bridge) Estimate(p *plan.Plan) (Estimate, error) {
	if g.b.Config == nil {
		return Estimate{}, errors.New("web: the bench has no configuration to estimate with")
	}
	r, err := plan.Estimate(p, onbench.Timing(g.b.Config, p, 0))
	if err != nil {
		return Estimate{}, err
	}
	fs, err := p.Freqs()
	if err != nil {
		return Estimate{}, err
	}
	e := Estimate{Points: r.Points, RefineMaxPoints: r.RefinePoints, DurationS: r.TotalS, TimeScale: g.b.TimeScale, Plan: p}
	if len(fs) > 0 {
		e.StartHz, e.StopHz = fs[0].Hz, fs[len(fs)-1].Hz
	}
	return e, nil
}

func (g *bridge) Points(ctx context.Context, id string) ([]point.Point, error) {
	r, done, err := g.reader(id)
	if err != nil {
		return nil, err
	}
	defer done()
	return r.Points()
}

func (g *bridge) OpenFile(ctx context.Context, id, name string) (io.ReadSeekCloser, time.Time, error) {
	r, done, err := g.reader(id)
	if err != nil {
		return nil, time.Time{}, err
	}
	defer done()
	f, err := r.OpenFile(name)
	if err != nil {
		if errors.Is(err, store.ErrNotFound) {
			return nil, time.Time{}, errNoFile
		}
		return nil, time.Time{}, err
	}
	var mod time.Time
	if st, err := f.Stat(); err == nil {
		mod = st.ModTime()
	}
	return f, mod, nil
}

// series reads one run for an overlay: its points and, when it has one,
// its result.
func (g *bridge) series(id string) (export.Series, error) {
	r, done, err := g.reader(id)
	if err != nil {
		return export.Series{}, err
	}
	defer done()
	pts, err := r.Points()
	if err != nil {
		return export.Series{}, err
	}
	if len(pts) == 0 {
		return export.Series{}, badRequest("runs", "run %s has no points to plot", id)
	}
	s := export.Series{Name: r.Meta().Name + " (" + id + ")", Points: pts}
	if f, err := r.OpenFile(store.FileResult); err == nil {
		var res analysis.Result
		// The stored result is used when it carries its samples; else the
		// overlay analyses the points itself.
		if json.NewDecoder(io.LimitReader(f, 8<<20)).Decode(&res) == nil && len(res.Samples) > 0 {
			s.Result = &res
		}
		f.Close()
	}
	return s, nil
}

func (g *bridge) Overlay(ctx context.Context, w io.Writer, format string, ids []string, diff bool) error {
	var ss []export.Series
	for _, id := range ids {
		s, err := g.series(id)
		if err != nil {
			return err
		}
		ss = append(ss, s)
	}
	var err error
	if diff {
		if len(ss) != 2 {
			return badRequest("diff", "a difference plot takes exactly two runs (the second minus the first), not %d", len(ss))
		}
		err = export.DiffPlot(w, format, export.PlotOptions{}, ss[0], ss[1])
	} else {
		err = export.Overlay(w, format, export.PlotOptions{}, ss...)
	}
	if err != nil {
		return &apiError{status: 422, field: "runs", msg: fmt.Sprintf("cannot plot these runs: %v", err)}
	}
	return nil
}

func (g *bridge) Confirmed(rangeIndex int) {
	if g.b.Sim != nil {
		if err := g.b.Sim.SelectRange(rangeIndex); err != nil {
			g.log.Warn().Err(err).Int("range", rangeIndex).Msg("simulated range switch")
		}
	}
}

func (g *bridge) Halt() error { return g.b.Halt() }
