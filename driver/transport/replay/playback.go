package replay

import (
	"context"
	"fmt"
	"sync"

	"rolloff/driver"
	"rolloff/driver/transport"
)

// Playback is a transport.Conn that replays a transcript. Every Write must
// carry exactly the bytes of the next recorded write; every Read returns the
// next recorded response (or failure). The first difference fails the
// exchange and every later call; Close fails when exchanges were never used.
type Playback struct {
	mu     sync.Mutex
	t      *Transcript
	next   int
	err    error // the first mismatch, returned by every later call
	closed bool
}

var _ transport.Conn = (*Playback)(nil)

// NewPlayback returns a Conn that replays t.
func NewPlayback(t *Transcript) *Playback {
	return &Playback{t: t}
}

// LoadPlayback loads a transcript file and returns a Conn replaying it.
func LoadPlayback(path string) (*Playback, error) {
	t, err := Load(path)
	if err != nil {
		return nil, err
	}
	return NewPlayback(t), nil
}

// MismatchError says where a write first differs from the transcript.
type MismatchError struct {
	Transcript string // file name
	Line       int    // line of the recorded write
	Offset     int    // index of the first byte that differs
	Want, Got  []byte // the recorded message and the one written
}

// Error names the line, the offset and the differing bytes.
func (e *MismatchError) Error() string {
	return fmt.Sprintf("replay: %s:%d: write differs at byte %d: want %s, got %s (want %q, got %q)",
		e.Transcript, e.Line, e.Offset, byteAt(e.Want, e.Offset), byteAt(e.Got, e.Offset), e.Want, e.Got)
}

// Unwrap returns ErrMismatch.
func (e *MismatchError) Unwrap() error { return ErrMismatch }

func byteAt(b []byte, i int) string {
	if i >= len(b) {
		return "end of message"
	}
	return fmt.Sprintf("%q (0x%02x)", b[i], b[i])
}

func (p *Playback) where() string {
	if p.next < len(p.t.Exchanges) {
		return fmt.Sprintf("%s:%d", p.t.Name, p.t.Exchanges[p.next].Line)
	}
	return p.t.Name + ": after the end"
}

// begin checks the state common to Write and Read.
func (p *Playback) begin(ctx context.Context) error {
	if p.closed {
		return fmt.Errorf("replay: %s: %w", p.t.Name, driver.ErrClosed)
	}
	if p.err != nil {
		return p.err
	}
	return ctx.Err()
}

// Write compares msg with the next recorded write.
func (p *Playback) Write(ctx context.Context, msg []byte) error {
	p.mu.Lock()
	defer p.mu.Unlock()
	if err := p.begin(ctx); err != nil {
		return err
	}
	if p.next >= len(p.t.Exchanges) {
		p.err = fmt.Errorf("replay: %s: write %q after the end of the transcript: %w", p.t.Name, msg, ErrMismatch)
		return p.err
	}
	e := p.t.Exchanges[p.next]
	if e.Op != OpWrite {
		p.err = fmt.Errorf("replay: %s: write %q where the transcript has %q: %w", p.where(), msg, e.String(), ErrMismatch)
		return p.err
	}
	n := min(len(msg), len(e.Data))
	i := 0
	for i < n && msg[i] == e.Data[i] {
		i++
	}
	if i < n || len(msg) != len(e.Data) {
		p.err = &MismatchError{Transcript: p.t.Name, Line: e.Line, Offset: i, Want: e.Data, Got: append([]byte(nil), msg...)}
		return p.err
	}
	p.next++
	return nil
}

// Read returns the next recorded response, or the error of a recorded
// failure.
func (p *Playback) Read(ctx context.Context) ([]byte, error) {
	p.mu.Lock()
	defer p.mu.Unlock()
	if err := p.begin(ctx); err != nil {
		return nil, err
	}
	if p.next >= len(p.t.Exchanges) {
		p.err = fmt.Errorf("replay: %s: read after the end of the transcript: %w", p.t.Name, ErrMismatch)
		return nil, p.err
	}
	e := p.t.Exchanges[p.next]
	switch e.Op {
	case OpRead:
		p.next++
		return append([]byte(nil), e.Data...), nil
	case OpFail:
		p.next++
		return nil, fmt.Errorf("replay: %s:%d: recorded failure: %w", p.t.Name, e.Line, failures[e.Fail])
	}
	p.err = fmt.Errorf("replay: %s: read where the transcript has %q: %w", p.where(), e.String(), ErrMismatch)
	return nil, p.err
}

// Remaining returns how many exchanges have not been used yet.
func (p *Playback) Remaining() int {
	p.mu.Lock()
	defer p.mu.Unlock()
	return len(p.t.Exchanges) - p.next
}

// Close ends the playback. It returns the first mismatch, if any, or an
// error wrapping ErrUnused when exchanges were never used.
func (p *Playback) Close() error {
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.closed {
		return fmt.Errorf("replay: %s: close: %w", p.t.Name, driver.ErrClosed)
	}
	p.closed = true
	if p.err != nil {
		return p.err
	}
	if left := len(p.t.Exchanges) - p.next; left > 0 {
		e := p.t.Exchanges[p.next]
		return fmt.Errorf("replay: %s: %d recorded exchange(s) never used, the first at line %d: %s: %w", p.t.Name, left, e.Line, e.String(), ErrUnused)
	}
	return nil
}
