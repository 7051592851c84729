package store

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"

	"rolloff/sweep/event"
)

// FileQueueLock is the store-level lock a daemon holds while it keeps
// runs waiting in its queue: a run in state queued whose own lock is free
// is waiting, not interrupted, as long as someone holds this one. A
// waiting run thus holds no open file of its own.
const FileQueueLock = ".queue-lock"

// ErrNotQueued refuses Claim on a run that is not waiting in a queue.
var ErrNotQueued = errors.New("store: run is not queued")

// HoldQueue takes the store's queue lock for the caller's lifetime; call
// the returned function to let it go. ErrLocked means another daemon
// keeps a queue on this store.
func (s *Store) HoldQueue() (release func(), err error) {
	f, err := tryLock(filepath.Join(s.dir, FileQueueLock))
	if err != nil {
		return nil, err
	}
	writeLockOwner(f)
	return func() { f.Close() }, nil
}

// queueHeld reports whether a daemon (this process included) holds the
// store's queue lock.
func (s *Store) queueHeld() bool {
	f, err := tryLock(filepath.Join(s.dir, FileQueueLock))
	if errors.Is(err, ErrLocked) {
		return true
	}
	if f != nil {
		f.Close()
	}
	return false
}

// waiting reports whether a run found in state st with a free lock is
// waiting in a daemon's queue rather than interrupted.
func (s *Store) waiting(st event.State) bool {
	return st == event.Queued && s.queueHeld()
}

// Claim makes the caller the owner of run id, which it created (or
// queued for resuming) and let go of while the run waited in its queue:
// the run must be in state queued (ErrNotQueued otherwise) and free
// (ErrLocked). Unlike OpenRun it does not take the waiting run for an
// interrupted one. The returned handle is locked, like Create's.
func (s *Store) Claim(id string) (*Run, error) {
	if err := ValidID(id); err != nil {
		return nil, err
	}
	dir := filepath.Join(s.dir, id)
	if st, err := os.Stat(dir); err != nil || !st.IsDir() {
		return nil, fmt.Errorf("store: run %s: %w", id, ErrNotFound)
	}
	r := &Run{store: s, id: id, dir: dir, log: s.log.With().Str("run", id).Logger()}
	f, err := tryLock(r.path(FileLock))
	if err != nil {
		if errors.Is(err, ErrLocked) {
			return nil, fmt.Errorf("store: run %s: %w", id, ErrLocked)
		}
		return nil, err
	}
	m, err := r.loadMeta()
	if err != nil {
		f.Close()
		return nil, err
	}
	if m.State != event.Queued {
		f.Close()
		return nil, fmt.Errorf("store: run %s is %s: %w", id, m.State, ErrNotQueued)
	}
	if err := r.own(f); err != nil {
		f.Close()
		return nil, err
	}
	writeLockOwner(f)
	r.mu.Lock()
	r.meta = m
	r.mu.Unlock()
	return r, nil
}
