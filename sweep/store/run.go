package store

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"maps"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/rs/zerolog"

	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
)

// appendFile is what a run appends to: an *os.File opened O_APPEND (an
// interface so that tests can make writes fail).
type appendFile interface {
	io.Writer
	Sync() error
	Truncate(size int64) error
	Close() error
}

// Recovery is what opening a run found and repaired.
type Recovery struct {
	PointsCutBytes int64 // torn end cut from points.jsonl
	EventsCutBytes int64 // torn end cut from events.jsonl
	TempsRemoved   int   // temporary files a crash left
	// Interrupted is set when the run was found in PrevState, not final,
	// with no live owner, and marked interrupted.
	Interrupted bool
	PrevState   event.State
}

// Run is one run directory. A handle from Create, or from OpenRun after
// Lock, owns the run and may write it; any handle may read it. One
// goroutine may write while others read.
type Run struct {
	store *Store
	id    string
	dir   string
	log   zerolog.Logger

	wmu sync.Mutex // serialises writes

	mu         sync.RWMutex // guards what follows
	meta       Meta
	rec        Recovery
	lockF      *os.File // held while this handle owns the run
	points     appendFile
	events     appendFile
	pointsSize int64
	eventsSize int64
	pts        []point.Point
	index      map[int]int // plan index → position in pts
	failed     error       // set when a write could not be undone
	closed     bool
}

// ID returns the run id.
func (r *Run) ID() string { return r.id }

// Dir returns the run directory.
func (r *Run) Dir() string { return r.dir }

// Meta returns a copy of the run's meta data.
func (r *Run) Meta() Meta {
	r.mu.RLock()
	defer r.mu.RUnlock()
	m := r.meta
	m.Identities = maps.Clone(m.Identities)
	return m
}

// Recovery reports what opening the run repaired.
func (r *Run) Recovery() Recovery {
	r.mu.RLock()
	defer r.mu.RUnlock()
	return r.rec
}

// Locked reports whether this handle owns the run.
func (r *Run) Locked() bool {
	r.mu.RLock()
	defer r.mu.RUnlock()
	return r.lockF != nil
}

func (r *Run) path(name string) string { return filepath.Join(r.dir, name) }

func (r *Run) loadMeta() (Meta, error) {
	data, err := readRegular(r.path(FileMeta))
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return Meta{}, fmt.Errorf("store: run %s: no %s: %w", r.id, FileMeta, ErrNotFound)
		}
		return Meta{}, fmt.Errorf("store: run %s: %w", r.id, err)
	}
	var m Meta
	if err := json.Unmarshal(data, &m); err != nil {
		return Meta{}, &CorruptError{File: r.path(FileMeta), Line: 1, Err: err}
	}
	if m.ID != r.id {
		return Meta{}, &CorruptError{File: r.path(FileMeta), Line: 1, Err: fmt.Errorf("id %q, directory %q", m.ID, r.id)}
	}
	if m.PlanFile != FilePlanTOML && m.PlanFile != FilePlanJSON {
		return Meta{}, &CorruptError{File: r.path(FileMeta), Line: 1, Err: fmt.Errorf("plan_file %q", m.PlanFile)}
	}
	return m, nil
}

// liveOwner reports whether someone holds the run's lock.
func (r *Run) liveOwner() bool {
	f, err := tryLock(r.path(FileLock))
	if errors.Is(err, ErrLocked) {
		return true
	}
	if f != nil {
		f.Close()
	}
	return false
}

// recover checks (and, when write is set, repairs) the run files, and
// marks a run left unfinished interrupted in m. The caller holds the lock
// or knows that nobody can.
func (r *Run) recover(m *Meta, write bool) (Recovery, error) {
	var rec Recovery
	pts, pr, plen, err := r.scanPointsFile()
	if err != nil {
		return rec, err
	}
	_, er, elen, err := r.scanEventsFile()
	if err != nil {
		return rec, err
	}
	rec.PointsCutBytes = plen - int64(pr.Good)
	rec.EventsCutBytes = elen - int64(er.Good)
	if write {
		for _, c := range []struct {
			name    string
			good    int
			cut     int64
			records int
		}{{FilePoints, pr.Good, rec.PointsCutBytes, pr.Records}, {FileEvents, er.Good, rec.EventsCutBytes, er.Records}} {
			if c.cut == 0 {
				continue
			}
			if err := truncateSync(r.path(c.name), int64(c.good)); err != nil {
				r.log.Warn().Err(err).Str("file", c.name).Msg("torn end not cut")
				continue
			}
			r.log.Warn().Str("run", r.id).Str("file", c.name).Int64("bytes", c.cut).Int("records_kept", c.records).
				Msg("cut a torn last line")
			msg := fmt.Sprintf("recovery: cut a torn last line of %d bytes from %s (a write interrupted by a crash); %d records kept", c.cut, c.name, c.records)
			if err := r.appendEventLine(event.Event{Time: time.Now().UTC(), Type: event.TypeLog, Run: r.id, Message: msg}); err != nil {
				r.log.Warn().Err(err).Msg("could not record the recovery in the events")
			}
		}
		rec.TempsRemoved = removeTemps(r.dir)
	}
	st := m.State
	if !st.Ended() {
		rec.Interrupted, rec.PrevState = true, st
		msg := "found " + string(st) + " with no live owner"
		now := time.Now().UTC()
		n := len(pts)
		m.PointsStored = &n
		if write {
			if err := r.writeInterrupted(*m, now, msg); err != nil {
				r.log.Warn().Err(err).Msg("could not record the interruption")
			}
		}
		m.State, m.Message, m.Updated = event.Interrupted, msg, now
		r.log.Warn().Str("was", string(st)).Int("points", len(pts)).Msg("run interrupted")
	}
	return rec, nil
}

// writeInterrupted records the interruption: a state event, then meta.
func (r *Run) writeInterrupted(m Meta, now time.Time, msg string) error {
	if err := r.appendEventLine(event.Event{Time: now, Type: event.TypeState, Run: r.id,
		State: event.Interrupted, From: m.State, Message: msg}); err != nil {
		return err
	}
	m.State, m.Message, m.Updated = event.Interrupted, msg, now
	return r.writeMeta(m)
}

// appendEventLine appends one event to events.jsonl and syncs it, outside
// the writer's path (recovery runs before any writer exists).
func (r *Run) appendEventLine(e event.Event) error {
	line, err := json.Marshal(e)
	if err != nil {
		return err
	}
	f, err := os.OpenFile(r.path(FileEvents), os.O_WRONLY|os.O_APPEND|os.O_CREATE, 0o644)
	if err != nil {
		return err
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return err
	}
	size := st.Size()
	return appendLine(f, &size, append(line, '\n'), true)
}

func truncateSync(path string, size int64) error {
	f, err := os.OpenFile(path, os.O_WRONLY, 0)
	if err != nil {
		return err
	}
	defer f.Close()
	if err := f.Truncate(size); err != nil {
		return err
	}
	return f.Sync()
}

// readFile reads a run file; limit ≥ 0 reads only that many bytes
// (what this handle knows to be complete).
func (r *Run) readFile(name string, limit int64) ([]byte, error) {
	f, err := openRegular(r.dir, r.id, name)
	if errors.Is(err, ErrNotFound) && !errors.Is(err, ErrNotRegular) {
		return nil, nil
	}
	if err != nil {
		return nil, fmt.Errorf("store: run %s: %w", r.id, err)
	}
	defer f.Close()
	var rd io.Reader = f
	if limit >= 0 {
		rd = io.LimitReader(f, limit)
	}
	data, err := io.ReadAll(rd)
	if err != nil {
		return nil, fmt.Errorf("store: run %s: %w", r.id, err)
	}
	return data, nil
}

func (r *Run) scanPointsFile() ([]point.Point, scanResult, int64, error) {
	data, err := r.readFile(FilePoints, -1)
	if err != nil {
		return nil, scanResult{}, 0, err
	}
	pts, res, err := scanPoints(r.path(FilePoints), data)
	return pts, res, int64(len(data)), err
}

func (r *Run) scanEventsFile() ([]event.Event, scanResult, int64, error) {
	data, err := r.readFile(FileEvents, -1)
	if err != nil {
		return nil, scanResult{}, 0, err
	}
	evs, res, err := scanEvents(r.path(FileEvents), data)
	return evs, res, int64(len(data)), err
}

// readPoints reads the stored points from disk, ignoring a torn end.
func (r *Run) readPoints() ([]point.Point, error) {
	f, err := os.Open(r.path(FilePoints))
	if errors.Is(err, fs.ErrNotExist) {
		return nil, nil
	}
	if err != nil {
		return nil, fmt.Errorf("store: run %s: %w", r.id, err)
	}
	defer f.Close()
	return ReadPoints(f, r.path(FilePoints))
}

// Lock makes this handle the run's owner, so that it may write: it takes
// the run's lock (ErrLocked if another process or handle has it, retried
// briefly), repairs a torn end and loads the stored points. Create returns
// a handle already locked.
func (r *Run) Lock() error {
	r.wmu.Lock()
	defer r.wmu.Unlock()
	r.mu.RLock()
	closed, locked := r.closed, r.lockF != nil
	r.mu.RUnlock()
	if closed {
		return ErrClosed
	}
	if locked {
		return nil
	}
	var f *os.File
	var err error
	for i := 0; i < 20; i++ { // a List or OpenRun may hold it for an instant
		if f, err = tryLock(r.path(FileLock)); !errors.Is(err, ErrLocked) {
			break
		}
		time.Sleep(10 * time.Millisecond)
	}
	if err != nil {
		if errors.Is(err, ErrLocked) {
			pid, _ := os.ReadFile(r.path(FileLock))
			return fmt.Errorf("store: run %s (owner pid %s): %w", r.id, strings.TrimSpace(string(pid)), ErrLocked)
		}
		return err
	}
	m, err := r.loadMeta()
	if err != nil {
		f.Close()
		return err
	}
	rec, err := r.recover(&m, true)
	if err != nil {
		f.Close()
		return err
	}
	if err := r.own(f); err != nil {
		f.Close()
		return err
	}
	writeLockOwner(f)
	r.mu.Lock()
	r.meta = m
	if rec != (Recovery{}) {
		r.rec = rec
	}
	r.mu.Unlock()
	return nil
}

func writeLockOwner(f *os.File) {
	if f.Truncate(0) == nil {
		f.WriteAt([]byte(strconv.Itoa(os.Getpid())+"\n"), 0)
	}
}

// own opens the append files and loads the points; f is the held lock.
func (r *Run) own(f *os.File) error {
	pts, res, _, err := r.scanPointsFile()
	if err != nil {
		return err
	}
	_, eres, _, err := r.scanEventsFile()
	if err != nil {
		return err
	}
	pf, err := os.OpenFile(r.path(FilePoints), os.O_WRONLY|os.O_APPEND|os.O_CREATE, 0o644)
	if err != nil {
		return fmt.Errorf("store: run %s: %w", r.id, err)
	}
	ef, err := os.OpenFile(r.path(FileEvents), os.O_WRONLY|os.O_APPEND|os.O_CREATE, 0o644)
	if err != nil {
		pf.Close()
		return fmt.Errorf("store: run %s: %w", r.id, err)
	}
	// Appends must start on a line boundary: cut a torn end the recovery
	// could not (the lock is held, so it is not a write in flight).
	for _, c := range []struct {
		f    *os.File
		good int
	}{{pf, res.Good}, {ef, eres.Good}} {
		st, err := c.f.Stat()
		if err == nil && st.Size() != int64(c.good) {
			if err = c.f.Truncate(int64(c.good)); err == nil {
				err = c.f.Sync()
			}
		}
		if err != nil {
			pf.Close()
			ef.Close()
			return fmt.Errorf("store: run %s: cannot cut the torn end of %s: %w", r.id, filepath.Base(c.f.Name()), err)
		}
	}
	index := make(map[int]int, len(pts))
	for i, p := range pts {
		index[p.Index] = i
	}
	r.mu.Lock()
	r.lockF, r.points, r.events = f, pf, ef
	r.pointsSize, r.eventsSize = int64(res.Good), int64(eres.Good)
	r.pts, r.index = pts, index
	r.mu.Unlock()
	return nil
}

// writable checks that this handle may write; the caller holds wmu.
func (r *Run) writable() error {
	r.mu.RLock()
	defer r.mu.RUnlock()
	switch {
	case r.closed:
		return ErrClosed
	case r.failed != nil:
		return fmt.Errorf("store: run %s: %w (%w)", r.id, ErrFailed, r.failed)
	case r.lockF == nil:
		return fmt.Errorf("store: run %s: %w", r.id, ErrNotLocked)
	}
	return nil
}

// appendLine writes line with one write call and, when sync is set,
// fsyncs. On failure it cuts the file back to *size so that no partial or
// unacknowledged line stays behind; it advances *size on success.
func appendLine(f appendFile, size *int64, line []byte, sync bool) error {
	n, err := f.Write(line)
	if err == nil && n < len(line) {
		err = io.ErrShortWrite
	}
	if err == nil && sync {
		err = f.Sync()
	}
	if err != nil {
		if n > 0 || sync {
			if terr := f.Truncate(*size); terr != nil {
				return &undoError{err: err, undo: terr}
			}
			f.Sync()
		}
		return err
	}
	*size += int64(n)
	return nil
}

// undoError is a failed write whose undoing failed too.
type undoError struct{ err, undo error }

func (e *undoError) Error() string {
	return e.err.Error() + "; cutting it back failed: " + e.undo.Error()
}
func (e *undoError) Unwrap() []error { return []error{e.err, e.undo} }

// writeFailed records a failed write; the caller holds wmu.
func (r *Run) writeFailed(file string, err error) error {
	var ue *undoError
	if errors.As(err, &ue) {
		r.mu.Lock()
		r.failed = err
		r.mu.Unlock()
	}
	r.log.Error().Err(err).Str("file", file).Msg("write failed")
	return fmt.Errorf("store: run %s: append to %s: %w", r.id, file, err)
}

// NextSeq is the Seq the next point must carry: the number of points
// stored.
func (r *Run) NextSeq() int {
	r.mu.RLock()
	defer r.mu.RUnlock()
	if r.lockF == nil {
		pts, err := r.readPoints()
		if err != nil {
			return 0
		}
		return len(pts)
	}
	return len(r.pts)
}

// Has reports whether a point for plan index is stored.
func (r *Run) Has(index int) bool {
	r.mu.RLock()
	if r.lockF != nil {
		_, ok := r.index[index]
		r.mu.RUnlock()
		return ok
	}
	r.mu.RUnlock()
	m, err := r.Measured()
	return err == nil && m.Indices[index]
}

// AppendPoint stores p: one line in points.jsonl, written with one write
// call and fsynced before it returns, so that nobody hears of a point
// that is not on disk. p.Seq must be NextSeq(); a second point for the
// same plan index is refused with ErrDuplicatePoint. Every float must be
// finite (an unmeasurable value is a flag, not a NaN). On a write error
// (disk full, read-only) the file is cut back to its previous end and
// the error returned; the points stored before stay readable.
func (r *Run) AppendPoint(p point.Point) error {
	r.wmu.Lock()
	defer r.wmu.Unlock()
	if err := r.writable(); err != nil {
		return err
	}
	r.mu.RLock()
	next := len(r.pts)
	j, dup := r.index[p.Index]
	var prev point.Point
	if dup {
		prev = r.pts[j]
	}
	r.mu.RUnlock()
	switch {
	case dup:
		return fmt.Errorf("store: run %s: plan index %d (%s Hz, seq %d): %w", r.id, p.Index,
			strconv.FormatFloat(prev.FreqHz, 'g', -1, 64), prev.Seq, ErrDuplicatePoint)
	case p.Index < 0:
		return &plan.FieldError{File: r.path(FilePoints), Field: "point.index", Value: strconv.Itoa(p.Index), Allowed: "must be ≥ 0"}
	case p.Seq != next:
		return &plan.FieldError{File: r.path(FilePoints), Field: "point.seq", Value: strconv.Itoa(p.Seq),
			Allowed: fmt.Sprintf("must be %d, the number of points stored", next)}
	case !(p.FreqHz > 0):
		return &plan.FieldError{File: r.path(FilePoints), Field: "point.freq_hz",
			Value: strconv.FormatFloat(p.FreqHz, 'g', -1, 64), Allowed: "must be > 0"}
	}
	if f, x := nonFinite(p); f != "" {
		return &plan.FieldError{File: r.path(FilePoints), Field: "point." + f,
			Value: strconv.FormatFloat(x, 'g', -1, 64), Allowed: "must be finite (flag the point instead)"}
	}
	if p.Time.IsZero() {
		p.Time = time.Now().UTC()
	}
	line, err := json.Marshal(p)
	if err != nil {
		return fmt.Errorf("store: run %s: point %d: %w", r.id, p.Seq, err)
	}
	r.mu.RLock()
	f, size := r.points, r.pointsSize
	r.mu.RUnlock()
	if err := appendLine(f, &size, append(line, '\n'), true); err != nil {
		return r.writeFailed(FilePoints, err)
	}
	r.mu.Lock()
	r.pointsSize = size
	r.index[p.Index] = len(r.pts)
	r.pts = append(r.pts, p)
	r.mu.Unlock()
	return nil
}

func jsonTag(f reflect.StructField) string {
	t := f.Tag.Get("json")
	if i := strings.IndexByte(t, ','); i >= 0 {
		t = t[:i]
	}
	return t
}

// nonFinite returns the JSON name and value of the first NaN or infinite
// float of p.
func nonFinite(p point.Point) (string, float64) {
	v := reflect.ValueOf(p)
	t := v.Type()
	for i := range t.NumField() {
		if fv := v.Field(i); fv.Kind() == reflect.Float64 {
			if x := fv.Float(); math.IsNaN(x) || math.IsInf(x, 0) {
				return jsonTag(t.Field(i)), x
			}
		}
	}
	return "", 0
}

// syncType reports whether events of type t are fsynced when appended.
func syncType(t event.Type) bool {
	return t == event.TypeState || t == event.TypePrompt || t == event.TypeResult || t == event.TypePoint
}

// AppendEvent appends e to events.jsonl, filling Run and Time when empty.
// State, prompt, result and point events are fsynced before it returns;
// progress and log events are not. A state event also updates meta.json,
// as SetState does.
func (r *Run) AppendEvent(e event.Event) error {
	if e.Type == event.TypeState {
		return r.SetState(e.State, e.Message)
	}
	r.wmu.Lock()
	defer r.wmu.Unlock()
	if err := r.writable(); err != nil {
		return err
	}
	return r.appendEvent(e, syncType(e.Type))
}

func (r *Run) appendEvent(e event.Event, sync bool) error {
	if e.Run == "" {
		e.Run = r.id
	}
	if e.Time.IsZero() {
		e.Time = time.Now().UTC()
	}
	line, err := json.Marshal(e)
	if err != nil {
		return fmt.Errorf("store: run %s: event: %w", r.id, err)
	}
	r.mu.RLock()
	f, size := r.events, r.eventsSize
	r.mu.RUnlock()
	if err := appendLine(f, &size, append(line, '\n'), sync); err != nil {
		return r.writeFailed(FileEvents, err)
	}
	r.mu.Lock()
	r.eventsSize = size
	r.mu.Unlock()
	return nil
}

// SetState moves the run to state: a state event (fsynced) in
// events.jsonl, then meta.json replaced atomically.
func (r *Run) SetState(state event.State, message string) error {
	if !knownState(state) {
		return &plan.FieldError{Field: "state", Value: strconv.Quote(string(state)), Allowed: "not a run state"}
	}
	r.wmu.Lock()
	defer r.wmu.Unlock()
	if err := r.writable(); err != nil {
		return err
	}
	now := time.Now().UTC()
	r.mu.RLock()
	m := r.meta
	r.mu.RUnlock()
	if err := r.appendEvent(event.Event{Time: now, Type: event.TypeState, State: state, From: m.State, Message: message}, true); err != nil {
		return err
	}
	m.State, m.Message, m.Updated = state, message, now
	r.mu.RLock()
	n := len(r.pts)
	r.mu.RUnlock()
	m.PointsStored = &n
	if state == event.Done {
		r.recordResult(&m) // the finish step wrote it before the done state
	}
	if err := r.writeMeta(m); err != nil {
		return err
	}
	r.mu.Lock()
	r.meta = m
	r.mu.Unlock()
	return nil
}

// writeMeta replaces meta.json with m.
func (r *Run) writeMeta(m Meta) error {
	data, err := json.MarshalIndent(m, "", "  ")
	if err != nil {
		return fmt.Errorf("store: run %s: meta: %w", r.id, err)
	}
	return writeFileAtomic(r.dir, FileMeta, append(data, '\n'))
}

// Points returns the stored points in order. The owner answers from
// memory; another handle reads points.jsonl, leaving out a line still
// being written.
func (r *Run) Points() ([]point.Point, error) {
	r.mu.RLock()
	if r.lockF != nil {
		pts := make([]point.Point, len(r.pts))
		copy(pts, r.pts)
		r.mu.RUnlock()
		return pts, nil
	}
	r.mu.RUnlock()
	return r.readPoints()
}

// Measured is what a resumer needs to know of the points stored.
type Measured struct {
	Indices   map[int]bool // plan indices stored
	FreqsHz   []float64    // their frequencies, in Seq order
	NextSeq   int          // Seq of the next point
	NextIndex int          // one past the highest plan index stored
}

// Measured sums up the stored points for resuming.
func (r *Run) Measured() (Measured, error) {
	pts, err := r.Points()
	if err != nil {
		return Measured{}, err
	}
	m := Measured{Indices: make(map[int]bool, len(pts)), NextSeq: len(pts)}
	for _, p := range pts {
		m.Indices[p.Index] = true
		m.FreqsHz = append(m.FreqsHz, p.FreqHz)
		m.NextIndex = max(m.NextIndex, p.Index+1)
	}
	return m, nil
}

// Events returns the run's events in order, leaving out a line still
// being written.
func (r *Run) Events() ([]event.Event, error) {
	r.mu.RLock()
	limit := int64(-1)
	if r.lockF != nil {
		limit = r.eventsSize
	}
	r.mu.RUnlock()
	data, err := r.readFile(FileEvents, limit)
	if err != nil {
		return nil, err
	}
	evs, _, err := scanEvents(r.path(FileEvents), data)
	return evs, err
}

// Plan decodes the stored plan file (defaults filled, not validated).
func (r *Run) Plan() (*plan.Plan, error) {
	m := r.Meta()
	data, err := readRegular(r.path(m.PlanFile))
	if err != nil {
		return nil, fmt.Errorf("store: run %s: %w", r.id, err)
	}
	return decodePlan(m.PlanFile, r.id+"/"+m.PlanFile, data)
}

// Files a run directory may hold besides its own: lower-case names with
// one of these extensions.
var otherExt = map[string]bool{".json": true, ".csv": true, ".png": true, ".svg": true, ".pdf": true, ".txt": true}

// ownFiles are the store's files: readable through OpenFile, never
// written through WriteFileAtomic.
var ownFiles = map[string]bool{FilePlanTOML: true, FilePlanJSON: true, FileBench: true,
	FileMeta: true, FilePoints: true, FileEvents: true}

// checkName checks a file name for OpenFile (own files allowed) or
// WriteFileAtomic (own files refused): 1..64 bytes of a-z, 0-9, '_', '-'
// and '.', starting with a letter or digit, no "..", ending in .json,
// .csv, .png, .svg, .pdf or .txt.
func checkName(name string, write bool) error {
	if ownFiles[name] {
		if write {
			return &plan.FieldError{Field: "file", Value: strconv.Quote(name), Allowed: "written by the store itself"}
		}
		return nil
	}
	bad := name == "" || len(name) > 64 || strings.Contains(name, "..") || !otherExt[filepath.Ext(name)]
	for i := 0; i < len(name) && !bad; i++ {
		c := name[i]
		ok := c >= 'a' && c <= 'z' || c >= '0' && c <= '9' || (i > 0 && (c == '_' || c == '-' || c == '.'))
		bad = !ok
	}
	if bad {
		return &plan.FieldError{Field: "file", Value: strconv.Quote(name),
			Allowed: "a run file name: a-z 0-9 _ - . (at most 64 bytes) ending in .json, .csv, .png, .svg, .pdf or .txt"}
	}
	return nil
}

// WriteFileAtomic writes a result file (result.json, response.csv, a
// plot) into the run directory atomically. The name is checked (see
// OpenFile); the store's own files cannot be written this way. It does
// not need the lock.
func (r *Run) WriteFileAtomic(name string, data []byte) error {
	if err := checkName(name, true); err != nil {
		return err
	}
	r.mu.RLock()
	closed := r.closed
	r.mu.RUnlock()
	if closed {
		return ErrClosed
	}
	return writeFileAtomic(r.dir, name, data)
}

// OpenFile opens a file of the run for reading: one of the store's own
// files (plan, bench, meta, points, events) or a result file whose name
// passes the check of WriteFileAtomic. Nothing outside the run directory
// can be reached: no separators, no "..", no symbolic link out.
func (r *Run) OpenFile(name string) (*os.File, error) {
	if err := checkName(name, false); err != nil {
		return nil, err
	}
	return openRegular(r.dir, r.id, name)
}

// Close releases the run: closes its files and, for the owner, the lock.
// It is safe to call twice.
func (r *Run) Close() error {
	r.wmu.Lock()
	defer r.wmu.Unlock()
	r.mu.Lock()
	defer r.mu.Unlock()
	if r.closed {
		return nil
	}
	r.closed = true
	var errs []error
	for _, c := range []appendFile{r.points, r.events} {
		if c != nil {
			errs = append(errs, c.Close())
		}
	}
	if r.lockF != nil {
		errs = append(errs, r.lockF.Close())
		r.lockF = nil
	}
	r.points, r.events = nil, nil
	return errors.Join(errs...)
}
