package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"strings"
	"time"

	"rolloff/driver/scpi"
	"rolloff/driver/transport"
)

func init() {
	register(&command{
		name:    "probe",
		summary: "identify an instrument at an address and read its error queue",
		run:     runProbe,
	})
}

// probeOptions are the settings of one probe.
type probeOptions struct {
	address   string
	timeout   time.Duration
	writeTerm string
	readTerm  string
}

// runProbe parses the probe command line: one address, flags before or
// after it.
func runProbe(ctx context.Context, env *cmdEnv, args []string) error {
	fs := flag.NewFlagSet("probe", flag.ContinueOnError)
	fs.SetOutput(env.stderr)
	timeout := fs.Duration("timeout", transport.DefaultTimeout, "how long to wait for the connection and for each answer")
	writeTerm := fs.String("write-term", `\n`, `terminator appended to each command: \n, \r\n or \r`)
	readTerm := fs.String("read-term", `\n`, `terminator ending each response: \n, \r\n or \r`)
	fs.Usage = func() {
		fmt.Fprintf(env.stderr, "usage: rolloff probe ADDRESS [--timeout 2s] [--write-term \\n] [--read-term \\n]\n\n"+
			"Connects to the instrument at ADDRESS, prints its *IDN? fields and drains its\n"+
			"error queue (SYST:ERR?). ADDRESS is one of\n"+
			"  tcp://host[:port]                (LAN raw socket, port 5025 by default)\n"+
			"  serial:///dev/ttyUSB0?baud=115200&bits=8&parity=none&stop=1&flow=none\n"+
			"  usbtmc:///dev/usbtmc0            (Linux USBTMC device)\n\n")
		fs.PrintDefaults()
	}
	var pos []string
	rest := args
	for {
		if err := fs.Parse(rest); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				return err
			}
			return &exitError{code: 2, err: err}
		}
		if fs.NArg() == 0 {
			break
		}
		pos = append(pos, fs.Arg(0))
		rest = fs.Args()[1:]
	}
	if len(pos) != 1 {
		fs.Usage()
		return &exitError{code: 2, err: fmt.Errorf("want exactly one ADDRESS, got %d argument(s)", len(pos))}
	}
	if *timeout <= 0 {
		return &exitError{code: 2, err: fmt.Errorf("--timeout %v: allowed > 0, e.g. 2s or 500ms", *timeout)}
	}
	opts := probeOptions{address: pos[0], timeout: *timeout}
	var err error
	if opts.writeTerm, err = probeTerm("--write-term", *writeTerm); err != nil {
		return &exitError{code: 2, err: err}
	}
	if opts.readTerm, err = probeTerm("--read-term", *readTerm); err != nil {
		return &exitError{code: 2, err: err}
	}
	return probeMain(ctx, env.stdout, opts)
}

// probeTerm reads a terminator flag written with escapes (\n, \r) or as
// the characters themselves.
func probeTerm(flagName, v string) (string, error) {
	s := strings.NewReplacer(`\r`, "\r", `\n`, "\n").Replace(v)
	if s == "" || len(s) > 2 || strings.Trim(s, "\r\n") != "" {
		return "", fmt.Errorf(`%s %q: allowed \n, \r\n, \r or \n\r`, flagName, v)
	}
	return s, nil
}

// probeMain identifies the instrument and prints its error queue. Its
// errors name the address, the transport and the time-out.
func probeMain(ctx context.Context, w io.Writer, o probeOptions) error {
	addr, err := transport.ParseAddress(o.address)
	if err != nil {
		return &exitError{code: 2, err: err}
	}
	where := fmt.Sprintf("%s (%s transport, time-out %v)", o.address, addr.Scheme, o.timeout)
	octx, cancel := context.WithTimeout(ctx, o.timeout)
	defer cancel()
	conn, err := transport.OpenAddress(octx, addr, transport.Opts{WriteTerm: o.writeTerm, ReadTerm: o.readTerm, Timeout: o.timeout})
	if err != nil {
		return fmt.Errorf("%s: cannot connect: %w", where, err)
	}
	s := scpi.New(conn, &scpi.Opts{QueryTimeout: o.timeout})
	defer s.Close()

	id, err := s.Identify(ctx)
	if err != nil {
		return fmt.Errorf("%s: no valid answer to *IDN?: %w", where, err)
	}
	fmt.Fprintf(w, "address:      %s\n", addr)
	fmt.Fprintf(w, "transport:    %s\n", addr.Scheme)
	fmt.Fprintf(w, "manufacturer: %s\n", id.Manufacturer)
	fmt.Fprintf(w, "model:        %s\n", id.Model)
	fmt.Fprintf(w, "serial:       %s\n", id.Serial)
	fmt.Fprintf(w, "firmware:     %s\n", id.Firmware)
	errs, err := s.DrainErrors(ctx)
	for _, e := range errs {
		fmt.Fprintf(w, "error:        %d %s (%s)\n", e.Code, scpi.QuoteString(e.Message), e.Class())
	}
	if err != nil {
		return fmt.Errorf("%s: reading the error queue (SYST:ERR?): %w", where, err)
	}
	if len(errs) == 0 {
		fmt.Fprintf(w, "error queue:  empty\n")
	} else {
		fmt.Fprintf(w, "error queue:  %d entr%s read, now empty\n", len(errs), map[bool]string{true: "y", false: "ies"}[len(errs) == 1])
	}
	return nil
}
