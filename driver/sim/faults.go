package sim

import (
	"strings"
	"sync"
	"time"

	"rolloff/driver/sim/scpiserver"
)

// Fault kinds, as counted by (*Faults).Count.
const (
	FaultDrop         = "drop"
	FaultDropMidQuery = "drop-mid-query"
	FaultDelay        = "delay"
	FaultCorrupt      = "corrupt"
	FaultTruncate     = "truncate"
	FaultError        = "error"
	FaultGone         = "gone"
	FaultOverflow     = "overflow"
	FaultOverload     = "overload"
)

// Faults are one instrument's fault hooks for reliability tests. Every
// method is safe to call concurrently. One-shot faults are armed by a
// call and counted when they take effect; the others take effect and are
// counted at once.
type Faults struct {
	in *instrument

	mu       sync.Mutex
	dropMid  bool
	delay    time.Duration
	corrupt  bool
	truncate bool
	overflow int
	counts   map[string]int
}

func (f *Faults) count(kind string) {
	if f.counts == nil {
		f.counts = map[string]int{}
	}
	f.counts[kind]++
}

// DropNow closes every TCP connection of the instrument at once. A
// pseudo-terminal cannot hang up: there the next message is lost instead.
func (f *Faults) DropNow() {
	f.mu.Lock()
	f.count(FaultDrop)
	f.mu.Unlock()
	f.in.dropAll()
}

// DropMidQuery arms a drop after the next message is received and
// executed but before it is answered: the command takes effect, the
// client sees the connection close (on a pseudo-terminal: no answer).
func (f *Faults) DropMidQuery() {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.dropMid = true
}

// DelayNext delays the next response by d.
func (f *Faults) DelayNext(d time.Duration) {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.delay = d
}

// CorruptNext garbles the next numeric response (one character in its
// middle becomes '#'), so that it no longer parses.
func (f *Faults) CorruptNext() {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.corrupt = true
}

// TruncateNext cuts the next response short: its first half is sent
// without terminator and the connection is closed (on a pseudo-terminal
// the rest is simply never sent).
func (f *Faults) TruncateNext() {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.truncate = true
}

// PushError puts an entry into the instrument's error queue, as if the
// instrument had found a fault itself. An empty msg takes the standard
// description of code.
func (f *Faults) PushError(code int, msg string) {
	f.mu.Lock()
	f.count(FaultError)
	f.mu.Unlock()
	if msg == "" {
		msg = scpiserver.Message(code)
	}
	f.in.dev.Push(&scpiserver.Error{Code: code, Msg: msg})
}

// Gone takes the instrument off the network for d: its connections close,
// new connections are refused (the listener is closed and reopened on the
// same port afterwards) and a pseudo-terminal ignores what it receives.
func (f *Faults) Gone(d time.Duration) {
	f.mu.Lock()
	f.count(FaultGone)
	f.mu.Unlock()
	f.in.gone(d)
}

// ForceOverflow makes the next n readings of a voltmeter or DMM answer
// the overflow value 9.9E37 whatever the input.
func (f *Faults) ForceOverflow(n int) {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.overflow += n
}

// OverloadConverter saturates the converter for d of wall time: its DC
// output sits at the saturation level and the bench reports Overloaded.
// It acts on the bench's converter whichever role's hooks are used.
func (f *Faults) OverloadConverter(d time.Duration) {
	f.mu.Lock()
	f.count(FaultOverload)
	f.mu.Unlock()
	b := f.in.b
	b.mu.Lock()
	defer b.mu.Unlock()
	until := time.Now().Add(d)
	if until.After(b.overUntil) {
		b.overUntil = until
	}
}

// Injected returns the number of faults that have taken effect.
func (f *Faults) Injected() int {
	f.mu.Lock()
	defer f.mu.Unlock()
	n := 0
	for _, c := range f.counts {
		n += c
	}
	return n
}

// Count returns how many faults of a kind (FaultDrop, ...) took effect.
func (f *Faults) Count(kind string) int {
	f.mu.Lock()
	defer f.mu.Unlock()
	return f.counts[kind]
}

func (f *Faults) takeDropMid() bool {
	f.mu.Lock()
	defer f.mu.Unlock()
	if !f.dropMid {
		return false
	}
	f.dropMid = false
	f.count(FaultDropMidQuery)
	return true
}

func (f *Faults) takeDelay() time.Duration {
	f.mu.Lock()
	defer f.mu.Unlock()
	d := f.delay
	if d > 0 {
		f.delay = 0
		f.count(FaultDelay)
	}
	return d
}

// takeCorrupt garbles resp if a corruption is armed and resp is numeric.
func (f *Faults) takeCorrupt(resp string) (string, bool) {
	f.mu.Lock()
	defer f.mu.Unlock()
	if !f.corrupt || !looksNumeric(resp) {
		return resp, false
	}
	f.corrupt = false
	f.count(FaultCorrupt)
	k := len(resp) / 2
	return resp[:k] + "#" + resp[k+1:], true
}

func (f *Faults) takeTruncate() bool {
	f.mu.Lock()
	defer f.mu.Unlock()
	if !f.truncate {
		return false
	}
	f.truncate = false
	f.count(FaultTruncate)
	return true
}

func (f *Faults) takeOverflow() bool {
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.overflow <= 0 {
		return false
	}
	f.overflow--
	f.count(FaultOverflow)
	return true
}

// looksNumeric reports whether a response starts like numeric data.
func looksNumeric(s string) bool {
	return s != "" && strings.ContainsRune("+-.0123456789", rune(s[0]))
}
