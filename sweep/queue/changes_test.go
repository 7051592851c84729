package queue

import (
	"context"
	"testing"
	"time"

	"rolloff/sweep/event"
)

// changeBackend reports only what changed since its last listing, as the
// daemon's store index does.
type changeBackend struct {
	*memBackend
	last  map[string]event.State
	calls int
}

func (b *changeBackend) ListChanged(ctx context.Context) ([]Stored, error) {
	all, _ := b.List(ctx)
	b.mu.Lock()
	defer b.mu.Unlock()
	b.calls++
	if b.last == nil {
		b.last = map[string]event.State{}
	}
	var out []Stored
	for _, s := range all {
		if st, ok := b.last[s.ID]; !ok || st != s.State {
			out = append(out, s)
		}
		b.last[s.ID] = s.State
	}
	return out, nil
}

// A backend that lists changes is never listed whole after New; a run
// appearing in the store is adopted, and an interrupted run that another
// process takes up again is followed from the store.
func TestChangeLister(t *testing.T) {
	be := &changeBackend{memBackend: newMem()}
	ctx := context.Background()
	old := time.Now().Add(-time.Hour)
	be.stored["i1"] = &Stored{ID: "i1", Name: "left", State: event.Interrupted, Created: old}
	be.stored["d1"] = &Stored{ID: "d1", Name: "done", State: event.Done, Created: old.Add(time.Minute)}
	q, err := New(ctx, Options{Backend: be, FollowEvery: 5 * time.Millisecond, RescanEvery: 2})
	if err != nil {
		t.Fatal(err)
	}
	defer q.Close(ctx)
	be.mu.Lock()
	be.stored["n1"] = &Stored{ID: "n1", Name: "new", State: event.Done, Created: time.Now()}
	be.mu.Unlock()
	waitState(t, q, "n1", event.Done)
	page, total := q.Page(nil, 0, 2)
	if total != 3 || len(page) != 2 || page[0].ID != "n1" || page[1].ID != "d1" {
		t.Fatalf("page: %d of %d: %+v", len(page), total, page)
	}
	if page, total = q.Page(func(in *Info) bool { return in.State == event.Interrupted }, 0, 10); total != 1 || page[0].ID != "i1" {
		t.Fatalf("interrupted: %+v", page)
	}
	// The command line resumes i1.
	be.mu.Lock()
	be.stored["i1"].State = event.Reading
	be.owned["i1"] = true
	be.events["i1"] = []event.Event{{Type: event.TypeState, State: event.Reading}}
	be.mu.Unlock()
	waitState(t, q, "i1", event.Reading)
	if in, _ := q.Get("i1"); !in.External {
		t.Fatal("a run resumed elsewhere is not followed")
	}
	be.mu.Lock()
	be.events["i1"] = append(be.events["i1"], event.Event{Type: event.TypeState, State: event.Done})
	be.stored["i1"].State = event.Done
	be.mu.Unlock()
	waitState(t, q, "i1", event.Done)
}
