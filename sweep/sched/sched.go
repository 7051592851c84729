package sched

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"sync"
	"time"

	"github.com/rs/zerolog"

	"rolloff/driver"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/settle"
)

// Errors of the run controls.
var (
	// ErrFinished is returned by a control used after the run ended.
	ErrFinished = errors.New("sched: run finished")
	// ErrNoPrompt is returned by Confirm when no prompt with that id is
	// pending.
	ErrNoPrompt = errors.New("sched: no such pending prompt")
	// ErrBadRange is returned by Confirm for a range index the converter
	// does not have.
	ErrBadRange = errors.New("sched: no such range")
	// ErrNotPaused is returned by Resume when the run is not paused.
	ErrNotPaused = errors.New("sched: run not paused")
	// ErrAborted is the cause returned by Wait after Abort.
	ErrAborted = errors.New("sched: run aborted")
)

// Instruments are the bench roles a run drives. Either DCVoltmeter and
// Converter, or ACVoltmeter, must be set; Generator always.
type Instruments struct {
	Generator   driver.Generator
	DCVoltmeter driver.DCVoltmeter
	Converter   driver.Converter
	ACVoltmeter driver.ACVoltmeter
	// VinMeter, when set, measures the DUT input at every point; the gain
	// is then Vout over the measured Vin instead of the generator setting.
	VinMeter driver.ACVoltmeter

	// TimeScale is how many physical (model) seconds pass per wall second:
	// 1 (or 0) on a real bench, more on a time-scaled simulated bench.
	// Every physical duration is divided by it to get the wall time.
	TimeScale float64
	// Limits are the bench's generator limits (MaxVrms protects the DUT);
	// zero fields fall back to Generator.Limits().
	Limits driver.GeneratorLimits
	// Meter lists the voltmeter's apertures, physical seconds. The zero
	// value means NPLC 1 and 10 at LineHz.
	Meter settle.Meter
	// LineHz is the power-line frequency (default 50).
	LineHz float64
	// ACRangeVrms is the AC voltmeter's range for the first point where
	// the sweep chooses it (an AC meter without autorange; 0: the highest).
	ACRangeVrms float64
	// DCRangeV is the DC voltmeter range for the converter output
	// (default: the converter's DC full scale times its over fraction).
	DCRangeV float64
	// HoldIntervalS and HoldS describe the converter's periodic output
	// hold, physical seconds (0: none).
	HoldIntervalS float64
	HoldS         float64
	// Log receives the run's log lines.
	Log zerolog.Logger
}

// Clock is the wall clock a run uses; tests substitute a fake.
type Clock interface {
	Now() time.Time
	// Sleep waits d or until ctx is done (returning ctx.Err()).
	Sleep(ctx context.Context, d time.Duration) error
}

type wallClock struct{}

func (wallClock) Now() time.Time { return time.Now() }

func (wallClock) Sleep(ctx context.Context, d time.Duration) error {
	if d <= 0 {
		return ctx.Err()
	}
	t := time.NewTimer(d)
	defer t.Stop()
	select {
	case <-t.C:
		return nil
	case <-ctx.Done():
		return ctx.Err()
	}
}

// WallClock is the real clock.
var WallClock Clock = wallClock{}

// Operator asks a person to select a converter range (a terminal prompt)
// and returns the range index they selected. It must return when ctx is
// done. A Confirm call may answer the same prompt first.
type Operator func(ctx context.Context, p event.Prompt) (rangeIndex int, err error)

// Opts are a run's options.
type Opts struct {
	// Operator answers range prompts; nil means Confirm only.
	Operator Operator
	// Resume continues the run's stored points: the measured plan indices
	// are skipped and Seq continues.
	Resume bool
	// RangeKnown says that CurrentRange is the converter's selected range
	// now (e.g. read from a simulated bench, or the last stored point).
	RangeKnown   bool
	CurrentRange int
	// Clock is the wall clock (default WallClock).
	Clock Clock
	// SubscriberBuffer is each subscriber's channel capacity (default 256).
	SubscriberBuffer int
	// Retries is the number of tries of an instrument operation failing
	// with a transient error (default 3), with RetryBackoff (default
	// 100 ms wall) doubling between tries.
	Retries      int
	RetryBackoff time.Duration
	// Finish, when set, ends a done run: it receives the run's points and
	// returns the result JSON for the result event (or nil). Package
	// sweep/sched/finish provides the analysis and exports.
	Finish FinishFunc
	// NoAnalysis skips Finish.
	NoAnalysis bool
}

// Status is a snapshot of a run.
type Status struct {
	State      event.State   `json:"state"`
	Done       int           `json:"done"`
	Total      int           `json:"total"`
	ETA        time.Duration `json:"-"` // wall time; "eta_s" in JSON
	Elapsed    time.Duration `json:"-"` // wall time; "elapsed_s" in JSON
	FreqHz     float64       `json:"freq_hz"`
	Prompt     *event.Prompt `json:"prompt,omitempty"`
	RangeIndex int           `json:"range_index"`
	Range      string        `json:"range"`
	VinVrms    float64       `json:"vin_vrms"`
	Err        string        `json:"error,omitempty"`
}

// FinishFunc is a run's finish step, called once its points are stored:
// the analysis and exports, typically (see package sweep/sched/finish).
// Its error is logged as a run event; the run is done either way.
type FinishFunc func(ctx context.Context, pts []point.Point) (resultJSON []byte, err error)

// MarshalJSON writes s with ETA and Elapsed as seconds, "eta_s" and
// "elapsed_s".
func (s Status) MarshalJSON() ([]byte, error) {
	type plain Status
	return json.Marshal(struct {
		plain
		ETAWallS float64 `json:"eta_s"`
		WallS    float64 `json:"elapsed_s"`
	}{plain(s), s.ETA.Seconds(), s.Elapsed.Seconds()})
}

// recorder is what a run needs of its store: store.Run implements it. A
// state event given to AppendEvent also records the run's state.
type recorder interface {
	AppendPoint(p point.Point) error
	AppendEvent(e event.Event) error
	Points() ([]point.Point, error)
}

// Run is one running sweep.
type Run struct {
	inst  Instruments
	plan  *plan.Plan
	rec   recorder
	opts  Opts
	clock Clock
	log   zerolog.Logger
	runID string

	cancel context.CancelCauseFunc
	done   chan struct{}
	err    error // set before done is closed

	mu       sync.Mutex
	m        machine
	subs     map[int]chan event.Event
	nextSub  int
	closed   bool // subscribers closed (run ended)
	status   Status
	pauseReq bool
	resumeCh chan struct{}
	// pauseCtx is cancelled by Pause to interrupt a dwell.
	pauseCtx    context.Context
	pauseCancel context.CancelFunc
	prompt      *event.Prompt
	answer      chan int // Confirm's range index for the pending prompt
	promptID    int
	t0          time.Time
	j           *journal
	// halting is the result of a generator Halt in flight (see haltOnce).
	halting chan error
}

// Subscribe returns a channel of the run's events from now on and a
// cancel function. Each subscriber has a bounded buffer and is sent to
// without blocking: a subscriber that falls a whole buffer behind is
// dropped (its channel is closed) so that it can never slow the sweep; it
// may subscribe again and read what it missed from the run store's
// events. The channel is closed when the run ends, after its last event.
func (r *Run) Subscribe() (<-chan event.Event, func()) {
	r.mu.Lock()
	defer r.mu.Unlock()
	n := r.opts.SubscriberBuffer
	if n <= 0 {
		n = 256
	}
	ch := make(chan event.Event, n)
	if r.closed {
		close(ch)
		return ch, func() {}
	}
	id := r.nextSub
	r.nextSub++
	r.subs[id] = ch
	return ch, func() {
		r.mu.Lock()
		defer r.mu.Unlock()
		if c, ok := r.subs[id]; ok {
			delete(r.subs, id)
			close(c)
		}
	}
}

// broadcastLocked sends ev to every subscriber without blocking.
func (r *Run) broadcastLocked(ev event.Event) {
	for id, ch := range r.subs {
		select {
		case ch <- ev:
		default:
			delete(r.subs, id)
			close(ch)
			r.log.Warn().Int("subscriber", id).Msg("slow subscriber dropped")
		}
	}
}

// emit queues ev for the run's events; the subscribers hear of it once it
// is stored (see journal).
func (r *Run) emit(ev event.Event) {
	if ev.Time.IsZero() {
		ev.Time = r.clock.Now()
	}
	ev.Run = r.runID
	r.j.event(ev)
}

// logEvent records a notable condition as a log event.
func (r *Run) logEvent(msg string) {
	r.log.Debug().Msg(msg)
	r.emit(event.Event{Type: event.TypeLog, Message: msg})
}

// transition moves the state machine to s and records it.
func (r *Run) transition(s event.State, msg string) error {
	r.mu.Lock()
	from := r.m.state
	if from == s && s != event.Settling {
		r.mu.Unlock()
		return nil
	}
	if err := r.m.to(s); err != nil {
		r.mu.Unlock()
		return err
	}
	r.status.State = s
	r.mu.Unlock()
	r.log.Debug().Str("from", string(from)).Str("to", string(s)).Str("why", msg).Msg("state")
	r.emit(event.Event{Type: event.TypeState, State: s, From: from, Message: msg})
	return nil
}

// State returns the run's current state.
func (r *Run) State() event.State {
	r.mu.Lock()
	defer r.mu.Unlock()
	return r.m.state
}

// Status returns a snapshot of the run.
func (r *Run) Status() Status {
	r.mu.Lock()
	defer r.mu.Unlock()
	s := r.status
	if r.prompt != nil {
		p := *r.prompt
		s.Prompt = &p
	}
	if !r.t0.IsZero() && !Terminal(s.State) {
		s.Elapsed = r.clock.Now().Sub(r.t0)
	}
	return s
}

// Pause asks the run to pause: the generator output goes off at the next
// safe step and the current point is measured again from the start after
// Resume.
func (r *Run) Pause() error {
	r.mu.Lock()
	defer r.mu.Unlock()
	if Terminal(r.m.state) {
		return ErrFinished
	}
	if r.pauseReq {
		return nil
	}
	r.pauseReq = true
	r.resumeCh = make(chan struct{})
	r.pauseCancel()
	return nil
}

// Resume continues a paused run.
func (r *Run) Resume() error {
	r.mu.Lock()
	defer r.mu.Unlock()
	if Terminal(r.m.state) {
		return ErrFinished
	}
	if !r.pauseReq {
		return ErrNotPaused
	}
	r.pauseReq = false
	close(r.resumeCh)
	return nil
}

// Abort stops the run: the generator output goes off and the run ends in
// the aborted state. Wait returns ErrAborted.
func (r *Run) Abort() error {
	r.mu.Lock()
	fin := Terminal(r.m.state)
	r.mu.Unlock()
	if fin {
		return ErrFinished
	}
	r.cancel(ErrAborted)
	return nil
}

// Confirm answers the pending operator prompt promptID: the operator has
// selected rangeIndex on the converter.
func (r *Run) Confirm(promptID, rangeIndex int) error {
	r.mu.Lock()
	defer r.mu.Unlock()
	if Terminal(r.m.state) {
		return ErrFinished
	}
	if r.prompt == nil || r.prompt.ID != promptID {
		return fmt.Errorf("%w: %d", ErrNoPrompt, promptID)
	}
	if r.inst.Converter == nil || rangeIndex < 0 || rangeIndex >= len(r.inst.Converter.Ranges()) {
		return fmt.Errorf("%w: %d", ErrBadRange, rangeIndex)
	}
	select {
	case r.answer <- rangeIndex:
	default: // already answered
	}
	return nil
}

// Wait waits for the run to end and returns nil when it is done, the cause
// otherwise (ErrAborted, the context's error, or the failure).
func (r *Run) Wait() error {
	<-r.done
	return r.err
}

// Done returns a channel closed when the run has ended.
func (r *Run) Done() <-chan struct{} { return r.done }
