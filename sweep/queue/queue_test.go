package queue

import (
	"context"
	"errors"
	"fmt"
	"sync"
	"testing"
	"time"

	"rolloff/sweep/event"
	"rolloff/sweep/plan"
)

// memRun is a scripted run: it moves to settling, then waits for finish
// or for its context.
type memRun struct {
	mu     sync.Mutex
	subs   []chan event.Event
	state  event.State
	done   chan struct{}
	finish chan event.State
	err    error
}

func (r *memRun) send(ev event.Event) {
	r.mu.Lock()
	defer r.mu.Unlock()
	if ev.Type == event.TypeState {
		r.state = ev.State
	}
	for _, c := range r.subs {
		select {
		case c <- ev:
		default:
		}
	}
}

func (r *memRun) Pause() error {
	r.send(event.Event{Type: event.TypeState, State: event.Paused})
	return nil
}
func (r *memRun) Resume() error {
	r.send(event.Event{Type: event.TypeState, State: event.Settling})
	return nil
}
func (r *memRun) Abort() error                           { r.finish <- event.Aborted; return nil }
func (r *memRun) Confirm(promptID, rangeIndex int) error { return errors.New("no prompt") }
func (r *memRun) Subscribe() (<-chan event.Event, func()) {
	r.mu.Lock()
	defer r.mu.Unlock()
	c := make(chan event.Event, 64)
	select {
	case <-r.done:
		close(c)
		return c, func() {}
	default:
	}
	r.subs = append(r.subs, c)
	return c, func() {}
}
func (r *memRun) Wait() error           { <-r.done; return r.err }
func (r *memRun) Done() <-chan struct{} { return r.done }
func (r *memRun) Snapshot() Snapshot {
	r.mu.Lock()
	defer r.mu.Unlock()
	return Snapshot{State: r.state}
}

func (r *memRun) loop(ctx context.Context) {
	r.send(event.Event{Type: event.TypeState, State: event.Settling})
	var st event.State
	select {
	case st = <-r.finish:
	case <-ctx.Done():
		st = event.Interrupted
	}
	r.send(event.Event{Type: event.TypeState, State: st})
	r.mu.Lock()
	for _, c := range r.subs {
		close(c)
	}
	r.subs = nil
	r.mu.Unlock()
	close(r.done)
}

type memBackend struct {
	mu      sync.Mutex
	owned   map[string]bool // runs with a live owner elsewhere
	events  map[string][]event.Event
	n       int
	stored  map[string]*Stored
	runs    map[string]*memRun
	started []string
	resumed map[string]bool
}

func newMem() *memBackend {
	return &memBackend{stored: map[string]*Stored{}, runs: map[string]*memRun{}, resumed: map[string]bool{},
		owned: map[string]bool{}, events: map[string][]event.Event{}}
}

func (b *memBackend) Create(ctx context.Context, p *plan.Plan, src Source) (string, error) {
	b.mu.Lock()
	defer b.mu.Unlock()
	b.n++
	id := fmt.Sprintf("r%03d", b.n)
	b.stored[id] = &Stored{ID: id, Name: p.Name, State: event.Queued, Created: time.Now(), Plan: p}
	return id, nil
}

func (b *memBackend) Start(ctx context.Context, id string, p *plan.Plan, resume bool) (Run, error) {
	r := &memRun{done: make(chan struct{}), finish: make(chan event.State, 1), state: event.Preparing}
	b.mu.Lock()
	b.runs[id] = r
	b.started = append(b.started, id)
	b.resumed[id] = resume
	b.mu.Unlock()
	go r.loop(ctx)
	return r, nil
}

func (b *memBackend) List(ctx context.Context) ([]Stored, error) {
	b.mu.Lock()
	defer b.mu.Unlock()
	var out []Stored
	for id, s := range b.stored {
		c := *s
		// As the run store does: a run left unfinished by an owner that
		// is gone is listed interrupted.
		if !c.State.Final() && !b.owned[id] {
			c.State = event.Interrupted
		}
		out = append(out, c)
	}
	return out, nil
}

func (b *memBackend) Events(ctx context.Context, id string, from int) ([]event.Event, error) {
	b.mu.Lock()
	defer b.mu.Unlock()
	evs := b.events[id]
	if from > len(evs) {
		from = len(evs)
	}
	return append([]event.Event(nil), evs[from:]...), nil
}

func (b *memBackend) SetState(ctx context.Context, id string, s event.State, msg string) error {
	b.mu.Lock()
	defer b.mu.Unlock()
	b.stored[id].State = s
	return nil
}

func (b *memBackend) run(id string) *memRun {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.runs[id]
}

func waitState(t *testing.T, q *Queue, id string, want event.State) {
	t.Helper()
	deadline := time.Now().Add(3 * time.Second)
	for {
		in, err := q.Get(id)
		if err == nil && in.State == want {
			return
		}
		if time.Now().After(deadline) {
			t.Fatalf("run %s: state %q, want %q", id, in.State, want)
		}
		time.Sleep(time.Millisecond)
	}
}

func TestOneRunAtATime(t *testing.T) {
	be := newMem()
	var mu sync.Mutex
	var seen []string
	q, err := New(context.Background(), Options{Backend: be, OnEvent: func(id string, ev event.Event) {
		if ev.Type == event.TypeState {
			mu.Lock()
			seen = append(seen, id+":"+string(ev.State))
			mu.Unlock()
		}
	}})
	if err != nil {
		t.Fatal(err)
	}
	defer q.Close(context.Background())
	ctx := context.Background()
	a, _ := q.Submit(ctx, &plan.Plan{Name: "a"}, Source{})
	b, _ := q.Submit(ctx, &plan.Plan{Name: "b"}, Source{})
	c, _ := q.Submit(ctx, &plan.Plan{Name: "c"}, Source{})
	waitState(t, q, a, event.Settling)
	if in, _ := q.Get(b); in.State != event.Queued || in.Position != 1 {
		t.Fatalf("b: %+v, want queued at position 1", in)
	}
	if in, _ := q.Get(c); in.Position != 2 {
		t.Fatalf("c: position %d, want 2", in.Position)
	}
	if err := q.Pause(b); !errors.Is(err, ErrState) {
		t.Fatalf("pausing a queued run: %v, want ErrState", err)
	}
	if err := q.Abort(ctx, c); err != nil {
		t.Fatal(err)
	}
	if in, _ := q.Get(c); in.State != event.Aborted {
		t.Fatalf("c after abort: %s", in.State)
	}
	if q.RunningID() != a {
		t.Fatalf("running %q, want %q", q.RunningID(), a)
	}
	be.run(a).finish <- event.Done
	waitState(t, q, a, event.Done)
	waitState(t, q, b, event.Settling)
	if err := q.Pause(b); err != nil {
		t.Fatal(err)
	}
	waitState(t, q, b, event.Paused)
	if err := q.Resume(ctx, b); err != nil {
		t.Fatal(err)
	}
	waitState(t, q, b, event.Settling)
	if err := q.Abort(ctx, b); err != nil {
		t.Fatal(err)
	}
	waitState(t, q, b, event.Aborted)
	be.mu.Lock()
	started := fmt.Sprint(be.started)
	be.mu.Unlock()
	if started != fmt.Sprint([]string{a, b}) {
		t.Fatalf("started %s; the aborted queued run must never start", started)
	}
	if err := q.Resume(ctx, a); !errors.Is(err, ErrState) {
		t.Fatalf("resuming a done run: %v, want ErrState", err)
	}
	if _, err := q.Get("nope"); !errors.Is(err, ErrNotFound) {
		t.Fatalf("Get of an unknown run: %v", err)
	}
	list := q.List()
	if len(list) != 3 || list[0].ID != c {
		t.Fatalf("List newest first: %+v", list)
	}
	mu.Lock()
	defer mu.Unlock()
	if seen[0] != a+":queued" {
		t.Fatalf("events %v", seen)
	}
}

// Runs left unfinished (a crash, a shutdown) are listed as interrupted by
// the next queue and can be resumed from the store.
func TestInterruptedAfterRestart(t *testing.T) {
	be := newMem()
	ctx := context.Background()
	q, _ := New(ctx, Options{Backend: be})
	a, _ := q.Submit(ctx, &plan.Plan{Name: "a"}, Source{})
	b, _ := q.Submit(ctx, &plan.Plan{Name: "b"}, Source{})
	waitState(t, q, a, event.Settling)
	if err := q.Close(ctx); err != nil {
		t.Fatal(err)
	}
	if in, _ := q.Get(a); in.State != event.Interrupted {
		t.Fatalf("after close the live run is %s, want interrupted", in.State)
	}
	if _, err := q.Submit(ctx, &plan.Plan{}, Source{}); !errors.Is(err, ErrClosed) {
		t.Fatalf("Submit after Close: %v", err)
	}
	// b stayed queued in the store; a is interrupted there, or left
	// reading by a crash.
	be.mu.Lock()
	be.stored[a].State = event.Reading
	be.mu.Unlock()
	q2, err := New(ctx, Options{Backend: be})
	if err != nil {
		t.Fatal(err)
	}
	defer q2.Close(ctx)
	for _, id := range []string{a, b} {
		if in, _ := q2.Get(id); in.State != event.Interrupted {
			t.Fatalf("run %s after restart: %s, want interrupted", id, in.State)
		}
	}
	if err := q2.Resume(ctx, a); err != nil {
		t.Fatal(err)
	}
	waitState(t, q2, a, event.Settling)
	be.mu.Lock()
	resumed := be.resumed[a]
	be.mu.Unlock()
	if !resumed {
		t.Fatal("an interrupted run was restarted, not resumed from the store")
	}
	if err := q2.Abort(ctx, b); err != nil {
		t.Fatal(err)
	}
	if in, _ := q2.Get(b); in.State != event.Aborted {
		t.Fatalf("aborting an interrupted run: %s", in.State)
	}
}

// A run written by another owner (the CLI, the demo) is followed from the
// store's events until it ends, and cannot be steered from here.
func TestExternalRunFollowed(t *testing.T) {
	be := newMem()
	ctx := context.Background()
	be.stored["x1"] = &Stored{ID: "x1", Name: "cli run", State: event.Reading, Created: time.Now()}
	be.owned["x1"] = true
	be.events["x1"] = []event.Event{{Type: event.TypeState, State: event.Reading}}
	var mu sync.Mutex
	var got []event.Event
	q, err := New(ctx, Options{Backend: be, FollowEvery: 5 * time.Millisecond, RescanEvery: 4, OnEvent: func(id string, ev event.Event) {
		mu.Lock()
		got = append(got, ev)
		mu.Unlock()
	}})
	if err != nil {
		t.Fatal(err)
	}
	defer q.Close(ctx)
	if in, _ := q.Get("x1"); !in.External || in.State != event.Reading {
		t.Fatalf("external run: %+v", in)
	}
	if err := q.Pause("x1"); !errors.Is(err, ErrState) {
		t.Fatalf("pausing another owner's run: %v", err)
	}
	be.mu.Lock()
	be.events["x1"] = append(be.events["x1"],
		event.Event{Type: event.TypeState, State: event.Settling},
		event.Event{Type: event.TypeState, State: event.Done})
	be.stored["x1"].State = event.Done
	be.mu.Unlock()
	waitState(t, q, "x1", event.Done)
	if in, _ := q.Get("x1"); in.External {
		t.Fatal("a finished run is still followed")
	}
	mu.Lock()
	defer mu.Unlock()
	if len(got) != 2 || got[0].State != event.Settling || got[1].Run != "x1" {
		t.Fatalf("events forwarded: %+v (the history before New must not be repeated)", got)
	}
	// A run appearing later in the store is listed too.
	be.mu.Lock()
	be.stored["x2"] = &Stored{ID: "x2", Name: "later", State: event.Done, Created: time.Now()}
	be.mu.Unlock()
	deadline := time.Now().Add(3 * time.Second)
	for {
		if _, err := q.Get("x2"); err == nil {
			break
		}
		if time.Now().After(deadline) {
			t.Fatal("a run added to the store was not listed")
		}
		time.Sleep(5 * time.Millisecond)
	}
}
