package sched

import (
	"fmt"
	"sync"

	"rolloff/sweep/event"
	"rolloff/sweep/point"
)

// journal writes a run's points and events to its store in order, in a
// goroutine of its own, and tells the subscribers of each only once it is
// stored: a point is fsynced by the store before anyone hears of it. The
// sweep does not wait for the disk: it only learns of a failed write at
// its next point (and then fails). A crash loses at most the points still
// queued, which were never announced, and which a resume measures again.
type journal struct {
	r *Run

	mu      sync.Mutex
	queue   []journalItem
	wake    chan struct{}
	err     error // the first failed point write
	evErr   error // the first failed write of a state, prompt or result event
	stopped bool
	done    chan struct{}
}

type journalItem struct {
	ev    *event.Event
	pt    *point.Point
	flush chan struct{}
}

func newJournal(r *Run) *journal {
	j := &journal{r: r, wake: make(chan struct{}, 1), done: make(chan struct{})}
	go j.loop()
	return j
}

func (j *journal) push(it journalItem) {
	j.mu.Lock()
	j.queue = append(j.queue, it)
	j.mu.Unlock()
	select {
	case j.wake <- struct{}{}:
	default:
	}
}

// event queues an event.
func (j *journal) event(ev event.Event) { j.push(journalItem{ev: &ev}) }

// point queues a point; its point event follows it once it is stored.
func (j *journal) point(p point.Point) { j.push(journalItem{pt: &p}) }

// Err returns the first failed point write.
func (j *journal) Err() error {
	j.mu.Lock()
	defer j.mu.Unlock()
	return j.err
}

// EventErr returns the first failed write of a state, prompt or result
// event: the run's record on disk does not say what happened.
func (j *journal) EventErr() error {
	j.mu.Lock()
	defer j.mu.Unlock()
	return j.evErr
}

// flush waits until everything queued so far is written and returns the
// first failed point write.
func (j *journal) flush() error {
	ch := make(chan struct{})
	j.push(journalItem{flush: ch})
	<-ch
	return j.Err()
}

// stop flushes and ends the writer.
func (j *journal) stop() {
	j.flush()
	j.mu.Lock()
	j.stopped = true
	j.mu.Unlock()
	select {
	case j.wake <- struct{}{}:
	default:
	}
	<-j.done
}

func (j *journal) loop() {
	defer close(j.done)
	for {
		j.mu.Lock()
		q := j.queue
		j.queue = nil
		stopped := j.stopped
		j.mu.Unlock()
		if len(q) == 0 {
			if stopped {
				return
			}
			<-j.wake
			continue
		}
		for _, it := range q {
			switch {
			case it.flush != nil:
				close(it.flush)
			case it.pt != nil:
				j.writePoint(*it.pt)
			case it.ev != nil:
				j.writeEvent(*it.ev)
			}
		}
	}
}

func (j *journal) writePoint(p point.Point) {
	r := j.r
	if j.Err() != nil {
		return // the run is failing: nothing after a lost point is stored
	}
	if err := r.rec.AppendPoint(p); err != nil {
		j.mu.Lock()
		j.err = fmt.Errorf("sched: store point %d: %w", p.Seq, err)
		j.mu.Unlock()
		r.log.Error().Err(err).Int("seq", p.Seq).Msg("cannot store point")
		return
	}
	j.writeEvent(event.Event{Time: p.Time, Type: event.TypePoint, Point: &p, Run: r.runID})
}

func (j *journal) writeEvent(ev event.Event) {
	r := j.r
	if err := r.rec.AppendEvent(ev); err != nil {
		r.log.Error().Err(err).Str("type", string(ev.Type)).Msg("cannot store event")
		if ev.Type == event.TypeState || ev.Type == event.TypePrompt || ev.Type == event.TypeResult {
			j.mu.Lock()
			if j.evErr == nil {
				j.evErr = fmt.Errorf("sched: store %s event: %w", ev.Type, err)
			}
			j.mu.Unlock()
		}
	}
	r.mu.Lock()
	r.broadcastLocked(ev)
	r.mu.Unlock()
}
