// Package queue is the daemon's run queue: it runs one sweep at a time on
// the bench, keeps later submissions waiting, mirrors each run's state,
// progress, pending prompt and result for the API, forwards every event to
// the live clients, and lists runs left unfinished by an earlier daemon as
// interrupted so that they can be resumed from the run store.
package queue

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"sort"
	"sync"
	"time"

	"github.com/rs/zerolog"

	"rolloff/sweep/event"
	"rolloff/sweep/plan"
)

// Sentinel errors, tested with errors.Is.
var (
	ErrNotFound = errors.New("queue: no such run")
	ErrState    = errors.New("queue: not possible in the run's state")
	ErrClosed   = errors.New("queue: closed")
	// ErrFull refuses a submission while MaxQueued runs wait already.
	ErrFull = errors.New("queue: full")
)

// DefaultMaxQueued is how many runs may wait for the bench by default.
const DefaultMaxQueued = 64

// Run is what the queue needs of a running sweep: the scheduler's run.
type Run interface {
	Pause() error
	Resume() error
	Abort() error
	Confirm(promptID, rangeIndex int) error
	// Subscribe returns the run's events from now on; the channel is
	// closed when the run ends or cancel is called.
	Subscribe() (<-chan event.Event, func())
	// Wait blocks until the run has ended.
	Wait() error
	// Done is closed when the run has ended.
	Done() <-chan struct{}
	// Snapshot returns where the run is now.
	Snapshot() Snapshot
}

// Snapshot is a running sweep's state, progress and pending prompt.
type Snapshot struct {
	State    event.State
	Progress *event.Progress
	Prompt   *event.Prompt
}

// Stored is a run as found in the run store.
type Stored struct {
	ID      string
	Name    string
	State   event.State
	Created time.Time
	Points  int
	Plan    *plan.Plan
	Result  json.RawMessage
}

// Source is a plan document as it was given: a file name (or a request
// name) and its bytes, kept with the run.
type Source struct {
	Name string
	Data []byte
}

// Backend is the bench and the run store, as the queue sees them.
type Backend interface {
	// Create records a new run of p, given as src, in the store (state
	// queued) and returns its id.
	Create(ctx context.Context, p *plan.Plan, src Source) (string, error)
	// Start runs stored run id on the bench. With resume it continues from
	// the points already stored, with the plan stored with the run (p may
	// then be nil). The run ends when ctx is cancelled.
	Start(ctx context.Context, id string, p *plan.Plan, resume bool) (Run, error)
	// List returns the stored runs. Stored.Plan may be a summary of the
	// plan (for display) rather than the whole of it. A run not in a final
	// or interrupted state is being written by its live owner (another
	// process, or the demo in this one).
	List(ctx context.Context) ([]Stored, error)
	// Events returns the stored events of run id from index from on.
	Events(ctx context.Context, id string, from int) ([]event.Event, error)
	// SetState records a final or interrupted state for a run that is not
	// running (a queued run aborted, a run that failed to start).
	SetState(ctx context.Context, id string, s event.State, msg string) error
}

// ChangeLister is an optional capability of a Backend: the stored runs
// whose summary changed since the last call (or since List, for the
// first), found without reading the whole store. With it the queue lists
// the store whole only once, in New.
type ChangeLister interface {
	ListChanged(ctx context.Context) ([]Stored, error)
}

// Info is what the API shows of a run.
type Info struct {
	ID       string          `json:"id"`
	Name     string          `json:"name"`
	State    event.State     `json:"state"`
	Created  time.Time       `json:"created"`
	Position int             `json:"queue_position,omitempty"` // 1 = next, when queued
	Points   int             `json:"points"`
	Progress *event.Progress `json:"progress,omitempty"`
	Prompt   *event.Prompt   `json:"prompt,omitempty"`
	Message  string          `json:"message,omitempty"`
	Result   json.RawMessage `json:"result,omitempty"`
	Plan     *plan.Plan      `json:"plan,omitempty"`
	Live     bool            `json:"live"` // the run is on the bench now
	// External is set for a run written by another owner (a CLI run on
	// the same store, the demo): followed from the store, not steered.
	External bool `json:"external,omitempty"`
}

// Options configure a Queue.
type Options struct {
	Backend Backend
	// OnEvent receives every event of every run, in order per run, from
	// the queue's goroutines. It must not block.
	OnEvent func(id string, ev event.Event)
	Log     zerolog.Logger
	// FollowEvery is how often runs of other owners are read from the
	// store (default 250 ms); the store is listed for new runs every
	// RescanEvery ticks (default 20).
	FollowEvery time.Duration
	RescanEvery int
	// MaxQueued is how many runs may wait for the bench, the live one not
	// counted (default DefaultMaxQueued); a submission or resume past it
	// is refused with ErrFull.
	MaxQueued int
}

type entry struct {
	info   Info
	resume bool
	run    Run // while live
	seen   int // events of an external run already applied
}

// Queue runs the sweeps of one bench, one at a time.
type Queue struct {
	opts Options

	mu      sync.Mutex
	entries map[string]*entry
	order   []*entry // every entry, newest first (see newer)
	nExt    int      // entries with info.External set
	waiting []string // ids, in order
	current *entry
	closed  bool
	// creating counts Submits between the store's Create and the entry:
	// the store scan must not take those runs for another owner's.
	creating int
	wake     chan struct{}

	ctx    context.Context
	cancel context.CancelFunc
	done   chan struct{}
}

// New lists the stored runs, marks the unfinished ones interrupted and
// starts the queue's worker.
func New(ctx context.Context, opts Options) (*Queue, error) {
	if opts.Backend == nil {
		return nil, errors.New("queue: no backend")
	}
	if opts.OnEvent == nil {
		opts.OnEvent = func(string, event.Event) {}
	}
	stored, err := opts.Backend.List(ctx)
	if err != nil {
		return nil, fmt.Errorf("queue: listing the run store: %w", err)
	}
	if opts.FollowEvery <= 0 {
		opts.FollowEvery = 250 * time.Millisecond
	}
	if opts.RescanEvery <= 0 {
		opts.RescanEvery = 20
	}
	if opts.MaxQueued <= 0 {
		opts.MaxQueued = DefaultMaxQueued
	}
	q := &Queue{opts: opts, entries: map[string]*entry{}, wake: make(chan struct{}, 1), done: make(chan struct{})}
	q.ctx, q.cancel = context.WithCancel(context.Background())
	for _, s := range stored {
		q.adopt(ctx, s)
	}
	go q.work()
	go q.follow()
	return q, nil
}

// adopt adds a stored run found in the store. A run in a final or
// interrupted state is history; any other is being written by a live
// owner and is followed from the store.
func (q *Queue) adopt(ctx context.Context, s Stored) {
	e := &entry{info: Info{ID: s.ID, Name: s.Name, State: s.State, Created: s.Created, Points: s.Points, Plan: s.Plan, Result: s.Result}}
	if s.State == event.Interrupted {
		e.info.Message = "found unfinished; resume to continue"
	}
	if !s.State.Ended() {
		e.info.External = true
		if evs, err := q.opts.Backend.Events(ctx, s.ID, 0); err == nil {
			for _, ev := range evs {
				applyTo(&e.info, ev)
			}
			e.seen = len(evs)
		}
	}
	q.mu.Lock()
	if q.entries[s.ID] == nil {
		q.addLocked(e)
	}
	q.mu.Unlock()
}

// newer reports whether a is listed before b: created later, or at the
// same time with a greater id.
func newer(a, b *Info) bool {
	if !a.Created.Equal(b.Created) {
		return a.Created.After(b.Created)
	}
	return a.ID > b.ID
}

// addLocked adds a new entry in its place in the list; q.mu is held.
func (q *Queue) addLocked(e *entry) {
	q.entries[e.info.ID] = e
	if e.info.External {
		q.nExt++
	}
	i := sort.Search(len(q.order), func(i int) bool { return !newer(&q.order[i].info, &e.info) })
	q.order = append(q.order, nil)
	copy(q.order[i+1:], q.order[i:])
	q.order[i] = e
}

// follow reads the runs of other owners from the store and lists runs
// that appear in it.
func (q *Queue) follow() {
	t := time.NewTicker(q.opts.FollowEvery)
	defer t.Stop()
	for n := 1; ; n++ {
		select {
		case <-q.ctx.Done():
			return
		case <-t.C:
		}
		var ext []*entry
		q.mu.Lock()
		for i := 0; q.nExt > 0 && i < len(q.order); i++ {
			if e := q.order[i]; e.info.External {
				ext = append(ext, e)
			}
		}
		q.mu.Unlock()
		for _, e := range ext {
			evs, err := q.opts.Backend.Events(q.ctx, e.info.ID, e.seen)
			if err != nil {
				continue
			}
			for _, ev := range evs {
				if ev.Run == "" {
					ev.Run = e.info.ID
				}
				q.mu.Lock()
				applyTo(&e.info, ev)
				if ev.Type == event.TypeState && ev.State.Ended() && e.info.External {
					e.info.External = false
					q.nExt--
				}
				q.mu.Unlock()
				q.emit(e.info.ID, ev)
			}
			e.seen += len(evs)
		}
		q.mu.Lock()
		busy := q.creating > 0
		q.mu.Unlock()
		if n%q.opts.RescanEvery != 0 || busy {
			continue
		}
		var stored []Stored
		var err error
		cl, changes := q.opts.Backend.(ChangeLister)
		if changes {
			stored, err = cl.ListChanged(q.ctx)
		} else {
			stored, err = q.opts.Backend.List(q.ctx)
		}
		if err != nil {
			continue
		}
		q.mu.Lock()
		busy = q.creating > 0
		q.mu.Unlock()
		if busy && !changes {
			continue
		}
		for _, s := range stored {
			q.mu.Lock()
			e := q.entries[s.ID]
			q.mu.Unlock()
			switch {
			case e == nil:
				if busy {
					// Perhaps a Submit's run between Create and its
					// entry: looked at again at the next rescan.
					q.unseen(cl, s)
					continue
				}
				q.adopt(q.ctx, s)
			case q.restored(e, s):
			case s.State == event.Interrupted:
				// Its owner went away without a word.
				q.mu.Lock()
				was := e.info.External
				if was {
					e.info.External = false
					q.nExt--
					e.info.State, e.info.Prompt = event.Interrupted, nil
					e.info.Message = "its owner stopped; resume to continue"
				}
				q.mu.Unlock()
				if was {
					q.emit(s.ID, event.Event{Time: time.Now().UTC(), Type: event.TypeState, Run: s.ID, State: event.Interrupted, Message: "its owner stopped"})
				}
			}
		}
	}
}

// unseen hands a changed run back to a change lister that can report it
// again (a Backend whose ListChanged only reports each change once would
// otherwise lose it).
func (q *Queue) unseen(cl ChangeLister, s Stored) {
	if u, ok := cl.(interface{ Unseen(id string) }); ok {
		u.Unseen(s.ID)
	}
}

// restored updates an interrupted run, neither queued nor live here,
// that the store shows taken up by another process (resumed from the
// command line, or closed there); it reports whether it did. A run in
// any other state here is known better here than from a summary the
// store may have given before the run's last change.
func (q *Queue) restored(e *entry, s Stored) bool {
	q.mu.Lock()
	if e.run != nil || e.info.External || e.info.State != event.Interrupted || s.State == event.Interrupted {
		q.mu.Unlock()
		return false
	}
	from := e.info.State
	e.info.Name, e.info.Points, e.info.State, e.info.Message = s.Name, s.Points, s.State, ""
	if s.Plan != nil {
		e.info.Plan = s.Plan
	}
	if s.Result != nil {
		e.info.Result = s.Result
	}
	if !s.State.Ended() {
		// Being written by another owner: followed from its last event.
		e.info.External = true
		q.nExt++
		if evs, err := q.opts.Backend.Events(q.ctx, s.ID, 0); err == nil {
			e.seen = len(evs)
		}
	}
	q.mu.Unlock()
	q.emit(s.ID, event.Event{Time: time.Now().UTC(), Type: event.TypeState, Run: s.ID, From: from, State: s.State})
	return true
}

// Submit records a new run of p, given as src, and queues it. It returns
// the run id.
func (q *Queue) Submit(ctx context.Context, p *plan.Plan, src Source) (string, error) {
	q.mu.Lock()
	closed := q.closed
	if !closed && len(q.waiting)+q.creating >= q.opts.MaxQueued {
		q.mu.Unlock()
		return "", fmt.Errorf("%d runs wait for the bench already (at most %d): %w", q.opts.MaxQueued, q.opts.MaxQueued, ErrFull)
	}
	q.creating++
	q.mu.Unlock()
	defer func() {
		q.mu.Lock()
		q.creating--
		q.mu.Unlock()
	}()
	if closed {
		return "", ErrClosed
	}
	id, err := q.opts.Backend.Create(ctx, p, src)
	if err != nil {
		return "", err
	}
	e := &entry{info: Info{ID: id, Name: p.Name, State: event.Queued, Created: time.Now().UTC(), Plan: p}}
	q.mu.Lock()
	if q.closed {
		q.mu.Unlock()
		return "", ErrClosed
	}
	if old := q.entries[id]; old != nil {
		// Found in the store by a rescan meanwhile: this entry replaces it.
		for i, o := range q.order {
			if o == old {
				q.order = append(q.order[:i], q.order[i+1:]...)
				break
			}
		}
		if old.info.External {
			q.nExt--
		}
	}
	q.addLocked(e)
	q.waiting = append(q.waiting, id)
	q.mu.Unlock()
	q.emit(id, event.Event{Time: time.Now().UTC(), Type: event.TypeState, Run: id, State: event.Queued})
	q.poke()
	return id, nil
}

func (q *Queue) poke() {
	select {
	case q.wake <- struct{}{}:
	default:
	}
}

func (q *Queue) emit(id string, ev event.Event) {
	q.opts.OnEvent(id, ev)
}

// List returns every run, newest first.
func (q *Queue) List() []Info {
	out, _ := q.Page(nil, 0, -1)
	return out
}

// Page returns the runs that keep accepts (all when keep is nil), newest
// first, skipping offset of them and returning at most limit (all when
// limit < 0), with the number of runs accepted. keep sees each run's
// Info as the queue holds it, and must not keep it or block.
func (q *Queue) Page(keep func(*Info) bool, offset, limit int) (page []Info, total int) {
	q.mu.Lock()
	defer q.mu.Unlock()
	if limit < 0 {
		limit = len(q.order)
	}
	offset = max(offset, 0)
	page = make([]Info, 0, min(limit, len(q.order)))
	for _, e := range q.order {
		if keep != nil && !keep(&e.info) {
			continue
		}
		if total >= offset && len(page) < limit {
			page = append(page, q.infoLocked(e))
		}
		total++
	}
	return page, total
}

func (q *Queue) infoLocked(e *entry) Info {
	in := e.info
	in.Position = 0
	if in.State == event.Queued {
		for i, id := range q.waiting {
			if id == in.ID {
				in.Position = i + 1
			}
		}
	}
	in.Live = e.run != nil
	if e.info.Progress != nil {
		p := *e.info.Progress
		in.Progress = &p
	}
	if e.info.Prompt != nil {
		p := *e.info.Prompt
		in.Prompt = &p
	}
	return in
}

// Get returns one run, wrapping ErrNotFound.
func (q *Queue) Get(id string) (Info, error) {
	q.mu.Lock()
	defer q.mu.Unlock()
	e := q.entries[id]
	if e == nil {
		return Info{}, fmt.Errorf("run %q: %w", id, ErrNotFound)
	}
	return q.infoLocked(e), nil
}

// live returns the entry and its live run, or an error naming the state.
func (q *Queue) live(id, op string) (*entry, Run, error) {
	q.mu.Lock()
	defer q.mu.Unlock()
	e := q.entries[id]
	if e == nil {
		return nil, nil, fmt.Errorf("run %q: %w", id, ErrNotFound)
	}
	if e.info.External {
		return e, nil, fmt.Errorf("run %q is run by another owner: cannot %s here: %w", id, op, ErrState)
	}
	if e.run == nil {
		return e, nil, fmt.Errorf("run %q is %s: cannot %s: %w", id, e.info.State, op, ErrState)
	}
	return e, e.run, nil
}

// Pause pauses a live run.
func (q *Queue) Pause(id string) error {
	_, r, err := q.live(id, "pause")
	if err != nil {
		return err
	}
	return wrapState(r.Pause())
}

// Resume resumes a paused live run, or queues an interrupted run to
// continue from its stored points.
func (q *Queue) Resume(ctx context.Context, id string) error {
	q.mu.Lock()
	e := q.entries[id]
	if e == nil {
		q.mu.Unlock()
		return fmt.Errorf("run %q: %w", id, ErrNotFound)
	}
	if r := e.run; r != nil {
		q.mu.Unlock()
		return wrapState(r.Resume())
	}
	if e.info.External {
		q.mu.Unlock()
		return fmt.Errorf("run %q is run by another owner: %w", id, ErrState)
	}
	if e.info.State != event.Interrupted {
		st := e.info.State
		q.mu.Unlock()
		return fmt.Errorf("run %q is %s: only a paused or interrupted run can be resumed: %w", id, st, ErrState)
	}
	if q.closed {
		q.mu.Unlock()
		return ErrClosed
	}
	if len(q.waiting)+q.creating >= q.opts.MaxQueued {
		q.mu.Unlock()
		return fmt.Errorf("%d runs wait for the bench already (at most %d): %w", q.opts.MaxQueued, q.opts.MaxQueued, ErrFull)
	}
	e.resume = true
	e.info.State = event.Queued
	e.info.Message = ""
	q.waiting = append(q.waiting, id)
	q.mu.Unlock()
	if err := q.opts.Backend.SetState(ctx, id, event.Queued, "resume requested"); err != nil {
		q.opts.Log.Warn().Err(err).Str("run", id).Msg("cannot record the queued state")
	}
	q.emit(id, event.Event{Time: time.Now().UTC(), Type: event.TypeState, Run: id, From: event.Interrupted, State: event.Queued})
	q.poke()
	return nil
}

// Abort aborts a live run, takes a queued run out of the queue, or closes
// an interrupted run for good.
func (q *Queue) Abort(ctx context.Context, id string) error {
	q.mu.Lock()
	e := q.entries[id]
	if e == nil {
		q.mu.Unlock()
		return fmt.Errorf("run %q: %w", id, ErrNotFound)
	}
	if r := e.run; r != nil {
		q.mu.Unlock()
		return wrapState(r.Abort())
	}
	from := e.info.State
	if e.info.External || (from != event.Queued && from != event.Interrupted) {
		q.mu.Unlock()
		return fmt.Errorf("run %q is %s: cannot abort: %w", id, from, ErrState)
	}
	for i, w := range q.waiting {
		if w == id {
			q.waiting = append(q.waiting[:i:i], q.waiting[i+1:]...)
			break
		}
	}
	e.info.State = event.Aborted
	e.info.Message = "aborted by the operator before it ran"
	msg := e.info.Message
	q.mu.Unlock()
	if err := q.opts.Backend.SetState(ctx, id, event.Aborted, msg); err != nil {
		q.opts.Log.Warn().Err(err).Str("run", id).Msg("cannot record the aborted state")
	}
	q.emit(id, event.Event{Time: time.Now().UTC(), Type: event.TypeState, Run: id, From: from, State: event.Aborted, Message: msg})
	return nil
}

// Confirm answers the run's pending operator prompt.
func (q *Queue) Confirm(id string, promptID, rangeIndex int) error {
	_, r, err := q.live(id, "confirm")
	if err != nil {
		return err
	}
	return r.Confirm(promptID, rangeIndex)
}

// RunningID returns the id of the run on the bench, or "".
func (q *Queue) RunningID() string {
	q.mu.Lock()
	defer q.mu.Unlock()
	if q.current == nil {
		return ""
	}
	return q.current.info.ID
}

// wrapState marks a scheduler refusal as a state conflict unless it
// already is an error the caller can classify.
func wrapState(err error) error {
	if err == nil || errors.Is(err, ErrState) {
		return err
	}
	return fmt.Errorf("%w: %w", ErrState, err)
}

// Close stops accepting runs, stops the live run (its scheduler halts the
// generator and leaves it resumable) and waits for it until ctx is done.
// Runs still queued stay in the store and are listed as interrupted by the
// next daemon.
func (q *Queue) Close(ctx context.Context) error {
	q.mu.Lock()
	q.closed = true
	q.mu.Unlock()
	q.cancel()
	select {
	case <-q.done:
		return nil
	case <-ctx.Done():
		return ctx.Err()
	}
}

func (q *Queue) work() {
	defer close(q.done)
	for {
		q.mu.Lock()
		var e *entry
		if !q.closed && len(q.waiting) > 0 {
			e = q.entries[q.waiting[0]]
			q.waiting = q.waiting[1:]
		}
		q.mu.Unlock()
		if e == nil {
			select {
			case <-q.wake:
				continue
			case <-q.ctx.Done():
				return
			}
		}
		q.runOne(e)
		if q.ctx.Err() != nil {
			return
		}
	}
}

func (q *Queue) runOne(e *entry) {
	id := e.info.ID
	q.mu.Lock()
	p, resume := e.info.Plan, e.resume
	e.info.State = event.Preparing
	q.current = e
	q.mu.Unlock()
	defer func() {
		q.mu.Lock()
		q.current = nil
		e.run = nil
		q.mu.Unlock()
	}()
	run, err := q.opts.Backend.Start(q.ctx, id, p, resume)
	if err != nil {
		st := event.Failed
		if q.ctx.Err() != nil {
			st = event.Interrupted
		}
		msg := fmt.Sprintf("cannot start: %v", err)
		q.mu.Lock()
		e.info.State, e.info.Message = st, msg
		q.mu.Unlock()
		if err := q.opts.Backend.SetState(context.Background(), id, st, msg); err != nil {
			q.opts.Log.Warn().Err(err).Str("run", id).Msg("cannot record the run's state")
		}
		q.emit(id, event.Event{Time: time.Now().UTC(), Type: event.TypeState, Run: id, From: event.Queued, State: st, Message: msg})
		return
	}
	events, cancel := run.Subscribe()
	q.mu.Lock()
	e.run = run
	q.mu.Unlock()
	q.sync(e, run.Snapshot())
	for {
		for ev := range events {
			if ev.Run == "" {
				ev.Run = id
			}
			q.apply(e, ev)
			q.emit(id, ev)
		}
		cancel()
		// The channel closes when the run ends, just before Done; or
		// earlier when the scheduler dropped us for falling behind, and
		// then we follow again.
		select {
		case <-run.Done():
		case <-time.After(200 * time.Millisecond):
			q.opts.Log.Warn().Str("run", id).Msg("event subscription dropped; subscribing again")
			events, cancel = run.Subscribe()
			q.sync(e, run.Snapshot())
			continue
		}
		break
	}
	werr := run.Wait()
	q.mu.Lock()
	if !e.info.State.Ended() {
		// The run ended without a final state event: shutdown or a
		// crash of the scheduler.
		from := e.info.State
		st := event.Interrupted
		msg := "stopped with the daemon; resume to continue"
		if werr != nil && q.ctx.Err() == nil {
			st, msg = event.Failed, werr.Error()
		}
		e.info.State, e.info.Message, e.info.Prompt = st, msg, nil
		q.mu.Unlock()
		q.emit(id, event.Event{Time: time.Now().UTC(), Type: event.TypeState, Run: id, From: from, State: st, Message: msg})
	} else {
		q.mu.Unlock()
	}
	q.opts.Log.Info().Str("run", id).Err(werr).Msg("run ended")
}

// sync brings the entry up to a snapshot (taken after subscribing, so that
// events emitted before the subscription are not lost), and tells the live
// clients when the state moved on.
func (q *Queue) sync(e *entry, sn Snapshot) {
	q.mu.Lock()
	changed := sn.State != "" && sn.State != e.info.State
	if sn.State != "" {
		e.info.State = sn.State
	}
	if sn.Progress != nil {
		p := *sn.Progress
		e.info.Progress = &p
	}
	e.info.Prompt = nil
	if sn.Prompt != nil {
		p := *sn.Prompt
		e.info.Prompt = &p
	}
	id, st, prompt := e.info.ID, e.info.State, e.info.Prompt
	q.mu.Unlock()
	if changed {
		q.emit(id, event.Event{Time: time.Now().UTC(), Type: event.TypeState, Run: id, State: st})
		if prompt != nil && st == event.WaitingOperator {
			q.emit(id, event.Event{Time: time.Now().UTC(), Type: event.TypePrompt, Run: id, Prompt: prompt})
		}
	}
}

// apply mirrors an event of a live run into the entry.
func (q *Queue) apply(e *entry, ev event.Event) {
	q.mu.Lock()
	defer q.mu.Unlock()
	applyTo(&e.info, ev)
	if ev.Type == event.TypeState && ev.State == event.WaitingOperator && e.run != nil && e.info.Prompt == nil {
		// The prompt event follows the state event; the run knows its
		// prompt already, so that no one sees a wait without it.
		if sn := e.run.Snapshot(); sn.Prompt != nil {
			p := *sn.Prompt
			e.info.Prompt = &p
		}
	}
}

// applyTo mirrors an event into a run's info.
func applyTo(in *Info, ev event.Event) {
	switch ev.Type {
	case event.TypeState:
		in.State = ev.State
		if ev.Message != "" || ev.State.Final() {
			in.Message = ev.Message
		}
		if ev.State != event.WaitingOperator {
			in.Prompt = nil
		}
	case event.TypePoint:
		if ev.Point != nil && ev.Point.Seq+1 > in.Points {
			in.Points = ev.Point.Seq + 1
		}
	case event.TypePrompt:
		if ev.Prompt != nil {
			p := *ev.Prompt
			in.Prompt = &p
		}
	case event.TypeProgress:
		if ev.Progress != nil {
			p := *ev.Progress
			in.Progress = &p
		}
	case event.TypeResult:
		in.Result = ev.Result
	}
}
