// Package benchlock keeps two rolloff processes on one machine from
// driving the same instruments: a run takes an exclusive lock for each
// instrument address of its bench before any instrument is opened, and
// a second controller is refused before it sends anything, told who holds
// the bench (process, run, since when).
//
// Each address is normalised (transport.ParseAddress's canonical form,
// host names lower-cased, device paths with symbolic links resolved, the
// serial line settings left out) and has its own lock file, so two bench
// files naming the same instrument collide. The locks are flock(2) locks
// on files under $XDG_RUNTIME_DIR/rolloff (else the user's state
// directory, else os.TempDir()/rolloff-<uid>): the kernel releases them
// when the holder exits or is killed, so a crash leaves nothing to clean
// up. The lock file holds the holder's description as JSON.
package benchlock

import (
	"encoding/json"
	"errors"
	"fmt"
	"net"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"sync"
	"time"

	"rolloff/driver/transport"
)

// ErrHeld is wrapped by the error of Acquire when another process holds
// an address.
var ErrHeld = errors.New("benchlock: bench in use")

// Holder describes the process holding a lock, as written in its lock
// file.
type Holder struct {
	PID     int       `json:"pid"`
	Command string    `json:"command,omitempty"` // e.g. "rolloff run"
	RunID   string    `json:"run_id,omitempty"`
	Since   time.Time `json:"since"`
	Address string    `json:"address"` // the normalised address
}

// String names the holder for a message.
func (h Holder) String() string {
	s := fmt.Sprintf("process %d", h.PID)
	if h.Command != "" {
		s += " (" + h.Command + ")"
	}
	if h.RunID != "" {
		s += ", run " + h.RunID
	}
	if !h.Since.IsZero() {
		s += ", since " + h.Since.Local().Format(time.RFC3339)
	}
	return s
}

// HeldError is a refused Acquire: Address is held by Holder (zero when its
// lock file could not be read).
type HeldError struct {
	Address string
	Holder  Holder
}

// Error names the address and the holder.
func (e *HeldError) Error() string {
	who := "another process"
	if e.Holder.PID > 0 {
		who = e.Holder.String()
	}
	return fmt.Sprintf("benchlock: the instrument at %s is in use by %s: refusing to send anything to it (stop that run first)", e.Address, who)
}

// Unwrap returns ErrHeld.
func (e *HeldError) Unwrap() error { return ErrHeld }

// Lock is a set of held address locks.
type Lock struct {
	mu      sync.Mutex
	dir     string
	files   []*os.File
	holder  Holder
	release bool
}

// Dir returns the directory of the lock files: $ROLLOFF_LOCK_DIR when set
// (tests), else $XDG_RUNTIME_DIR/rolloff, else the user's state directory
// ($XDG_STATE_HOME or ~/.local/state)/rolloff/locks, else
// os.TempDir()/rolloff-<uid>. Every rolloff process of one user must see
// the same directory for the lock to bind them.
func Dir() string {
	if d := os.Getenv("ROLLOFF_LOCK_DIR"); d != "" {
		return d
	}
	if d := os.Getenv("XDG_RUNTIME_DIR"); d != "" && filepath.IsAbs(d) {
		return filepath.Join(d, "rolloff")
	}
	if d := os.Getenv("XDG_STATE_HOME"); d != "" && filepath.IsAbs(d) {
		return filepath.Join(d, "rolloff", "locks")
	}
	if h, err := os.UserHomeDir(); err == nil && h != "" {
		return filepath.Join(h, ".local", "state", "rolloff", "locks")
	}
	return filepath.Join(os.TempDir(), "rolloff-"+strconv.Itoa(os.Getuid()))
}

// Normalize returns the canonical form of an instrument address that the
// lock is keyed by.
func Normalize(address string) (string, error) {
	a, err := transport.ParseAddress(address)
	if err != nil {
		return "", err
	}
	switch a.Scheme {
	case transport.SchemeTCP:
		h := strings.ToLower(a.Host)
		if ip := net.ParseIP(h); ip != nil {
			h = ip.String()
		}
		if h == "localhost" {
			h = "127.0.0.1"
		}
		return "tcp://" + net.JoinHostPort(h, strconv.Itoa(a.Port)), nil
	default:
		p := a.Path
		if r, err := filepath.EvalSymlinks(p); err == nil {
			p = r
		}
		return "dev://" + filepath.Clean(p), nil
	}
}

// fileName is the lock file name of a normalised address: its bytes
// outside [A-Za-z0-9.-] escaped, so that distinct addresses never share
// a file.
func fileName(key string) string {
	var b strings.Builder
	for i := 0; i < len(key); i++ {
		c := key[i]
		if c == '.' || c == '-' || '0' <= c && c <= '9' || 'a' <= c && c <= 'z' || 'A' <= c && c <= 'Z' {
			b.WriteByte(c)
		} else {
			fmt.Fprintf(&b, "_%02x", c)
		}
	}
	return b.String() + ".lock"
}

// Acquire takes the lock of every address (duplicates and addresses that
// normalise alike count once) without waiting. When one is held by
// another process it releases what it took and returns a *HeldError
// naming the address and the holder. h describes this process; its PID,
// Since and Address are filled in.
func Acquire(addresses []string, h Holder) (*Lock, error) {
	keys := map[string]bool{}
	for _, a := range addresses {
		k, err := Normalize(a)
		if err != nil {
			return nil, fmt.Errorf("benchlock: %w", err)
		}
		keys[k] = true
	}
	sorted := make([]string, 0, len(keys))
	for k := range keys {
		sorted = append(sorted, k)
	}
	sort.Strings(sorted) // one order for every process
	dir := Dir()
	if err := os.MkdirAll(dir, 0o700); err != nil {
		return nil, fmt.Errorf("benchlock: lock directory: %w", err)
	}
	h.PID = os.Getpid()
	if h.Since.IsZero() {
		h.Since = time.Now()
	}
	l := &Lock{dir: dir, holder: h}
	for _, k := range sorted {
		f, err := os.OpenFile(filepath.Join(dir, fileName(k)), os.O_RDWR|os.O_CREATE, 0o600)
		if err != nil {
			l.Release()
			return nil, fmt.Errorf("benchlock: %w", err)
		}
		if err := tryLock(f); err != nil {
			held := &HeldError{Address: k}
			if data, rerr := readAll(f); rerr == nil {
				_ = json.Unmarshal(data, &held.Holder)
			}
			f.Close()
			l.Release()
			if errors.Is(err, errWouldBlock) {
				return nil, held
			}
			return nil, fmt.Errorf("benchlock: %s: %w", k, err)
		}
		l.files = append(l.files, f)
	}
	if err := l.write(); err != nil {
		l.Release()
		return nil, err
	}
	return l, nil
}

func readAll(f *os.File) ([]byte, error) {
	st, err := f.Stat()
	if err != nil {
		return nil, err
	}
	buf := make([]byte, min(st.Size(), 4096))
	n, err := f.ReadAt(buf, 0)
	if n > 0 {
		return buf[:n], nil
	}
	return nil, err
}

// write records the holder in every lock file.
func (l *Lock) write() error {
	for _, f := range l.files {
		h := l.holder
		h.Address = addressOf(f.Name())
		data, err := json.Marshal(h)
		if err != nil {
			return err
		}
		if err := f.Truncate(0); err != nil {
			return fmt.Errorf("benchlock: %w", err)
		}
		if _, err := f.WriteAt(append(data, '\n'), 0); err != nil {
			return fmt.Errorf("benchlock: %w", err)
		}
	}
	return nil
}

// addressOf decodes a lock file name back to its address.
func addressOf(path string) string {
	s := strings.TrimSuffix(filepath.Base(path), ".lock")
	var b strings.Builder
	for i := 0; i < len(s); i++ {
		if s[i] == '_' && i+2 < len(s) {
			if v, err := strconv.ParseUint(s[i+1:i+3], 16, 8); err == nil {
				b.WriteByte(byte(v))
				i += 2
				continue
			}
		}
		b.WriteByte(s[i])
	}
	return b.String()
}

// SetRun records the run this process is measuring in its lock files.
func (l *Lock) SetRun(runID string) error {
	if l == nil {
		return nil
	}
	l.mu.Lock()
	defer l.mu.Unlock()
	if l.release {
		return nil
	}
	l.holder.RunID = runID
	return l.write()
}

// Holder returns what the lock files say of this process.
func (l *Lock) Holder() Holder {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.holder
}

// Release unlocks every address. The lock files stay (removing one
// another process has just opened would let a third take a second lock
// on a new file); they are small and reused.
func (l *Lock) Release() error {
	if l == nil {
		return nil
	}
	l.mu.Lock()
	defer l.mu.Unlock()
	if l.release {
		return nil
	}
	l.release = true
	var errs []error
	for _, f := range l.files {
		_ = f.Truncate(0)
		errs = append(errs, f.Close()) // closing drops the flock
	}
	l.files = nil
	return errors.Join(errs...)
}
