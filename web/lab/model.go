// Package lab is the overview of a lab of benches, built from the MQTT
// broker alone: it subscribes to every bench's status, run states,
// points and results (see package publish for the topics), keeps each
// run's points once by seq, and serves a read-only page and websocket
// that show every bench, its current run's progress and plot, and its
// recent results. Nothing in it can steer a bench: that is done only
// through the bench's own daemon.
package lab

import (
	"encoding/json"
	"sort"
	"sync"
	"time"

	"rolloff/sweep/publish"
	"rolloff/sweep/store"
)

// Limits on what the lab keeps in memory.
const (
	// MaxRunsPerBench is how many runs per bench are kept; the oldest
	// (by creation) are forgotten first.
	MaxRunsPerBench = 12
	// MaxPointsPerRun caps the points kept of one run.
	MaxPointsPerRun = 100000
)

// Bench is what the lab knows of one bench.
type Bench struct {
	ID     string          `json:"id"`
	Status *publish.Status `json:"status,omitempty"`
	// Seen is when the lab last heard from the bench.
	Seen time.Time `json:"seen"`
	Runs []*Run    `json:"runs"` // oldest first
}

// Run is what the lab knows of one run of a bench.
type Run struct {
	ID     string          `json:"id"`
	State  *publish.State  `json:"state,omitempty"`
	Points []PointMsg      `json:"points"` // by seq, each seq once
	Result json.RawMessage `json:"result,omitempty"`
	// Repeats counts point messages received again and dropped.
	Repeats int `json:"repeats"`
}

// PointMsg is one point as the lab keeps and shows it.
type PointMsg = publish.Point

// view holds the benches, guarded by mu.
type view struct {
	mu      sync.Mutex
	benches map[string]*Bench
}

func newView() *view { return &view{benches: map[string]*Bench{}} }

func (v *view) bench(id string) *Bench {
	b := v.benches[id]
	if b == nil {
		b = &Bench{ID: id}
		v.benches[id] = b
	}
	return b
}

func (b *Bench) run(id string) *Run {
	for _, r := range b.Runs {
		if r.ID == id {
			return r
		}
	}
	r := &Run{ID: id}
	b.Runs = append(b.Runs, r)
	sort.SliceStable(b.Runs, func(i, j int) bool { return b.Runs[i].ID < b.Runs[j].ID })
	if len(b.Runs) > MaxRunsPerBench {
		b.Runs = b.Runs[len(b.Runs)-MaxRunsPerBench:]
	}
	return r
}

// hasAll reports whether r holds every seq from first to last.
func (r *Run) hasAll(first, last int) bool {
	i := sort.Search(len(r.Points), func(i int) bool { return r.Points[i].Seq >= first })
	j := sort.Search(len(r.Points), func(i int) bool { return r.Points[i].Seq > last })
	return j-i == last-first+1
}

// addPoint inserts p in r by seq and reports whether it was new.
func (r *Run) addPoint(p PointMsg) bool {
	n := len(r.Points)
	i := sort.Search(n, func(i int) bool { return r.Points[i].Seq >= p.Seq })
	if i < n && r.Points[i].Seq == p.Seq {
		r.Repeats++
		return false
	}
	if n >= MaxPointsPerRun {
		return false
	}
	r.Points = append(r.Points, PointMsg{})
	copy(r.Points[i+1:], r.Points[i:])
	r.Points[i] = p
	return true
}

// apply takes one broker message into the view and returns the live
// messages for the page (none when nothing changed or the message is
// not one of ours). Each payload is decoded once; a point's live
// message carries the payload as received.
func (v *view) apply(topic string, payload []byte, now time.Time) [][]byte {
	bench, run, kind, ok := publish.ParseTopic(topic)
	if !ok || publish.CheckBenchID(bench) != nil || len(payload) == 0 {
		return nil // not ours, or a retained message cleared
	}
	// live is {"type":kind,"bench":…,"run":…,field:raw}; bench and run
	// are checked ids, which JSON needs no escaping for.
	live := func(field string, raw []byte) [][]byte {
		m := make([]byte, 0, len(raw)+len(bench)+len(run)+64)
		m = append(m, `{"type":"`...)
		m = append(m, kind...)
		m = append(m, `","bench":"`...)
		m = append(m, bench...)
		if run != "" {
			m = append(m, `","run":"`...)
			m = append(m, run...)
		}
		m = append(m, `","`...)
		m = append(m, field...)
		m = append(m, `":`...)
		m = append(m, raw...)
		m = append(m, '}')
		return [][]byte{m}
	}
	switch kind {
	case publish.TopicStatus:
		var s publish.Status
		if json.Unmarshal(payload, &s) != nil || s.Schema != publish.Schema || s.Bench != bench {
			return nil
		}
		v.mu.Lock()
		defer v.mu.Unlock()
		b := v.bench(bench)
		b.Seen, b.Status = now, &s
		return live("status", payload)
	case publish.TopicState:
		var s publish.State
		if json.Unmarshal(payload, &s) != nil || s.Schema != publish.Schema || s.Run != run || store.ValidID(run) != nil {
			return nil
		}
		v.mu.Lock()
		defer v.mu.Unlock()
		b := v.bench(bench)
		b.Seen = now
		b.run(run).State = &s
		return live("state", payload)
	case publish.TopicPoints:
		var p PointMsg
		if json.Unmarshal(payload, &p) != nil || p.Schema != publish.Schema || p.Run != run || store.ValidID(run) != nil {
			return nil
		}
		v.mu.Lock()
		defer v.mu.Unlock()
		b := v.bench(bench)
		b.Seen = now
		if !b.run(run).addPoint(p) {
			return nil
		}
		return live("point", payload)
	case publish.TopicResult:
		var r publish.Result
		if json.Unmarshal(payload, &r) != nil || r.Schema != publish.Schema || r.Run != run || store.ValidID(run) != nil || !json.Valid(r.Result) {
			return nil
		}
		v.mu.Lock()
		defer v.mu.Unlock()
		b := v.bench(bench)
		b.Seen = now
		b.run(run).Result = r.Result
		return live("result", r.Result)
	case publish.TopicBlocks:
		return v.applyBlock(bench, run, payload, now)
	}
	return nil
}

// applyBlock takes the points of a block that the view lacks.
func (v *view) applyBlock(bench, run string, payload []byte, now time.Time) [][]byte {
	if store.ValidID(run) != nil {
		return nil
	}
	var head struct {
		Schema   int    `json:"schema"`
		Run      string `json:"run"`
		FirstSeq int    `json:"first_seq"`
		LastSeq  int    `json:"last_seq"`
		Count    int    `json:"count"`
	}
	if json.Unmarshal(payload, &head) != nil || head.Schema != publish.Schema || head.Run != run {
		return nil
	}
	v.mu.Lock()
	all := head.Count > 0 && head.LastSeq-head.FirstSeq+1 == head.Count && v.bench(bench).run(run).hasAll(head.FirstSeq, head.LastSeq)
	v.mu.Unlock()
	if all {
		return nil // nothing new: the usual case
	}
	var blk publish.Block
	if json.Unmarshal(payload, &blk) != nil || len(blk.Points) > publish.BlockPoints {
		return nil
	}
	v.mu.Lock()
	defer v.mu.Unlock()
	b := v.bench(bench)
	b.Seen = now
	r := b.run(run)
	var out [][]byte
	for _, pt := range blk.Points {
		p := PointMsg{Schema: blk.Schema, Bench: bench, Run: run, Seq: pt.Seq, Point: pt}
		if !r.addPoint(p) {
			r.Repeats-- // a block repeats points by design
			continue
		}
		if data, err := json.Marshal(map[string]any{"type": publish.TopicPoints, "bench": bench, "run": run, "point": p}); err == nil {
			out = append(out, data)
		}
	}
	return out
}

// Snapshot is the lab's whole view.
type Snapshot struct {
	Type    string   `json:"type"` // "snapshot"
	Broker  bool     `json:"broker_connected"`
	Benches []*Bench `json:"benches"`
}

// snapshot returns a deep enough copy of the view for encoding.
func (v *view) snapshot() []*Bench {
	v.mu.Lock()
	defer v.mu.Unlock()
	ids := make([]string, 0, len(v.benches))
	for id := range v.benches {
		ids = append(ids, id)
	}
	sort.Strings(ids)
	out := make([]*Bench, 0, len(ids))
	for _, id := range ids {
		b := *v.benches[id]
		if b.Status != nil {
			s := *b.Status
			b.Status = &s
		}
		b.Runs = make([]*Run, len(v.benches[id].Runs))
		for i, r := range v.benches[id].Runs {
			c := *r
			c.Points = append([]PointMsg(nil), r.Points...)
			b.Runs[i] = &c
		}
		out = append(out, &b)
	}
	return out
}
