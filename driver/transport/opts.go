package transport

import (
	"context"
	"fmt"
	"time"
)

// Defaults applied by Open to zero Opts fields.
const (
	// DefaultTerm is the message terminator, newline (IEEE 488.2 §7.5:
	// <PROGRAM MESSAGE TERMINATOR> is NL, optionally with END).
	DefaultTerm = "\n"
	// DefaultTimeout bounds an operation whose context has no deadline.
	DefaultTimeout = 2 * time.Second
	// DefaultMaxRead is the longest response accepted, in bytes.
	DefaultMaxRead = 1 << 20
	// DefaultTCPPort is the port of a tcp:// address that names none: the
	// common convention for raw SCPI sockets (common practice).
	DefaultTCPPort = 5025
	// maxTermLen is the longest terminator accepted.
	maxTermLen = 4
)

// WithDefaults returns o with every zero field replaced by its default.
func (o Opts) WithDefaults() Opts {
	if o.WriteTerm == "" {
		o.WriteTerm = DefaultTerm
	}
	if o.ReadTerm == "" {
		o.ReadTerm = DefaultTerm
	}
	if o.Timeout == 0 {
		o.Timeout = DefaultTimeout
	}
	if o.MaxRead == 0 {
		o.MaxRead = DefaultMaxRead
	}
	return o
}

// Validate reports the first field of o (after defaults) that cannot be
// used, naming it with its value and the allowed range.
func (o Opts) Validate() error {
	o = o.WithDefaults()
	if !validTerm(o.WriteTerm) {
		return fmt.Errorf("transport: Opts.WriteTerm %q: allowed 1 to %d control characters other than tab (LF, CR LF, ...)", o.WriteTerm, maxTermLen)
	}
	if !validTerm(o.ReadTerm) {
		return fmt.Errorf("transport: Opts.ReadTerm %q: allowed 1 to %d control characters other than tab (LF, CR LF, ...)", o.ReadTerm, maxTermLen)
	}
	if o.Timeout < 0 {
		return fmt.Errorf("transport: Opts.Timeout %v: allowed > 0 (0 means %v)", o.Timeout, DefaultTimeout)
	}
	if o.MaxRead < 0 {
		return fmt.Errorf("transport: Opts.MaxRead %d: allowed > 0 bytes (0 means %d)", o.MaxRead, DefaultMaxRead)
	}
	return nil
}

// validTerm reports whether t can be a terminator: a few control
// characters, never a byte that may appear inside a SCPI message (printable
// ASCII and tab, which IEEE 488.2 §7.4.1.2 counts as white space), so that
// a command refused for holding no control characters cannot hold one.
func validTerm(t string) bool {
	if t == "" || len(t) > maxTermLen {
		return false
	}
	for i := 0; i < len(t); i++ {
		if t[i] >= 0x20 || t[i] == '\t' {
			return false
		}
	}
	return true
}

// deadline is when an operation under ctx must end: the context's own
// deadline, or Timeout from now.
func (o Opts) deadline(ctx context.Context) time.Time {
	if d, ok := ctx.Deadline(); ok {
		return d
	}
	return time.Now().Add(o.Timeout)
}
