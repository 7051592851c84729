package queue

import (
	"context"
	"errors"
	"fmt"
	"testing"

	"rolloff/sweep/event"
	"rolloff/sweep/plan"
)

// TestQueueBound: at most MaxQueued runs wait; a submission past it is
// ErrFull and leaves nothing behind; the live run does not count, and a
// place freed by an abort can be taken again.
func TestQueueBound(t *testing.T) {
	be := newMem()
	q, err := New(context.Background(), Options{Backend: be, MaxQueued: 3})
	if err != nil {
		t.Fatal(err)
	}
	defer q.Close(context.Background())
	ctx := context.Background()
	live, _ := q.Submit(ctx, &plan.Plan{Name: "live"}, Source{})
	waitState(t, q, live, event.Settling)
	var waiting []string
	for i := 0; i < 3; i++ {
		id, err := q.Submit(ctx, &plan.Plan{Name: fmt.Sprint("w", i)}, Source{})
		if err != nil {
			t.Fatalf("submission %d of 3: %v", i+1, err)
		}
		waiting = append(waiting, id)
	}
	n := len(q.List())
	for i := 0; i < 5; i++ {
		if _, err := q.Submit(ctx, &plan.Plan{Name: "over"}, Source{}); !errors.Is(err, ErrFull) {
			t.Fatalf("submission past the bound: %v, want ErrFull", err)
		}
	}
	if len(q.List()) != n {
		t.Fatalf("refused submissions listed: %d runs, want %d", len(q.List()), n)
	}
	if err := q.Abort(ctx, waiting[0]); err != nil {
		t.Fatal(err)
	}
	if _, err := q.Submit(ctx, &plan.Plan{Name: "again"}, Source{}); err != nil {
		t.Fatalf("submission after a place was freed: %v", err)
	}
	if _, err := q.Submit(ctx, &plan.Plan{Name: "over"}, Source{}); !errors.Is(err, ErrFull) {
		t.Fatalf("submission past the bound again: %v, want ErrFull", err)
	}
}
