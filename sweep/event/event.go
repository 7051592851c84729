// Package event is the timeline of a run: state transitions, stored points,
// operator prompts and the final result, as written to events.jsonl and
// streamed to live clients.
package event

import (
	"encoding/json"
	"time"

	"rolloff/sweep/point"
)

// State is a run's state in the scheduler's state machine.
type State string

// The run states.
const (
	Preparing       State = "preparing"
	Settling        State = "settling"
	Reading         State = "reading"
	Paused          State = "paused"
	WaitingOperator State = "waiting-for-operator"
	Done            State = "done"
	Aborted         State = "aborted"
	Failed          State = "failed"
	Interrupted     State = "interrupted" // found unfinished after a crash or shutdown; resumable
	Queued          State = "queued"      // accepted by the daemon, waiting for the bench
)

// Final reports whether s is an end state (done, aborted or failed).
func (s State) Final() bool { return s == Done || s == Aborted || s == Failed }

// Ended reports whether no sweep is running or due in state s: a final
// state, or interrupted (left unfinished by a crash or a shutdown, and
// resumable).
func (s State) Ended() bool { return s.Final() || s == Interrupted }

// Type is an event's kind, the "type" field of every live message.
type Type string

// Event types.
const (
	TypeState    Type = "state"    // a state transition
	TypePoint    Type = "point"    // a point was stored (fsynced) in points.jsonl
	TypePrompt   Type = "prompt"   // the operator must act (range change)
	TypeProgress Type = "progress" // current frequency, done/total, ETA
	TypeResult   Type = "result"   // the analysis result, on completion
	TypeLog      Type = "log"      // a notable condition: retry, reconnect, flag, fault
)

// Prompt asks the operator to select a converter range.
type Prompt struct {
	ID         int     `json:"id"`          // increases per run; a confirmation names it
	RangeIndex int     `json:"range_index"` // the range to select
	Range      string  `json:"range"`       // its name
	FromRange  string  `json:"from_range"`
	Reason     string  `json:"reason"`
	FreqHz     float64 `json:"freq_hz"`
}

// Progress is where the run is. ETA and Elapsed are wall time; JSON
// carries them as seconds, "eta_s" and "elapsed_s" (see MarshalJSON).
type Progress struct {
	Done    int
	Total   int
	FreqHz  float64
	ETA     time.Duration
	Elapsed time.Duration
}

// Event is one entry of a run's timeline.
type Event struct {
	Time     time.Time       `json:"time"`
	Type     Type            `json:"type"`
	Run      string          `json:"run,omitempty"`
	State    State           `json:"state,omitempty"`
	From     State           `json:"from,omitempty"`
	Message  string          `json:"message,omitempty"`
	Point    *point.Point    `json:"point,omitempty"`
	Prompt   *Prompt         `json:"prompt,omitempty"`
	Progress *Progress       `json:"progress,omitempty"`
	Result   json.RawMessage `json:"result,omitempty"`
}
