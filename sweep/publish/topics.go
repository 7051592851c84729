// Package publish sends a bench's runs to an MQTT broker: the bench's
// status (retained, with an offline last will), each run's state and
// result (retained) and its points (QoS 1, one message per point). The
// publisher reads only the run store's durable files (meta.json,
// points.jsonl, result.json), so that a missing or slow broker never
// slows or stops a sweep; it tracks the last point the broker
// acknowledged per run and catches up after a reconnect. A receiver
// removes duplicates by seq.
package publish

import (
	"encoding/json"
	"fmt"
	"strconv"
	"strings"
	"time"

	"rolloff/sweep/event"
	"rolloff/sweep/point"
	"rolloff/sweep/store"
)

// Schema is the version of every payload this package writes (the
// "schema" field). A receiver ignores payloads of a schema it does not
// know.
const Schema = 1

// Root is the topic prefix of every bench.
const Root = "rolloff/v1/benches/"

// Topic names under Root + bench + "/".
const (
	TopicStatus = "status"
	TopicRuns   = "runs"
	TopicState  = "state"
	TopicPoints = "points"
	TopicResult = "result"
	TopicBlocks = "blocks"
)

// BlockPoints is how many points a retained block holds: block k of a
// run holds seq k·BlockPoints up to (k+1)·BlockPoints−1.
const BlockPoints = 64

// StatusTopic is rolloff/v1/benches/{bench}/status.
func StatusTopic(bench string) string { return Root + bench + "/" + TopicStatus }

// RunTopic is rolloff/v1/benches/{bench}/runs/{run}/{kind}, kind one of
// TopicState, TopicPoints, TopicResult.
func RunTopic(bench, run, kind string) string {
	return Root + bench + "/" + TopicRuns + "/" + run + "/" + kind
}

// BlockTopic is rolloff/v1/benches/{bench}/runs/{run}/blocks/{k}.
func BlockTopic(bench, run string, k int) string {
	return RunTopic(bench, run, TopicBlocks) + "/" + strconv.Itoa(k)
}

// ParseTopic splits a topic under Root into bench, run and kind: kind is
// TopicStatus (run empty) or one of the run kinds (TopicBlocks for
// any block). ok is false for any other topic.
func ParseTopic(topic string) (bench, run, kind string, ok bool) {
	rest, found := strings.CutPrefix(topic, Root)
	if !found {
		return "", "", "", false
	}
	parts := strings.Split(rest, "/")
	switch {
	case len(parts) == 2 && parts[1] == TopicStatus && parts[0] != "":
		return parts[0], "", TopicStatus, true
	case len(parts) == 4 && parts[1] == TopicRuns && parts[0] != "" && parts[2] != "":
		switch parts[3] {
		case TopicState, TopicPoints, TopicResult:
			return parts[0], parts[2], parts[3], true
		}
	case len(parts) == 5 && parts[1] == TopicRuns && parts[0] != "" && parts[2] != "" && parts[3] == TopicBlocks:
		if k, err := strconv.Atoi(parts[4]); err == nil && k >= 0 && strconv.Itoa(k) == parts[4] {
			return parts[0], parts[2], TopicBlocks, true
		}
	}
	return "", "", "", false
}

// Status is the retained payload of the status topic. The broker
// publishes the offline form (the last will) when the bench's
// connection is lost without a clean disconnect.
type Status struct {
	Schema int    `json:"schema"`
	Bench  string `json:"bench"`
	// Online is false in the last will and after a clean stop.
	Online bool `json:"online"`
	// Reason says why the bench is offline ("connection lost", "stopped").
	Reason string `json:"reason,omitempty"`
	// Run and RunState are the current run (the newest one not ended, or
	// else the newest) and its state.
	Run      string      `json:"run,omitempty"`
	RunState event.State `json:"run_state,omitempty"`
	// KeepAliveS is the MQTT keep-alive of the bench's connection: the
	// broker declares the bench offline at most 1.5 times this after it
	// stops answering.
	KeepAliveS float64   `json:"keep_alive_s,omitempty"`
	Version    string    `json:"version,omitempty"`
	Time       time.Time `json:"time"`
}

// State is the retained payload of runs/{run}/state.
type State struct {
	Schema  int         `json:"schema"`
	Bench   string      `json:"bench"`
	Run     string      `json:"run"`
	Name    string      `json:"name"`
	State   event.State `json:"state"`
	Message string      `json:"message,omitempty"`
	Created time.Time   `json:"created"`
	Updated time.Time   `json:"updated"`
	// Points is how many points the store holds; PlanPoints how many
	// the plan has (corner refinement may add more).
	Points     int               `json:"points"`
	PlanPoints int               `json:"plan_points"`
	Plan       store.PlanSummary `json:"plan"`
}

// Point is the payload of runs/{run}/points: one stored point.
type Point struct {
	Schema int         `json:"schema"`
	Bench  string      `json:"bench"`
	Run    string      `json:"run"`
	Seq    int         `json:"seq"`
	Point  point.Point `json:"point"`
	// Sent is when the bench handed the message to its client (a
	// repeated message carries the time it was repeated).
	Sent time.Time `json:"sent"`
}

// Block is the retained payload of runs/{run}/blocks/{k}: the run's
// points from FirstSeq on, up to BlockPoints of them (fewer in the last
// block while the run goes on). A receiver that joins late, or lost its
// subscription when the broker restarted, gets every point of the runs
// still published from the blocks.
type Block struct {
	Schema   int    `json:"schema"`
	Bench    string `json:"bench"`
	Run      string `json:"run"`
	FirstSeq int    `json:"first_seq"`
	// LastSeq and Count let a receiver that has every point of the
	// block skip decoding them.
	LastSeq int           `json:"last_seq"`
	Count   int           `json:"count"`
	Points  []point.Point `json:"points"`
}

// Result is the retained payload of runs/{run}/result: the run's
// result.json object as stored.
type Result struct {
	Schema int             `json:"schema"`
	Bench  string          `json:"bench"`
	Run    string          `json:"run"`
	Result json.RawMessage `json:"result"`
}

// CheckBenchID checks a bench id: 1..64 bytes of ASCII letters, digits,
// '.', '_' and '-', not starting with '.' or '-' (a single topic level
// with no MQTT wildcard).
func CheckBenchID(id string) error {
	ok := id != "" && len(id) <= 64 && id[0] != '.' && id[0] != '-'
	for i := 0; ok && i < len(id); i++ {
		c := id[i]
		ok = c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '.' || c == '_' || c == '-'
	}
	if !ok {
		return fmt.Errorf("bench id %q: want 1 to 64 of A-Z a-z 0-9 . _ - (not starting with . or -)", id)
	}
	return nil
}

// BenchIDFromFile derives a bench id from a bench file's name: the base
// name without its extension, other characters replaced by '-'.
func BenchIDFromFile(path string) string {
	base := path
	if i := strings.LastIndexAny(base, `/\`); i >= 0 {
		base = base[i+1:]
	}
	if i := strings.LastIndexByte(base, '.'); i > 0 {
		base = base[:i]
	}
	var b strings.Builder
	for i := 0; i < len(base) && b.Len() < 64; i++ {
		c := base[i]
		if c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '.' || c == '_' || c == '-' {
			b.WriteByte(c)
		} else {
			b.WriteByte('-')
		}
	}
	id := strings.TrimLeft(b.String(), ".-")
	if id == "" {
		return "bench"
	}
	return id
}
