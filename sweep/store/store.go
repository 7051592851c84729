package store

import (
	"bytes"
	"crypto/rand"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"time"
	"unicode"

	"github.com/rs/zerolog"

	"rolloff/driver"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
)

// Sentinel errors; test with errors.Is.
var (
	// ErrDuplicatePoint refuses a second point for a plan index: a point
	// is recorded once or not at all.
	ErrDuplicatePoint = errors.New("store: point already recorded")
	// ErrLocked means another process (or another handle) owns the run.
	ErrLocked = errors.New("store: run is owned by another process")
	// ErrNotLocked refuses a write through a handle that does not own
	// the run; call Lock first.
	ErrNotLocked = errors.New("store: run not locked by this handle")
	// ErrCorrupt is a stored record that cannot be read back (wrapped in
	// a *CorruptError naming the file and line).
	ErrCorrupt = errors.New("store: corrupt run file")
	// ErrNotFound is a run id or file that does not exist.
	ErrNotFound = errors.New("store: not found")
	// ErrClosed is any use of a closed run.
	ErrClosed = errors.New("store: run closed")
	// ErrFailed is returned by every write after one whose undoing
	// failed: the file's end is unknown, so nothing more is appended.
	ErrFailed = errors.New("store: run files in an unknown state after a failed write")
)

// File names in a run directory: the store's own files, then the result
// files a finished run's exports write through Run.WriteFileAtomic.
const (
	FilePlanTOML = "plan.toml"
	FilePlanJSON = "plan.json"
	FileBench    = "bench.toml"
	FileMeta     = "meta.json"
	FilePoints   = "points.jsonl"
	FileEvents   = "events.jsonl"
	FileLock     = "lock"

	FileResult      = "result.json"
	FileResponseCSV = "response.csv"
	FileResponsePNG = "response.png"
	FileResponseSVG = "response.svg"
	FileResponsePDF = "response.pdf"
	// FileReport is the one-page run report (package sweep/report),
	// written by the finish step after the result files.
	FileReport = "report.pdf"
)

// ResultFiles returns the names of a finished run's result files, in the
// order the exports write them.
func ResultFiles() []string {
	return []string{FileResponseCSV, FileResult, FileResponsePNG, FileResponseSVG, FileResponsePDF}
}

// CLIDir is the CLI's store directory, relative to the working directory.
const CLIDir = "runs"

// MetaFormat is the version of meta.json this package writes.
const MetaFormat = 1

// DefaultDaemonDir returns the daemon's store directory:
// $XDG_DATA_HOME/rolloff/runs, or ~/.local/share/rolloff/runs when
// XDG_DATA_HOME is unset or not absolute (XDG Base Directory
// Specification).
func DefaultDaemonDir() (string, error) {
	if x := os.Getenv("XDG_DATA_HOME"); x != "" && filepath.IsAbs(x) {
		return filepath.Join(x, "rolloff", "runs"), nil
	}
	home, err := os.UserHomeDir()
	if err != nil {
		return "", fmt.Errorf("store: no data directory: %w", err)
	}
	return filepath.Join(home, ".local", "share", "rolloff", "runs"), nil
}

// Store is a directory of runs.
type Store struct {
	dir string
	log zerolog.Logger
}

// Open opens (creating it if needed) the store in dir. Leftovers of a run
// creation that a crash interrupted are removed.
func Open(dir string) (*Store, error) {
	if dir == "" {
		return nil, errors.New("store: empty directory name")
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("store: %w", err)
	}
	st, err := os.Stat(dir)
	if err != nil {
		return nil, fmt.Errorf("store: %w", err)
	}
	if !st.IsDir() {
		return nil, fmt.Errorf("store: %s is not a directory", dir)
	}
	s := &Store{dir: dir, log: zerolog.Nop()}
	s.cleanCreating()
	return s, nil
}

// SetLogger sets where the store logs recoveries (cut bytes, interrupted
// runs). The default discards them.
func (s *Store) SetLogger(l zerolog.Logger) { s.log = l }

// Dir returns the store's directory.
func (s *Store) Dir() string { return s.dir }

const creatingPrefix = ".creating-"

// cleanCreating removes half-made run directories whose creator is gone.
func (s *Store) cleanCreating() {
	ents, err := os.ReadDir(s.dir)
	if err != nil {
		return
	}
	for _, e := range ents {
		if !e.IsDir() || !strings.HasPrefix(e.Name(), creatingPrefix) {
			continue
		}
		d := filepath.Join(s.dir, e.Name())
		f, err := tryLock(filepath.Join(d, FileLock))
		if err != nil {
			continue // in use, or not ours to judge
		}
		f.Close()
		if info, err := e.Info(); err == nil && time.Since(info.ModTime()) > time.Minute {
			os.RemoveAll(d)
		}
	}
}

// ValidID checks a run id: 1..128 bytes of ASCII letters, digits, '.', '_'
// and '-', not starting with '.' or '-', without "..". The error is a
// *plan.FieldError for the field "id".
func ValidID(id string) error {
	if err := plan.CheckRunID(id); err != nil {
		return &plan.FieldError{Field: "id", Value: strconv.Quote(id), Allowed: err.Error()}
	}
	return nil
}

// Meta is a run's meta.json.
type Meta struct {
	Format  int         `json:"format"`
	ID      string      `json:"id"`
	Name    string      `json:"name"`
	Created time.Time   `json:"created"`
	Updated time.Time   `json:"updated"`
	State   event.State `json:"state"`
	Message string      `json:"message,omitempty"`
	// PlanFile is plan.toml or plan.json; PlanSource the name the plan
	// was given under (a file path or a request name).
	PlanFile   string                     `json:"plan_file"`
	PlanSource string                     `json:"plan_source,omitempty"`
	Identities map[string]driver.Identity `json:"identities,omitempty"`
	Plan       PlanSummary                `json:"plan"`
	// PointsStored is how many points were stored when the owner last
	// wrote meta.json (absent from a meta.json of an earlier version);
	// Figures are the result's figures, recorded when the run is done.
	// A run list reads these rather than points.jsonl and result.json.
	PointsStored *int     `json:"points_stored,omitempty"`
	Figures      *Figures `json:"figures,omitempty"`
}

// PlanSummary is what a run list shows of the plan.
type PlanSummary struct {
	Spacing        string  `json:"spacing"`
	StartHz        float64 `json:"start_hz"` // lowest frequency of the plan
	StopHz         float64 `json:"stop_hz"`  // highest
	Points         int     `json:"points"`
	BandsPerOctave int     `json:"bands_per_octave,omitempty"`
	Descending     bool    `json:"descending,omitempty"`
	Vrms           float64 `json:"vrms"`
	Strategy       string  `json:"strategy"`
	ReferenceHz    float64 `json:"reference_hz"`
	Refine         bool    `json:"refine,omitempty"`
	ThroughRun     string  `json:"through_run,omitempty"`
	// Unit and Batch are the plan's serial number and batch.
	Unit  string `json:"unit,omitempty"`
	Batch string `json:"batch,omitempty"`
}

// Summarize sums up a plan for meta.json.
func Summarize(p *plan.Plan) (PlanSummary, error) {
	fs, err := p.Freqs()
	if err != nil {
		return PlanSummary{}, err
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, f := range fs {
		lo, hi = math.Min(lo, f.Hz), math.Max(hi, f.Hz)
	}
	s := PlanSummary{
		Spacing: p.Frequencies.Spacing, StartHz: lo, StopHz: hi, Points: len(fs),
		Descending: p.Frequencies.Descending, Vrms: p.Level.Vrms, Strategy: p.Ranging.Strategy,
		ReferenceHz: p.ReferenceHz, Refine: p.Refine.Enabled, ThroughRun: p.Normalize.ThroughRun,
		Unit: p.Unit, Batch: p.Batch,
	}
	if s.Spacing == plan.SpacingBands {
		s.BandsPerOctave = p.Frequencies.BandsPerOctave
	}
	return s, nil
}

// CreateOpts describes a new run.
type CreateOpts struct {
	// Name is the run's title (default: the plan's name); a slug of it
	// ends the run id.
	Name string
	// PlanFile is the name the plan was given under; a name ending in
	// .json is stored as plan.json, anything else as plan.toml.
	PlanFile string
	// PlanData is the plan document as given. It must decode.
	PlanData []byte
	// Plan is the decoded (and validated) plan; decoded from PlanData
	// when nil.
	Plan *plan.Plan
	// BenchFile is the bench file as given; bench.toml is written when
	// it is not empty.
	BenchFile []byte
	// Identities are the instruments' *IDN? answers by role.
	Identities map[string]driver.Identity
	// State is the first state (default event.Preparing; the daemon's
	// queue uses event.Queued).
	State event.State
	// Now is the creation time (default time.Now()); for tests.
	Now time.Time
}

// Create makes a new run, owned (locked) by the returned handle. The run
// directory appears complete or not at all: it is filled under a
// temporary name and renamed into place.
func (s *Store) Create(o CreateOpts) (*Run, error) {
	if len(o.PlanData) == 0 {
		return nil, errors.New("store: create: no plan document")
	}
	planFile := FilePlanTOML
	if strings.EqualFold(filepath.Ext(o.PlanFile), ".json") {
		planFile = FilePlanJSON
	}
	p := o.Plan
	if dp, err := decodePlan(planFile, o.PlanFile, o.PlanData); err != nil {
		return nil, fmt.Errorf("store: create: %w", err)
	} else if p == nil {
		p = dp
	}
	sum, err := Summarize(p)
	if err != nil {
		return nil, fmt.Errorf("store: create: %w", err)
	}
	name := o.Name
	if name == "" {
		name = p.Name
	}
	if err := checkText("name", name, 200); err != nil {
		return nil, err
	}
	state := o.State
	if state == "" {
		state = event.Preparing
	}
	if !knownState(state) {
		return nil, &plan.FieldError{Field: "state", Value: strconv.Quote(string(state)), Allowed: "not a run state"}
	}
	now := o.Now
	if now.IsZero() {
		now = time.Now()
	}
	now = now.UTC()
	none := 0
	meta := Meta{PointsStored: &none,
		Format: MetaFormat, Name: name, Created: now, Updated: now, State: state,
		PlanFile: planFile, PlanSource: o.PlanFile, Identities: o.Identities, Plan: sum,
	}

	tmp, err := os.MkdirTemp(s.dir, creatingPrefix)
	if err != nil {
		return nil, fmt.Errorf("store: create: %w", err)
	}
	lockF, err := tryLock(filepath.Join(tmp, FileLock))
	if err != nil {
		os.RemoveAll(tmp)
		return nil, fmt.Errorf("store: create: %w", err)
	}
	fail := func(err error) (*Run, error) {
		lockF.Close()
		os.RemoveAll(tmp)
		return nil, fmt.Errorf("store: create: %w", err)
	}
	writeLockOwner(lockF)
	if err := writeFileAtomic(tmp, planFile, o.PlanData); err != nil {
		return fail(err)
	}
	if len(o.BenchFile) > 0 {
		if err := writeFileAtomic(tmp, FileBench, o.BenchFile); err != nil {
			return fail(err)
		}
	}
	for _, f := range []string{FilePoints, FileEvents} {
		if err := writeFileAtomic(tmp, f, nil); err != nil {
			return fail(err)
		}
	}
	base := now.Format("20060102-150405") + "-" + slug(name)
	var id, dir string
	for try := 0; ; try++ {
		id = base
		if try > 0 {
			id = base + "-" + randSuffix()
		}
		meta.ID = id
		mb, err := json.MarshalIndent(meta, "", "  ")
		if err != nil {
			return fail(err)
		}
		if err := writeFileAtomic(tmp, FileMeta, append(mb, '\n')); err != nil {
			return fail(err)
		}
		dir = filepath.Join(s.dir, id)
		if _, err := os.Lstat(dir); errors.Is(err, fs.ErrNotExist) {
			if err = os.Rename(tmp, dir); err == nil {
				break
			}
			if try >= 5 {
				return fail(err)
			}
		} else if try >= 5 {
			return fail(fmt.Errorf("no free run id for %s", base))
		}
	}
	if err := syncDir(s.dir); err != nil {
		os.RemoveAll(dir)
		lockF.Close()
		return nil, fmt.Errorf("store: create: %w", err)
	}
	r := &Run{store: s, id: id, dir: dir, log: s.log, meta: meta}
	if err := r.own(lockF); err != nil {
		os.RemoveAll(dir) // still locked: never listed half made
		lockF.Close()
		return nil, err
	}
	if err := r.appendEvent(event.Event{Time: now, Type: event.TypeState, State: state,
		Message: "created"}, true); err != nil {
		os.RemoveAll(dir)
		r.Close()
		return nil, err
	}
	return r, nil
}

func decodePlan(planFile, name string, data []byte) (*plan.Plan, error) {
	if planFile == FilePlanJSON {
		return plan.DecodeJSON(name, data)
	}
	return plan.DecodeTOML(name, data)
}

func randSuffix() string {
	var b [3]byte
	rand.Read(b[:])
	return hex.EncodeToString(b[:])
}

// slug makes a run id's tail of a name: lower-case ASCII letters and
// digits, other runs of characters as one '-', at most 40 bytes.
func slug(name string) string {
	var b strings.Builder
	dash := false
	for _, c := range strings.ToLower(name) {
		if c < 128 && (unicode.IsLetter(c) || unicode.IsDigit(c)) {
			if dash && b.Len() > 0 {
				b.WriteByte('-')
			}
			dash = false
			b.WriteRune(c)
			if b.Len() >= 40 {
				break
			}
		} else {
			dash = true
		}
	}
	if b.Len() == 0 {
		return "run"
	}
	return b.String()
}

func checkText(field, s string, n int) error {
	if len(s) > n {
		return &plan.FieldError{Field: field, Value: strconv.Quote(s[:40]) + "…", Allowed: fmt.Sprintf("at most %d bytes", n)}
	}
	for _, c := range s {
		if !unicode.IsPrint(c) || c == unicode.ReplacementChar {
			return &plan.FieldError{Field: field, Value: strconv.Quote(s), Allowed: "printable UTF-8 text only"}
		}
	}
	return nil
}

func knownState(s event.State) bool {
	switch s {
	case event.Preparing, event.Settling, event.Reading, event.Paused, event.WaitingOperator,
		event.Done, event.Aborted, event.Failed, event.Interrupted, event.Queued:
		return true
	}
	return false
}

// OpenRun opens run id for reading. When no live process owns the run,
// the run is recovered first: a torn end of points.jsonl or events.jsonl
// is cut (Recovery reports the bytes), temporary files are removed, and a
// run left in a non-final state is marked interrupted. A corrupt record
// before the end is an error (*CorruptError). Call Lock to write.
func (s *Store) OpenRun(id string) (*Run, error) {
	if err := ValidID(id); err != nil {
		return nil, err
	}
	dir := filepath.Join(s.dir, id)
	st, err := os.Stat(dir)
	if err != nil || !st.IsDir() {
		return nil, fmt.Errorf("store: run %s: %w", id, ErrNotFound)
	}
	r := &Run{store: s, id: id, dir: dir, log: s.log.With().Str("run", id).Logger()}
	m, err := r.loadMeta()
	if err != nil {
		return nil, err
	}
	lockF, err := tryLock(filepath.Join(dir, FileLock))
	if err == nil && s.waiting(m.State) {
		// Waiting in a daemon's queue: not interrupted, read only.
		lockF.Close()
		err = ErrLocked
	}
	switch {
	case errors.Is(err, ErrLocked):
		// A live owner: read only; its files' ends may be in flight.
		if _, err := r.readPoints(); err != nil {
			return nil, err
		}
	case err != nil:
		// No lock file can be made (a read-only store): nobody runs it.
		r.log.Warn().Err(err).Msg("no owner lock; recovery not written")
		if r.rec, err = r.recover(&m, false); err != nil {
			return nil, err
		}
	default:
		r.rec, err = r.recover(&m, true)
		lockF.Close()
		if err != nil {
			return nil, err
		}
	}
	r.meta = m
	return r, nil
}

// Summary is one run in a list.
type Summary struct {
	ID      string      `json:"id"`
	Name    string      `json:"name"`
	Created time.Time   `json:"created"`
	Updated time.Time   `json:"updated"`
	State   event.State `json:"state"`
	Message string      `json:"message,omitempty"`
	// Points is how many points are stored; PlanPoints how many the
	// plan has.
	Points     int         `json:"points"`
	PlanPoints int         `json:"plan_points"`
	Plan       PlanSummary `json:"plan"`
	// LowHz and HighHz are the corners from result.json, when there is
	// one that gives them.
	LowHz  *float64 `json:"low_hz,omitempty"`
	HighHz *float64 `json:"high_hz,omitempty"`
	// Figures are the result's figures (corners with their
	// uncertainties, peaking, the mask verdict), when there is a result.
	Figures *Figures `json:"figures,omitempty"`
	// Err says why the run could not be read; the other fields are then
	// partly empty.
	Err string `json:"error,omitempty"`
}

// List returns the store's runs, newest first. It only reads: a run left
// unfinished with no live owner is reported interrupted without being
// rewritten (OpenRun does that). A run that cannot be read is listed with
// Err set rather than failing the list.
func (s *Store) List() ([]Summary, error) {
	ents, err := os.ReadDir(s.dir)
	if err != nil {
		return nil, fmt.Errorf("store: list: %w", err)
	}
	var out []Summary
	for _, e := range ents {
		if !e.IsDir() || ValidID(e.Name()) != nil {
			continue
		}
		out = append(out, s.summary(e.Name()))
	}
	sort.SliceStable(out, func(i, j int) bool {
		if !out[i].Created.Equal(out[j].Created) {
			return out[i].Created.After(out[j].Created)
		}
		return out[i].ID > out[j].ID
	})
	return out, nil
}

func (s *Store) summary(id string) Summary {
	sum, _ := s.readSummary(id)
	return sum
}

// readSummary reads run id's summary from its meta.json; points.jsonl is
// read only when meta.json does not record the number of points (a run
// not ended, or a meta.json of an earlier version), result.json only when
// meta.json has no figures for a done run or the result was written after
// it. It returns the state meta.json records (the summary's may be
// interrupted instead).
func (s *Store) readSummary(id string) (Summary, event.State) {
	if testHookSummaryRead != nil {
		testHookSummaryRead(id)
	}
	sum := Summary{ID: id}
	r := &Run{store: s, id: id, dir: filepath.Join(s.dir, id), log: s.log}
	m, err := r.loadMeta()
	if err != nil {
		sum.Err = err.Error()
		return sum, ""
	}
	sum.Name, sum.Created, sum.Updated, sum.State, sum.Message = m.Name, m.Created, m.Updated, m.State, m.Message
	sum.Plan, sum.PlanPoints = m.Plan, m.Plan.Points
	if !m.State.Ended() && !r.liveOwner() && !s.waiting(m.State) {
		sum.State = event.Interrupted
	}
	if m.PointsStored != nil && m.State.Ended() {
		sum.Points = *m.PointsStored
	} else if data, err := readRegular(filepath.Join(r.dir, FilePoints)); err == nil {
		sum.Points = countLines(data)
	} else if !errors.Is(err, fs.ErrNotExist) {
		sum.Err = err.Error()
	}
	sum.Figures = m.Figures
	if m.Figures == nil || resultNewer(r.dir) {
		if data, err := readRegular(filepath.Join(r.dir, FileResult)); err == nil {
			sum.Figures = FiguresOf(data)
		}
	}
	if sum.Figures != nil {
		sum.LowHz, sum.HighHz = sum.Figures.LowHz, sum.Figures.HighHz
	}
	return sum, m.State
}

// testHookSummaryRead, when set, is called by each readSummary.
var testHookSummaryRead func(id string)

// resultNewer reports whether the run's result.json was written after its
// meta.json (an analysis run again after the run ended).
func resultNewer(dir string) bool {
	rs, err := os.Lstat(filepath.Join(dir, FileResult))
	if err != nil {
		return false
	}
	ms, err := os.Lstat(filepath.Join(dir, FileMeta))
	return err == nil && rs.ModTime().After(ms.ModTime())
}

// countLines counts the complete non-blank lines of a JSON-lines file.
func countLines(data []byte) int {
	n := 0
	for {
		i := bytes.IndexByte(data, '\n')
		if i < 0 {
			return n
		}
		if len(bytes.TrimSpace(data[:i])) > 0 {
			n++
		}
		data = data[i+1:]
	}
}

// corners reads low_hz and high_hz from a result document, at its top
// level or in an object one level down; anything else is ignored.
func corners(data []byte) (low, high *float64) {
	var doc map[string]json.RawMessage
	if json.Unmarshal(data, &doc) != nil {
		return nil, nil
	}
	num := func(raw json.RawMessage) *float64 {
		var v float64
		if json.Unmarshal(raw, &v) != nil || math.IsNaN(v) || math.IsInf(v, 0) || v <= 0 {
			return nil
		}
		return &v
	}
	low, high = num(doc["low_hz"]), num(doc["high_hz"])
	keys := make([]string, 0, len(doc))
	for k := range doc {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		if low != nil && high != nil {
			break
		}
		var sub map[string]json.RawMessage
		if json.Unmarshal(doc[k], &sub) != nil {
			continue
		}
		if low == nil {
			low = num(sub["low_hz"])
		}
		if high == nil {
			high = num(sub["high_hz"])
		}
	}
	return low, high
}
