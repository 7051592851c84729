package store

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"reflect"
	"runtime"
	"sort"
	"sync"
	"time"

	"rolloff/sweep/event"
)

// The index of a store: DirIndex is its directory inside the store (a
// name no run id can have), FileIndex the file in it.
const (
	DirIndex  = ".index"
	FileIndex = "runs.jsonl"
	// IndexFormat is the version of runs.jsonl this package writes; a file
	// of another version is ignored and the index built again.
	IndexFormat = 1
)

// IndexCheckPerRefresh is how many runs in a final state Refresh checks
// for a change made behind the index's back (a result analysed again, a
// run removed by hand), in turn, besides the runs not final, which it
// checks every time.
const IndexCheckPerRefresh = 256

// racyWindow is how recent a directory's modification time may be and
// still be trusted as the mark of its last change: file times advance in
// coarse steps, so a change within the same step as the read would
// otherwise be missed.
const racyWindow = 2 * time.Second

// Index is a store's list of runs kept in memory and in the store's
// index file, so that listing a store of tens of thousands of runs reads
// neither every run's files nor even every meta.json. A run's entry is
// read again only when its directory changed (its modification time
// moved: meta.json and result files are replaced by rename), or, for a
// run not in a final state, at each Refresh. The index file is only a
// cache: a missing, stale or damaged one (a crash) is repaired at Open
// from the runs' directories, reading meta.json of the changed runs and
// points.jsonl only where meta.json does not record how many points
// there are. Its methods are safe for concurrent use.
type Index struct {
	s    *Store
	scan sync.Mutex // one rescan at a time

	mu         sync.Mutex
	runs       map[string]*indexEntry
	storeMtime int64 // the store directory's, at the last listing
	storeRacy  bool
	final      []string // ids in a final state, checked in turn
	active     []string // ids not final, or read too recently: checked each time
	next       int
	dirty      bool
}

// indexEntry is one run in the index, as runs.jsonl holds it.
type indexEntry struct {
	Summary
	// MetaState is the state meta.json records (Summary.State may say
	// interrupted instead); DirMtime the run directory's modification
	// time (ns) when the entry was read.
	MetaState event.State `json:"meta_state"`
	DirMtime  int64       `json:"dir_mtime_ns"`
	// Racy is set when DirMtime was too recent to be trusted: the entry
	// is read again at the next Refresh.
	Racy bool `json:"racy,omitempty"`
}

type indexHeader struct {
	Format int    `json:"format"`
	Store  string `json:"store"`
}

// OpenIndex loads the store's index and brings it up to date with the
// run directories; call Save to write what it repaired.
func (s *Store) OpenIndex() (*Index, error) {
	x := &Index{s: s, runs: map[string]*indexEntry{}}
	x.load()
	if _, err := x.rescan(true); err != nil {
		return nil, err
	}
	return x, nil
}

func (x *Index) path() string { return filepath.Join(x.s.dir, DirIndex, FileIndex) }

// load reads runs.jsonl; anything unreadable is left out (and read again
// from the run directories).
func (x *Index) load() {
	removeTemps(filepath.Join(x.s.dir, DirIndex))
	data, err := readRegular(x.path())
	if err != nil {
		return
	}
	nl := bytes.IndexByte(data, '\n')
	if nl < 0 {
		return
	}
	var h indexHeader
	if json.Unmarshal(data[:nl], &h) != nil || h.Format != IndexFormat {
		x.s.log.Warn().Str("file", x.path()).Msg("run index of another format; building it again")
		return
	}
	// The lines are decoded in parallel: the index of a year's store is
	// tens of megabytes.
	lines := bytes.Split(data[nl+1:], []byte{'\n'})
	workers := max(1, min(runtime.GOMAXPROCS(0), len(lines)/1000))
	parts := make([][]*indexEntry, workers)
	var wg sync.WaitGroup
	for w := range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := w; i < len(lines); i += workers {
				e := new(indexEntry)
				if len(lines[i]) == 0 || json.Unmarshal(lines[i], e) != nil || ValidID(e.ID) != nil {
					continue
				}
				parts[w] = append(parts[w], e)
			}
		}()
	}
	wg.Wait()
	for _, part := range parts {
		for _, e := range part {
			x.runs[e.ID] = e
		}
	}
}

// Save writes the index file, when something changed since it was last
// written, with the store's atomic writer.
func (x *Index) Save() error {
	x.mu.Lock()
	if !x.dirty {
		x.mu.Unlock()
		return nil
	}
	ents := make([]*indexEntry, 0, len(x.runs))
	for _, e := range x.runs {
		ents = append(ents, e) // replaced, never changed in place
	}
	x.dirty = false
	x.mu.Unlock()
	var buf bytes.Buffer
	enc := json.NewEncoder(&buf)
	enc.Encode(indexHeader{Format: IndexFormat, Store: "rolloff run index"})
	for _, e := range ents {
		if err := enc.Encode(e); err != nil {
			x.mu.Lock()
			x.dirty = true
			x.mu.Unlock()
			return fmt.Errorf("store: index: %w", err)
		}
	}
	if err := os.MkdirAll(filepath.Join(x.s.dir, DirIndex), 0o755); err != nil {
		return fmt.Errorf("store: index: %w", err)
	}
	if err := WriteFileAtomic(x.path(), buf.Bytes()); err != nil {
		x.mu.Lock()
		x.dirty = true
		x.mu.Unlock()
		return err
	}
	return nil
}

// Refresh brings the index up to date and returns the runs whose summary
// changed since the last Refresh (or Open): runs that appeared, changed
// state, were written by another process or analysed again. It reads the
// store directory only when its modification time moved, and only the
// runs whose directory changed, the runs not in a final state and
// IndexCheckPerRefresh others in turn.
func (x *Index) Refresh() ([]Summary, error) { return x.rescan(false) }

func mtimeNS(fi fs.FileInfo) int64 { return fi.ModTime().UnixNano() }

func racy(mtime int64, now time.Time) bool {
	return now.UnixNano()-mtime < int64(racyWindow)
}

// rescan is Refresh; full checks every run directory (at Open).
func (x *Index) rescan(full bool) ([]Summary, error) {
	x.scan.Lock()
	defer x.scan.Unlock()
	now := time.Now()
	st, err := os.Stat(x.s.dir)
	if err != nil {
		return nil, fmt.Errorf("store: index: %w", err)
	}
	x.mu.Lock()
	listDir := full || mtimeNS(st) != x.storeMtime || x.storeRacy
	check := map[string]int64{} // id → directory mtime, or -1: stat it
	var gone []string
	if !listDir {
		for _, id := range x.active {
			check[id] = -1
		}
		for n := 0; n < IndexCheckPerRefresh && len(x.final) > 0; n++ {
			if x.next >= len(x.final) {
				x.next = 0
			}
			check[x.final[x.next]] = -1
			x.next++
		}
	}
	x.mu.Unlock()

	if listDir {
		ents, err := os.ReadDir(x.s.dir)
		if err != nil {
			return nil, fmt.Errorf("store: index: %w", err)
		}
		seen := make(map[string]bool, len(ents))
		for _, d := range ents {
			if !d.IsDir() || ValidID(d.Name()) != nil {
				continue
			}
			id := d.Name()
			seen[id] = true
			if !full {
				// A run known and final is checked in turn, not each
				// time a run is added to the store.
				x.mu.Lock()
				e := x.runs[id]
				x.mu.Unlock()
				if e != nil && e.MetaState.Final() && !e.Racy {
					continue
				}
			}
			fi, err := d.Info()
			if err != nil {
				continue // gone meanwhile
			}
			check[id] = mtimeNS(fi)
		}
		x.mu.Lock()
		for id := range x.runs {
			if !seen[id] {
				gone = append(gone, id)
			}
		}
		x.storeMtime, x.storeRacy = mtimeNS(st), racy(mtimeNS(st), now)
		x.mu.Unlock()
	}

	var changed []Summary
	reread := false // an entry moved between final and active
	for id, mt := range check {
		if mt < 0 {
			fi, err := os.Stat(filepath.Join(x.s.dir, id))
			if err != nil {
				if errors.Is(err, fs.ErrNotExist) {
					gone = append(gone, id)
				}
				continue
			}
			mt = mtimeNS(fi)
		}
		x.mu.Lock()
		old := x.runs[id]
		x.mu.Unlock()
		if old != nil && old.DirMtime == mt && !old.Racy && old.MetaState.Ended() {
			continue // unchanged, and no owner's lock to look at
		}
		sum, metaState := x.s.readSummary(id)
		e := &indexEntry{Summary: sum, MetaState: metaState, DirMtime: mt, Racy: racy(mt, now)}
		// The lists of runs to check change when a run appears, ends or
		// leaves the window of recent changes.
		reread = reread || old == nil || old.Racy != e.Racy || old.MetaState.Final() != e.MetaState.Final()
		if sum.Err != "" && metaState == "" && old == nil {
			// Not (yet) a run: a directory without meta.json.
			continue
		}
		x.mu.Lock()
		x.runs[id] = e
		if old == nil || !reflect.DeepEqual(old.Summary, e.Summary) || old.MetaState != e.MetaState {
			changed = append(changed, e.Summary)
		}
		if old == nil || old.DirMtime != e.DirMtime || old.Racy != e.Racy || !reflect.DeepEqual(old.Summary, e.Summary) {
			x.dirty = true
		}
		x.mu.Unlock()
	}
	x.mu.Lock()
	for _, id := range gone {
		if x.runs[id] != nil {
			delete(x.runs, id)
			x.dirty = true
		}
	}
	if listDir || len(gone) > 0 || reread {
		x.final, x.active = x.final[:0], x.active[:0]
		for id, e := range x.runs {
			if e.MetaState.Final() {
				x.final = append(x.final, id)
			}
			if !e.MetaState.Final() || e.Racy {
				x.active = append(x.active, id)
			}
		}
		sort.Strings(x.final)
	}
	x.mu.Unlock()
	sortSummaries(changed)
	return changed, nil
}

// Runs returns every run of the index, newest first.
func (x *Index) Runs() []Summary {
	x.mu.Lock()
	out := make([]Summary, 0, len(x.runs))
	for _, e := range x.runs {
		out = append(out, e.Summary)
	}
	x.mu.Unlock()
	sortSummaries(out)
	return out
}

// Len returns how many runs the index holds.
func (x *Index) Len() int {
	x.mu.Lock()
	defer x.mu.Unlock()
	return len(x.runs)
}

// Get returns the index's summary of run id.
func (x *Index) Get(id string) (Summary, bool) {
	x.mu.Lock()
	defer x.mu.Unlock()
	e := x.runs[id]
	if e == nil {
		return Summary{}, false
	}
	return e.Summary, true
}

// sortSummaries sorts newest first, as List does.
func sortSummaries(out []Summary) {
	sort.SliceStable(out, func(i, j int) bool {
		if !out[i].Created.Equal(out[j].Created) {
			return out[i].Created.After(out[j].Created)
		}
		return out[i].ID > out[j].ID
	})
}
