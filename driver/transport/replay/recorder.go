package replay

import (
	"context"
	"errors"
	"sync"

	"rolloff/driver"
	"rolloff/driver/transport"
)

// Recorder is a transport.Conn that passes everything to another Conn and
// keeps a transcript of it.
type Recorder struct {
	conn transport.Conn
	mu   sync.Mutex
	t    Transcript
}

var _ transport.Conn = (*Recorder)(nil)

// NewRecorder records the traffic on conn.
func NewRecorder(conn transport.Conn) *Recorder {
	return &Recorder{conn: conn, t: Transcript{Name: "recording"}}
}

// Write writes msg to the wrapped Conn and records it, noting a failure.
func (r *Recorder) Write(ctx context.Context, msg []byte) error {
	err := r.conn.Write(ctx, msg)
	e := Exchange{Op: OpWrite, Data: append([]byte(nil), msg...)}
	if err != nil {
		e.Note = "write failed: " + err.Error()
	}
	r.add(e)
	return err
}

// Read reads from the wrapped Conn and records the response or failure.
func (r *Recorder) Read(ctx context.Context) ([]byte, error) {
	msg, err := r.conn.Read(ctx)
	if err == nil {
		r.add(Exchange{Op: OpRead, Data: append([]byte(nil), msg...)})
		return msg, nil
	}
	e := Exchange{Op: OpFail, Note: err.Error()}
	switch {
	case errors.Is(err, driver.ErrTimeout):
		e.Fail = "timeout"
	case errors.Is(err, driver.ErrDisconnected):
		e.Fail = "disconnected"
	case errors.Is(err, driver.ErrClosed):
		e.Fail = "closed"
	case errors.Is(err, driver.ErrMalformed):
		e.Fail = "malformed"
	case errors.Is(err, context.Canceled):
		e.Fail = "canceled"
	default:
		e.Fail = "disconnected"
	}
	r.add(e)
	return nil, err
}

// Close closes the wrapped Conn.
func (r *Recorder) Close() error { return r.conn.Close() }

func (r *Recorder) add(e Exchange) {
	r.mu.Lock()
	defer r.mu.Unlock()
	r.t.Exchanges = append(r.t.Exchanges, e)
}

// Transcript returns a copy of what has been recorded so far.
func (r *Recorder) Transcript() *Transcript {
	r.mu.Lock()
	defer r.mu.Unlock()
	t := &Transcript{Name: r.t.Name, Exchanges: make([]Exchange, len(r.t.Exchanges))}
	for i, e := range r.t.Exchanges {
		e.Data = append([]byte(nil), e.Data...)
		t.Exchanges[i] = e
	}
	return t
}
