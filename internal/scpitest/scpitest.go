// Package scpitest is a stand-in SCPI instrument for tests: it reads
// commands one line at a time, answers queries from a table of replies, a
// function or its error queue, and records every line it received. Listen
// serves it on loopback TCP (tests never listen elsewhere); Serve runs it
// on any byte stream, such as a pseudo-terminal.
package scpitest

import (
	"bufio"
	"io"
	"net"
	"strings"
	"sync"
	"testing"
	"time"
)

// NoError is the error queue's answer once it is empty (SCPI-1999 Vol 2
// §21.8.8).
const NoError = `0,"No error"`

// Instrument is the stand-in's behaviour. Set the fields before serving;
// the zero value answers nothing and only records.
type Instrument struct {
	// Term ends every reply; default "\n".
	Term string
	// Handle, when set, is asked first: it gets the command without its
	// terminator and returns the reply, ok false for none.
	Handle func(cmd string) (reply string, ok bool)
	// Replies answers commands written exactly so (without terminator).
	Replies map[string]string
	// Errors is the error queue SYST:ERR? (SYSTem:ERRor[:NEXT]?) reads,
	// oldest first; NoError once it is empty.
	Errors []string
	// Delay is a pause before each reply.
	Delay time.Duration

	mu       sync.Mutex
	received []string
}

// Received returns every line received so far, terminators included, in
// order.
func (in *Instrument) Received() []string {
	in.mu.Lock()
	defer in.mu.Unlock()
	return append([]string(nil), in.received...)
}

// isErrorQuery reports whether cmd reads the error queue, in any of the
// short and long forms (SCPI-1999 Vol 1 §6.2.1, case-insensitive).
func isErrorQuery(cmd string) bool {
	switch strings.ToUpper(cmd) {
	case "SYST:ERR?", "SYSTEM:ERROR?", "SYST:ERR:NEXT?", "SYSTEM:ERROR:NEXT?":
		return true
	}
	return false
}

// reply returns the answer to one command line.
func (in *Instrument) reply(line string) (string, bool) {
	in.mu.Lock()
	defer in.mu.Unlock()
	in.received = append(in.received, line)
	cmd := strings.TrimRight(line, "\r\n")
	if in.Handle != nil {
		if r, ok := in.Handle(cmd); ok {
			return r, true
		}
	}
	if r, ok := in.Replies[cmd]; ok {
		return r, true
	}
	if isErrorQuery(cmd) {
		if len(in.Errors) == 0 {
			return NoError, true
		}
		r := in.Errors[0]
		in.Errors = in.Errors[1:]
		return r, true
	}
	return "", false
}

// Serve answers the commands read from rw until it ends or fails.
func (in *Instrument) Serve(rw io.ReadWriter) {
	term := in.Term
	if term == "" {
		term = "\n"
	}
	r := bufio.NewReader(rw)
	for {
		line, err := r.ReadString('\n')
		if err != nil {
			return
		}
		rep, ok := in.reply(line)
		if !ok {
			continue
		}
		if in.Delay > 0 {
			time.Sleep(in.Delay)
		}
		if _, err := io.WriteString(rw, rep+term); err != nil {
			return
		}
	}
}

// Listen serves in on a loopback TCP port, each connection on its own
// goroutine, until the test ends; it returns the address as the
// transports take it ("tcp://127.0.0.1:PORT").
func Listen(t testing.TB, in *Instrument) string {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	var wg sync.WaitGroup
	conns := map[net.Conn]bool{}
	var mu sync.Mutex
	wg.Go(func() {
		for {
			c, err := ln.Accept()
			if err != nil {
				return
			}
			mu.Lock()
			conns[c] = true
			mu.Unlock()
			wg.Go(func() {
				defer c.Close()
				in.Serve(c)
			})
		}
	})
	t.Cleanup(func() {
		ln.Close()
		mu.Lock()
		for c := range conns {
			c.Close()
		}
		mu.Unlock()
		wg.Wait()
	})
	return "tcp://" + ln.Addr().String()
}
