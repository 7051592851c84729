package web

import (
	"context"
	"math"
	"sync"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"rolloff/driver/bench"

	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/queue"
	"rolloff/sweep/store"
)

// sourceBackend is the real backend with a fast in-process point source
// in place of the scheduler: each point is appended to the real run
// store (fsynced) and then published, as the scheduler does, so that the
// daemon's own path (queue, hub, websocket) can be measured without the
// simulated instruments' settling times.
type sourceBackend struct {
	*bridge
	points     int
	interval   time.Duration
	startDelay time.Duration // before the first point, so that clients can join

	mu     sync.Mutex
	stored map[int]time.Time // seq → when AppendPoint returned
}

func (s *sourceBackend) Start(ctx context.Context, id string, p *plan.Plan, resume bool) (queue.Run, error) {
	r, err := s.own(id)
	if err != nil {
		return nil, err
	}
	src := &sourceRun{done: make(chan struct{}), state: event.Preparing, subs: map[int]chan event.Event{}}
	go func() {
		defer func() {
			src.finish()
			s.release(id)
		}()
		time.Sleep(s.startDelay)
		src.emit(event.Event{Type: event.TypeState, State: event.Reading, Run: id})
		_ = r.SetState(event.Reading, "")
		t0 := time.Now()
		for i := 0; i < s.points; i++ {
			if ctx.Err() != nil {
				src.emit(event.Event{Type: event.TypeState, State: event.Interrupted, Run: id})
				return
			}
			f := 10 * math.Pow(10, 4*float64(i)/float64(s.points))
			pt := point.Point{Seq: i, Index: i, FreqHz: f, VinVrms: 0.5, VoutVrms: 5, GainDB: 20, DCVolts: 0.5,
				RangeIndex: 8, Range: "10 V", RangeFSVrms: 10, FractionFS: 0.5, Readings: 2, Time: time.Now().UTC()}
			if err := r.AppendPoint(pt); err != nil {
				src.emit(event.Event{Type: event.TypeState, State: event.Failed, Run: id, Message: err.Error()})
				return
			}
			s.mu.Lock()
			s.stored[i] = time.Now()
			s.mu.Unlock()
			src.emit(event.Event{Type: event.TypePoint, Run: id, Point: &pt})
			src.emit(event.Event{Type: event.TypeProgress, Run: id, Progress: &event.Progress{Done: i + 1, Total: s.points, FreqHz: f}})
			if s.interval > 0 {
				if d := time.Until(t0.Add(time.Duration(i+1) * s.interval)); d > 0 {
					time.Sleep(d)
				}
			}
		}
		_ = r.SetState(event.Done, "")
		src.emit(event.Event{Type: event.TypeState, State: event.Done, Run: id})
	}()
	return src, nil
}

func (s *sourceBackend) storedAt(seq int) (time.Time, bool) {
	s.mu.Lock()
	defer s.mu.Unlock()
	t, ok := s.stored[seq]
	return t, ok
}

type sourceRun struct {
	mu    sync.Mutex
	subs  map[int]chan event.Event
	next  int
	state event.State
	done  chan struct{}
}

func (r *sourceRun) emit(ev event.Event) {
	if ev.Time.IsZero() {
		ev.Time = time.Now().UTC()
	}
	r.mu.Lock()
	defer r.mu.Unlock()
	if ev.Type == event.TypeState {
		r.state = ev.State
	}
	for _, c := range r.subs {
		c <- ev // the queue's subscription keeps up; a big buffer
	}
}

func (r *sourceRun) finish() {
	r.mu.Lock()
	for k, c := range r.subs {
		close(c)
		delete(r.subs, k)
	}
	r.mu.Unlock()
	close(r.done)
}

func (r *sourceRun) Pause() error              { return nil }
func (r *sourceRun) Resume() error             { return nil }
func (r *sourceRun) Abort() error              { return nil }
func (r *sourceRun) Confirm(pid, ri int) error { return nil }
func (r *sourceRun) Wait() error               { <-r.done; return nil }
func (r *sourceRun) Done() <-chan struct{}     { return r.done }
func (r *sourceRun) Snapshot() queue.Snapshot {
	r.mu.Lock()
	defer r.mu.Unlock()
	return queue.Snapshot{State: r.state}
}
func (r *sourceRun) Subscribe() (<-chan event.Event, func()) {
	r.mu.Lock()
	defer r.mu.Unlock()
	c := make(chan event.Event, 1<<16)
	select {
	case <-r.done:
		close(c)
		return c, func() {}
	default:
	}
	k := r.next
	r.next++
	r.subs[k] = c
	return c, func() {}
}

// newSourceServer serves the demo bench with the point source, storing
// runs in dir.
func newSourceServer(points int, interval time.Duration, dir string) (*Server, *sourceBackend, func(), error) {
	ctx, cancelOpen := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancelOpen()
	b, err := bench.OpenDemo(ctx, zerolog.Nop())
	if err != nil {
		return nil, nil, nil, err
	}
	st, err := store.Open(dir)
	if err != nil {
		b.Close()
		return nil, nil, nil, err
	}
	be := &sourceBackend{bridge: &bridge{b: b, st: st, log: zerolog.Nop(), owned: map[string]*store.Run{}},
		points: points, interval: interval, stored: map[int]time.Time{}}
	srv, err := newServer(Config{Addr: "127.0.0.1:0", Log: zerolog.Nop()}, be)
	if err != nil {
		b.Close()
		return nil, nil, nil, err
	}
	sctx, cancel := context.WithCancel(context.Background())
	served := make(chan error, 1)
	go func() { served <- srv.Serve(sctx) }()
	return srv, be, func() { cancel(); <-served; b.Close() }, nil
}

// startSource is newSourceServer in a test's temporary directory.
func startSource(tb testing.TB, points int, interval time.Duration) (*Server, *sourceBackend, func()) {
	tb.Helper()
	srv, be, stop, err := newSourceServer(points, interval, tb.TempDir())
	if err != nil {
		tb.Fatal(err)
	}
	return srv, be, stop
}
