package reliability

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
)

// runFiles is a run directory as read straight from disk, without the
// store package: what an engineer (or another tool) would find.
type runFiles struct {
	dir        string
	points     []point.Point
	pointsTorn int // bytes after the last newline of points.jsonl
	pointsBad  []string
	events     []event.Event
	eventsTorn int
	metaOK     bool
	metaState  event.State
	metaMsg    string
	metaID     string
}

// splitJSONL parses a JSON-lines file into objects of type T. It returns
// the records, the bytes after the last newline (a torn tail) and a
// description of every complete line that is not a JSON object.
func splitJSONL[T any](data []byte) (recs []T, torn int, bad []string) {
	lines := bytes.Split(data, []byte("\n"))
	torn = len(lines[len(lines)-1])
	for i, l := range lines[:len(lines)-1] {
		if len(bytes.TrimSpace(l)) == 0 {
			continue
		}
		var v T
		if err := json.Unmarshal(l, &v); err != nil || bytes.TrimSpace(l)[0] != '{' {
			bad = append(bad, fmt.Sprintf("line %d: %v: %.80q", i+1, err, l))
			continue
		}
		recs = append(recs, v)
	}
	return recs, torn, bad
}

// readRunFiles reads points.jsonl, events.jsonl and meta.json of dir.
func readRunFiles(t *testing.T, dir string) runFiles {
	t.Helper()
	rf := runFiles{dir: dir}
	data, err := os.ReadFile(filepath.Join(dir, "points.jsonl"))
	if err != nil {
		t.Errorf("%s: %v", dir, err)
	}
	rf.points, rf.pointsTorn, rf.pointsBad = splitJSONL[point.Point](data)
	data, err = os.ReadFile(filepath.Join(dir, "events.jsonl"))
	if err != nil {
		t.Errorf("%s: %v", dir, err)
	}
	var evBad []string
	rf.events, rf.eventsTorn, evBad = splitJSONL[event.Event](data)
	for _, b := range evBad {
		t.Errorf("%s: events.jsonl %s", dir, b)
	}
	data, err = os.ReadFile(filepath.Join(dir, "meta.json"))
	if err != nil {
		t.Errorf("%s: %v", dir, err)
		return rf
	}
	var m struct {
		ID      string      `json:"id"`
		State   event.State `json:"state"`
		Message string      `json:"message"`
	}
	if err := json.Unmarshal(data, &m); err != nil {
		t.Errorf("%s: meta.json is not valid JSON: %v", dir, err)
		return rf
	}
	rf.metaOK, rf.metaState, rf.metaMsg, rf.metaID = true, m.State, m.Message, m.ID
	return rf
}

// lastState returns the last state event of the run.
func (rf runFiles) lastState() (event.Event, bool) {
	for i := len(rf.events) - 1; i >= 0; i-- {
		if rf.events[i].Type == event.TypeState {
			return rf.events[i], true
		}
	}
	return event.Event{}, false
}

// mentions reports whether a state or log event's message contains one of
// the substrings (case-insensitive), and returns that message.
func (rf runFiles) mentions(subs ...string) (string, bool) {
	for _, e := range rf.events {
		if e.Type != event.TypeState && e.Type != event.TypeLog {
			continue
		}
		m := strings.ToLower(e.Message)
		for _, s := range subs {
			if strings.Contains(m, strings.ToLower(s)) {
				return e.Message, true
			}
		}
	}
	return "", false
}

// expect is what a run must satisfy.
type expect struct {
	freqs []plan.Freq   // the plan's frequencies
	acked []point.Point // points a subscriber or the API was told of
	cause []string      // a stopped run's events must mention one of these
	off   func() bool   // reports whether the generator output is off now
	final []event.State // states the run may end in (default: done, or a safe stop)
	note  func(string)  // receives a line for the test log
}

// verifyPoints checks the stored points: unique by plan index and by
// frequency, in sequence, physically valid, on the plan's frequencies, and
// a superset of the acknowledged points (identical records). It returns
// the stored plan indices.
func verifyPoints(t *testing.T, rf runFiles, e expect) map[int]bool {
	t.Helper()
	for _, b := range rf.pointsBad {
		t.Errorf("%s: points.jsonl %s", rf.dir, b)
	}
	if rf.pointsTorn > 0 {
		t.Errorf("%s: points.jsonl ends with %d bytes of a torn line", rf.dir, rf.pointsTorn)
	}
	byIndex := map[int]int{}
	byFreq := map[float64]int{}
	dups := 0
	for i, p := range rf.points {
		if p.Seq != i {
			t.Errorf("%s: point %d has seq %d", rf.dir, i, p.Seq)
		}
		if j, ok := byIndex[p.Index]; ok {
			dups++
			t.Errorf("%s: plan index %d stored twice (seq %d and %d)", rf.dir, p.Index, j, p.Seq)
		}
		byIndex[p.Index] = p.Seq
		// A drift check measures the reference again, by design.
		if j, ok := byFreq[p.FreqHz]; ok && !p.Has(point.FlagDriftCheck) {
			dups++
			t.Errorf("%s: %g Hz stored twice (seq %d and %d)", rf.dir, p.FreqHz, j, p.Seq)
		}
		if !p.Has(point.FlagDriftCheck) {
			byFreq[p.FreqHz] = p.Seq
		}
		if err := validPoint(p, e.freqs); err != nil {
			t.Errorf("%s: point seq %d: %v", rf.dir, p.Seq, err)
		}
	}
	tally.dups.Add(int64(dups))
	lost := 0
	for _, a := range e.acked {
		if a.Seq < 0 || a.Seq >= len(rf.points) {
			lost++
			t.Errorf("%s: acknowledged point seq %d (%g Hz) is not on disk (%d points stored)", rf.dir, a.Seq, a.FreqHz, len(rf.points))
			continue
		}
		ja, _ := json.Marshal(a)
		jd, _ := json.Marshal(rf.points[a.Seq])
		if !bytes.Equal(ja, jd) {
			lost++
			t.Errorf("%s: acknowledged point seq %d differs on disk:\n told %s\n disk %s", rf.dir, a.Seq, ja, jd)
		}
	}
	tally.lost.Add(int64(lost))
	idx := map[int]bool{}
	for i := range byIndex {
		idx[i] = true
	}
	return idx
}

// validPoint checks one stored point against physics and the plan.
func validPoint(p point.Point, freqs []plan.Freq) error {
	for name, v := range map[string]float64{"freq_hz": p.FreqHz, "vin_vrms": p.VinVrms, "vout_vrms": p.VoutVrms,
		"gain_db": p.GainDB, "dc_v": p.DCVolts, "range_fs_vrms": p.RangeFSVrms} {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("%s = %g", name, v)
		}
	}
	if !(p.FreqHz > 0) || !(p.VinVrms > 0) || !(p.VoutVrms > 0) {
		return fmt.Errorf("freq %g Hz, vin %g, vout %g: want all positive", p.FreqHz, p.VinVrms, p.VoutVrms)
	}
	if g := 20 * math.Log10(p.VoutVrms/p.VinVrms); math.Abs(g-p.GainDB) > 1e-9*math.Max(1, math.Abs(g)) {
		return fmt.Errorf("gain_db %g, but 20·log10(vout/vin) = %g", p.GainDB, g)
	}
	if p.Readings < 1 && !p.Has(point.FlagClipped) && !p.Has(point.FlagOverRange) {
		return fmt.Errorf("%d readings", p.Readings)
	}
	if len(freqs) > 0 {
		if p.Index < len(freqs) {
			if f := freqs[p.Index].Hz; math.Abs(p.FreqHz-f) > 1e-9*f {
				return fmt.Errorf("plan index %d is %g Hz, stored %g Hz", p.Index, f, p.FreqHz)
			}
		} else if !p.Has(point.FlagRefined) && !p.Has(point.FlagDriftCheck) {
			return fmt.Errorf("index %d beyond the plan's %d points without the refined or drift-check flag", p.Index, len(freqs))
		}
	}
	return nil
}

// verifyRun checks a run directory after its run ended: the points (see
// verifyPoints), and then either a done run holding every plan point once,
// or a run stopped in a failed, interrupted or aborted state whose events
// give the cause — in both cases with the generator output off. It
// counts the outcome in the tally and returns the final state.
func verifyRun(t *testing.T, dir string, e expect) event.State {
	t.Helper()
	rf := readRunFiles(t, dir)
	idx := verifyPoints(t, rf, e)
	state := rf.metaState
	if ls, ok := rf.lastState(); !ok || ls.State != state {
		t.Errorf("%s: meta.json says %q, the last state event %q", dir, state, ls.State)
	}
	off := true
	if e.off != nil {
		off = e.off()
		if !off {
			t.Errorf("%s: run ended %s with the generator output on", dir, state)
		}
	}
	if len(e.final) > 0 {
		ok := false
		for _, s := range e.final {
			ok = ok || s == state
		}
		if !ok {
			t.Errorf("%s: run ended %q (%s), want one of %v", dir, state, rf.metaMsg, e.final)
		}
	}
	switch state {
	case event.Done:
		missing := 0
		for i := range e.freqs {
			if !idx[i] {
				missing++
				t.Errorf("%s: done, but plan point %d (%g Hz) is not stored", dir, i, e.freqs[i].Hz)
			}
		}
		tally.lost.Add(int64(missing))
		if missing == 0 && off {
			tally.completed.Add(1)
		}
	case event.Failed, event.Interrupted, event.Aborted:
		msg, ok := rf.mentions(e.cause...)
		if len(e.cause) > 0 && !ok {
			t.Errorf("%s: run %s (%q), but no event names the cause (one of %q)", dir, state, rf.metaMsg, e.cause)
		}
		if (ok || len(e.cause) == 0) && off {
			tally.stopped.Add(1)
		}
		if e.note != nil {
			e.note(fmt.Sprintf("%s after %d of %d points; cause in events: %q", state, len(rf.points), len(e.freqs), msg))
		}
	default:
		t.Errorf("%s: run left in state %q (%s): neither done nor clearly stopped", dir, state, rf.metaMsg)
	}
	return state
}
