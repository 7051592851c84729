// Package replay records the messages exchanged with an instrument and plays
// them back, byte for byte, so that a test can pin an instrument dialect
// without the instrument: a Recorder wraps a real transport.Conn and keeps
// every write and read; a Playback is a transport.Conn that replays a
// transcript and fails on the first byte that differs.
//
// A transcript is plain text, one exchange per line:
//
//	# comment (blank lines are ignored too)
//	> *IDN?                      a message written, without the write terminator
//	< rolloff,SIM-GEN,0001,1.0   a response read, without the read terminator
//	! timeout                    a read that got no answer
//
// The text after the two-character marker ("> ", "< ") is the message
// exactly, trailing spaces included; a lone ">" or "<" is an empty message.
// Bytes that are not printable ASCII are written as escapes: \\ \n \r \t
// and \xHH; Format also escapes a leading or trailing space as \x20 so it
// stays visible. A "!" line stands for a failed read: timeout,
// disconnected, closed, malformed or canceled.
package replay

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"rolloff/driver"
)

// Op is the kind of an exchange: its marker in the transcript.
type Op byte

// The exchanges of a transcript.
const (
	OpWrite Op = '>' // a message written
	OpRead  Op = '<' // a response read
	OpFail  Op = '!' // a read that failed
)

// Failures a transcript can record for a read, with the error Playback
// returns for each.
var failures = map[string]error{
	"timeout":      driver.ErrTimeout,
	"disconnected": driver.ErrDisconnected,
	"closed":       driver.ErrClosed,
	"malformed":    driver.ErrMalformed,
	"canceled":     context.Canceled,
}

const failureNames = "timeout, disconnected, closed, malformed, canceled"

// Exchange is one line of a transcript.
type Exchange struct {
	Op   Op
	Data []byte // OpWrite, OpRead: the message without its terminator
	Fail string // OpFail: one of timeout, disconnected, closed, malformed, canceled
	Line int    // line in the transcript file; 0 when not parsed from one
	Note string // written by Format as a comment after the exchange; not parsed back
}

// String returns the exchange as its transcript line.
func (e Exchange) String() string {
	switch e.Op {
	case OpWrite, OpRead:
		if len(e.Data) == 0 {
			return string(e.Op)
		}
		return string(e.Op) + " " + Escape(e.Data)
	case OpFail:
		return "! " + e.Fail
	}
	return fmt.Sprintf("?%c", e.Op)
}

// Transcript is a sequence of exchanges with an instrument.
type Transcript struct {
	Name      string // file name, for messages
	Exchanges []Exchange
}

// Load reads a transcript file.
func Load(path string) (*Transcript, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("replay: %w", err)
	}
	defer f.Close()
	return Parse(filepath.Base(path), f)
}

// ParseString parses a transcript held in a string.
func ParseString(name, text string) (*Transcript, error) {
	return Parse(name, strings.NewReader(text))
}

// Parse reads a transcript. Errors name the file and line.
func Parse(name string, r io.Reader) (*Transcript, error) {
	t := &Transcript{Name: name}
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 0, 64*1024), 16<<20)
	line := 0
	for sc.Scan() {
		line++
		text := strings.TrimSuffix(sc.Text(), "\r")
		if strings.TrimSpace(text) == "" || strings.HasPrefix(text, "#") {
			continue
		}
		bad := func(format string, args ...any) error {
			return fmt.Errorf("replay: %s:%d: %s", name, line, fmt.Sprintf(format, args...))
		}
		op := Op(text[0])
		switch op {
		case OpWrite, OpRead:
			var data []byte
			if len(text) > 1 {
				if text[1] != ' ' {
					return nil, bad("%q: want a space after %q", truncate(text), string(op))
				}
				var err error
				if data, err = Unescape(text[2:]); err != nil {
					return nil, bad("%v", err)
				}
			}
			t.Exchanges = append(t.Exchanges, Exchange{Op: op, Data: data, Line: line})
		case OpFail:
			kind := strings.TrimSpace(text[1:])
			if _, ok := failures[kind]; !ok {
				return nil, bad("failure %q: allowed %s", kind, failureNames)
			}
			t.Exchanges = append(t.Exchanges, Exchange{Op: OpFail, Fail: kind, Line: line})
		default:
			return nil, bad("%q: a line starts with \"> \" (write), \"< \" (response), \"! \" (failed read) or \"#\" (comment)", truncate(text))
		}
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("replay: %s:%d: %w", name, line+1, err)
	}
	return t, nil
}

// Format returns the transcript as text that Parse reads back.
func (t *Transcript) Format() []byte {
	var b bytes.Buffer
	for _, e := range t.Exchanges {
		b.WriteString(e.String())
		b.WriteByte('\n')
		if e.Note != "" {
			for _, l := range strings.Split(e.Note, "\n") {
				b.WriteString("# " + Escape([]byte(l)) + "\n")
			}
		}
	}
	return b.Bytes()
}

// Save writes the transcript to path, with a heading comment.
func (t *Transcript) Save(path, heading string) error {
	var b bytes.Buffer
	for _, l := range strings.Split(heading, "\n") {
		if l != "" {
			b.WriteString("# " + l + "\n")
		}
	}
	b.Write(t.Format())
	if err := os.WriteFile(path, b.Bytes(), 0o644); err != nil {
		return fmt.Errorf("replay: %w", err)
	}
	return nil
}

// Escape writes msg in transcript notation.
func Escape(msg []byte) string {
	var b strings.Builder
	for i, c := range msg {
		switch {
		case c == '\\':
			b.WriteString(`\\`)
		case c == '\n':
			b.WriteString(`\n`)
		case c == '\r':
			b.WriteString(`\r`)
		case c == '\t':
			b.WriteString(`\t`)
		case c == ' ' && (i == 0 || i == len(msg)-1):
			b.WriteString(`\x20`)
		case c < 0x20 || c >= 0x7f:
			fmt.Fprintf(&b, `\x%02x`, c)
		default:
			b.WriteByte(c)
		}
	}
	return b.String()
}

// Unescape reads a message in transcript notation.
func Unescape(s string) ([]byte, error) {
	out := make([]byte, 0, len(s))
	for i := 0; i < len(s); i++ {
		c := s[i]
		if c != '\\' {
			out = append(out, c)
			continue
		}
		if i+1 >= len(s) {
			return nil, fmt.Errorf("byte %d: lone backslash at the end; write \\\\ for a backslash", i)
		}
		i++
		switch s[i] {
		case '\\':
			out = append(out, '\\')
		case 'n':
			out = append(out, '\n')
		case 'r':
			out = append(out, '\r')
		case 't':
			out = append(out, '\t')
		case 'x':
			if i+2 >= len(s) {
				return nil, fmt.Errorf("byte %d: \\x needs two hex digits", i-1)
			}
			hi, ok1 := unhex(s[i+1])
			lo, ok2 := unhex(s[i+2])
			if !ok1 || !ok2 {
				return nil, fmt.Errorf("byte %d: \\x%s: want two hex digits", i-1, s[i+1:i+3])
			}
			out = append(out, hi<<4|lo)
			i += 2
		default:
			return nil, fmt.Errorf("byte %d: unknown escape \\%c; allowed \\\\ \\n \\r \\t \\xHH", i-1, s[i])
		}
	}
	return out, nil
}

func unhex(c byte) (byte, bool) {
	switch {
	case '0' <= c && c <= '9':
		return c - '0', true
	case 'a' <= c && c <= 'f':
		return c - 'a' + 10, true
	case 'A' <= c && c <= 'F':
		return c - 'A' + 10, true
	}
	return 0, false
}

// truncate quotes at most 60 bytes of s.
func truncate(s string) string {
	if len(s) > 60 {
		return s[:60] + "..."
	}
	return s
}

// ErrMismatch is wrapped by every Playback error about the traffic
// differing from the transcript.
var ErrMismatch = errors.New("replay: traffic differs from the transcript")

// ErrUnused is wrapped by the error of a Playback's Close when exchanges of
// the transcript were never used.
var ErrUnused = errors.New("replay: transcript not used up")
