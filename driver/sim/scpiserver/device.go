package scpiserver

import (
	"context"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"sync"
)

// Handler executes one program message unit. A query handler returns its
// response message unit; a command handler returns "". A returned *Error
// goes to the error queue as it is; any other error is queued as -300
// "Device-specific error" with its text.
type Handler func(ctx context.Context, c *Call) (string, error)

// Opts configure a Device.
type Opts struct {
	// IDN is the *IDN? answer, four comma-separated fields
	// (IEEE 488.2 §10.14).
	IDN string
	// QueueLen bounds the error/event queue; default 20. When it is full
	// the newest entry is replaced by -350 "Queue overflow" (SCPI-1999
	// §21.8.1).
	QueueLen int
	// Reset is called by *RST after the common status is left as IEEE
	// 488.2 §10.32 requires (the error queue and status are not cleared).
	Reset func()
	// Trace, when set, receives every program message unit as received,
	// before it is executed.
	Trace func(unit string)
}

// Device is one simulated instrument's command interpreter: header tree,
// error/event queue and IEEE 488.2 status registers.
//
// Execute is not meant to be called concurrently; the server serialises
// messages. Push, NextError and the status accessors are safe to call from
// other goroutines.
type Device struct {
	opts    Opts
	entries []entry

	mu    sync.Mutex
	queue []Error
	esr   byte
	ese   byte
	sre   byte
}

type entry struct {
	p pattern
	h Handler
}

// DefaultQueueLen is the error queue length when Opts.QueueLen is 0.
const DefaultQueueLen = 20

// New returns a Device answering the IEEE 488.2 common commands and the
// SCPI-1999 mandated SYSTem:ERRor and SYSTem:VERSion queries.
func New(opts Opts) *Device {
	if opts.QueueLen <= 0 {
		opts.QueueLen = DefaultQueueLen
	}
	d := &Device{opts: opts, esr: ESRPowerOn}
	d.common()
	return d
}

// Handle registers h under a header pattern (see the package
// documentation). A pattern ending in "?" registers the query form.
func (d *Device) Handle(pat string, h Handler) error {
	p, err := compilePattern(pat)
	if err != nil {
		return err
	}
	if h == nil {
		return fmt.Errorf("scpiserver: nil handler for %q", pat)
	}
	d.entries = append(d.entries, entry{p: p, h: h})
	return nil
}

// Remove unregisters every handler whose pattern text (as given to
// Handle) drop returns true for, and returns how many it removed: a
// simulated instrument with a smaller command set answers the removed
// headers with -113 "Undefined header".
func (d *Device) Remove(drop func(pattern string) bool) int {
	kept := d.entries[:0]
	n := 0
	for _, e := range d.entries {
		if drop(e.p.text) {
			n++
			continue
		}
		kept = append(kept, e)
	}
	d.entries = kept
	return n
}

// MustHandle is Handle for patterns written in the program text; it panics
// on a malformed pattern.
func (d *Device) MustHandle(pat string, h Handler) {
	if err := d.Handle(pat, h); err != nil {
		panic(err)
	}
}

// Call is one program message unit being executed.
type Call struct {
	// Header is the header as received (with any leading colon).
	Header string
	// Query is true for the query form.
	Query bool
	// Suffixes holds, per node of the matched pattern, the numeric suffix
	// received (1 when omitted on a node that accepts one, 0 for nodes
	// that accept none).
	Suffixes []int
	// Args are the program data elements.
	Args []Arg

	dev *Device
}

// Device returns the device executing the call.
func (c *Call) Device() *Device { return c.dev }

// Execute runs one program message (without its terminator) and returns
// the response message (without terminator) and whether there is one.
// Errors go to the error queue.
func (d *Device) Execute(ctx context.Context, msg string) (string, bool) {
	texts, perr := splitUnits(msg)
	if perr != nil {
		if d.opts.Trace != nil {
			d.opts.Trace(strings.TrimSpace(msg))
		}
		d.Push(perr)
		return "", false
	}
	if len(texts) > 1 && strings.TrimSpace(texts[len(texts)-1]) == "" {
		texts = texts[:len(texts)-1] // a trailing ";" is harmless
	}
	if len(texts) == 1 && strings.TrimSpace(texts[0]) == "" {
		return "", false
	}
	var path []mnem
	var responses []string
	for _, text := range texts {
		if d.opts.Trace != nil {
			d.opts.Trace(strings.TrimSpace(text))
		}
		u, perr := parseUnit(text)
		if perr != nil {
			d.Push(perr)
			continue
		}
		resp, newPath, err := d.dispatch(ctx, u, path)
		if err != nil {
			d.Push(toError(err))
			continue
		}
		path = newPath
		if u.query {
			responses = append(responses, resp)
		}
	}
	if len(responses) == 0 {
		return "", false
	}
	return strings.Join(responses, ";"), true
}

// dispatch finds the handler for a parsed unit and runs it.
func (d *Device) dispatch(ctx context.Context, u unit, path []mnem) (string, []mnem, error) {
	if u.common != "" {
		for _, e := range d.entries {
			if e.p.common == u.common && e.p.query == u.query {
				c := &Call{Header: u.common + q(u.query), Query: u.query, Args: u.args, dev: d}
				resp, err := e.h(ctx, c)
				return resp, path, err
			}
		}
		return "", path, Errorf(UndefinedHeader, "%s", clip(u.common+q(u.query)))
	}
	full := u.nodes
	if !u.rooted && len(path) > 0 {
		full = append(append([]mnem(nil), path...), u.nodes...)
	}
	badSuffix := false
	for _, e := range d.entries {
		if e.p.common != "" || e.p.query != u.query {
			continue
		}
		m := e.p.match(full)
		if !m.ok {
			badSuffix = badSuffix || m.badSuffix
			continue
		}
		header := strings.TrimSpace(u.text)
		if k := strings.IndexFunc(header, func(r rune) bool { return r < 0x80 && isSpace(byte(r)) }); k >= 0 {
			header = header[:k]
		}
		c := &Call{Header: header, Query: u.query, Suffixes: m.suffixes, Args: u.args, dev: d}
		resp, err := e.h(ctx, c)
		return resp, full[:len(full)-1], err
	}
	name := headerText(full) + q(u.query)
	if badSuffix {
		return "", path, Errorf(HeaderSuffixRange, "%s", clip(name))
	}
	return "", path, Errorf(UndefinedHeader, "%s", clip(name))
}

func q(query bool) string {
	if query {
		return "?"
	}
	return ""
}

func headerText(nodes []mnem) string {
	var b strings.Builder
	for i, n := range nodes {
		if i > 0 {
			b.WriteByte(':')
		}
		b.WriteString(n.name)
		if n.suffix >= 0 {
			b.WriteString(strconv.Itoa(n.suffix))
		}
	}
	return b.String()
}

// toError converts a handler's error into a queue entry.
func toError(err error) *Error {
	var e *Error
	if errors.As(err, &e) {
		return e
	}
	return Errorf(DeviceError, "%s", err.Error())
}

// Push adds an entry to the error/event queue and sets the matching
// Standard Event Status Register bit. When the queue is full, its newest
// entry is replaced by -350 "Queue overflow" (SCPI-1999 §21.8.1).
func (d *Device) Push(e *Error) {
	if e == nil || e.Code == NoError {
		return
	}
	d.mu.Lock()
	defer d.mu.Unlock()
	d.esr |= esrBit(e.Code)
	n := d.opts.QueueLen
	if len(d.queue) < n {
		d.queue = append(d.queue, *e)
		return
	}
	d.queue[n-1] = Error{Code: QueueOverflow, Msg: Message(QueueOverflow)}
	d.esr |= esrBit(QueueOverflow)
}

// NextError removes and returns the oldest queue entry, or 0 "No error".
func (d *Device) NextError() Error {
	d.mu.Lock()
	defer d.mu.Unlock()
	if len(d.queue) == 0 {
		return Error{Code: NoError, Msg: Message(NoError)}
	}
	e := d.queue[0]
	d.queue = append(d.queue[:0], d.queue[1:]...)
	return e
}

// ErrorCount returns the number of queued entries.
func (d *Device) ErrorCount() int {
	d.mu.Lock()
	defer d.mu.Unlock()
	return len(d.queue)
}

// Clear empties the error queue and the event status register (*CLS).
func (d *Device) Clear() {
	d.mu.Lock()
	defer d.mu.Unlock()
	d.queue = d.queue[:0]
	d.esr = 0
}

// StatusByte returns the IEEE 488.2 §11.2 status byte.
func (d *Device) StatusByte() byte {
	d.mu.Lock()
	defer d.mu.Unlock()
	return d.stbLocked()
}

func (d *Device) stbLocked() byte {
	var stb byte
	if len(d.queue) > 0 {
		stb |= STBErrorAvailable
	}
	if d.esr&d.ese != 0 {
		stb |= STBEventSummary
	}
	if stb&d.sre&^STBRequest != 0 {
		stb |= STBRequest
	}
	return stb
}

// common registers the IEEE 488.2 common commands and the SCPI-1999
// mandated SYSTem queries.
func (d *Device) common() {
	d.MustHandle("*IDN?", func(_ context.Context, c *Call) (string, error) {
		if err := c.Arity(0, 0); err != nil {
			return "", err
		}
		return d.opts.IDN, nil
	})
	d.MustHandle("*RST", func(_ context.Context, c *Call) (string, error) {
		if err := c.Arity(0, 0); err != nil {
			return "", err
		}
		if d.opts.Reset != nil {
			d.opts.Reset()
		}
		return "", nil
	})
	d.MustHandle("*CLS", func(_ context.Context, c *Call) (string, error) {
		if err := c.Arity(0, 0); err != nil {
			return "", err
		}
		d.Clear()
		return "", nil
	})
	// Every command of a simulated instrument finishes before the next is
	// parsed, so operations are complete as soon as *OPC is seen.
	d.MustHandle("*OPC", func(_ context.Context, c *Call) (string, error) {
		if err := c.Arity(0, 0); err != nil {
			return "", err
		}
		d.mu.Lock()
		d.esr |= ESROperationComplete
		d.mu.Unlock()
		return "", nil
	})
	d.MustHandle("*OPC?", func(_ context.Context, c *Call) (string, error) {
		return "1", c.Arity(0, 0)
	})
	d.MustHandle("*WAI", func(_ context.Context, c *Call) (string, error) {
		return "", c.Arity(0, 0)
	})
	d.MustHandle("*TST?", func(_ context.Context, c *Call) (string, error) {
		return "0", c.Arity(0, 0)
	})
	d.MustHandle("*ESR?", func(_ context.Context, c *Call) (string, error) {
		if err := c.Arity(0, 0); err != nil {
			return "", err
		}
		d.mu.Lock()
		v := d.esr
		d.esr = 0
		d.mu.Unlock()
		return strconv.Itoa(int(v)), nil
	})
	d.MustHandle("*STB?", func(_ context.Context, c *Call) (string, error) {
		if err := c.Arity(0, 0); err != nil {
			return "", err
		}
		return strconv.Itoa(int(d.StatusByte())), nil
	})
	regMask := func(get func() *byte) (Handler, Handler) {
		set := func(_ context.Context, c *Call) (string, error) {
			if err := c.Arity(1, 1); err != nil {
				return "", err
			}
			n, err := c.Int(0, 0, 255)
			if err != nil {
				return "", err
			}
			d.mu.Lock()
			*get() = byte(n)
			d.mu.Unlock()
			return "", nil
		}
		query := func(_ context.Context, c *Call) (string, error) {
			if err := c.Arity(0, 0); err != nil {
				return "", err
			}
			d.mu.Lock()
			v := *get()
			d.mu.Unlock()
			return strconv.Itoa(int(v)), nil
		}
		return set, query
	}
	eseSet, eseQuery := regMask(func() *byte { return &d.ese })
	d.MustHandle("*ESE", eseSet)
	d.MustHandle("*ESE?", eseQuery)
	sreSet, sreQuery := regMask(func() *byte { return &d.sre })
	d.MustHandle("*SRE", sreSet)
	d.MustHandle("*SRE?", sreQuery)
	d.MustHandle("SYSTem:ERRor[:NEXT]?", func(_ context.Context, c *Call) (string, error) {
		if err := c.Arity(0, 0); err != nil {
			return "", err
		}
		e := d.NextError()
		return e.Entry(), nil
	})
	d.MustHandle("SYSTem:ERRor:COUNt?", func(_ context.Context, c *Call) (string, error) {
		if err := c.Arity(0, 0); err != nil {
			return "", err
		}
		return strconv.Itoa(d.ErrorCount()), nil
	})
	d.MustHandle("SYSTem:VERSion?", func(_ context.Context, c *Call) (string, error) {
		return "1999.0", c.Arity(0, 0)
	})
}
