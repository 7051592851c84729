package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"

	"rolloff/driver"
	"rolloff/driver/profile"
	"rolloff/driver/scpi"
	"rolloff/driver/transport"
	"rolloff/driver/transport/replay"
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
	// record, when set, is the file the session's transcript is written
	// to, in the replay format (driver/transport/replay).
	record string
	// profile, when set, is an instrument profile to check the
	// instrument against (as `rolloff check` does for a bench).
	profile string
}

// runProbe parses the probe command line: one address, flags before or
// after it.
func runProbe(ctx context.Context, env *cmdEnv, args []string) error {
	fs := flag.NewFlagSet("probe", flag.ContinueOnError)
	fs.SetOutput(env.stderr)
	timeout := fs.Duration("timeout", transport.DefaultTimeout, "how long to wait for the connection and for each answer")
	writeTerm := fs.String("write-term", `\n`, `terminator appended to each command: \n, \r\n or \r`)
	readTerm := fs.String("read-term", `\n`, `terminator ending each response: \n, \r\n or \r`)
	record := fs.String("record", "", "write the session's transcript to this file, in the replay format (for a bug report or a test)")
	profilePath := fs.String("profile", "", "check the instrument against this profile: every key once, output off (never on)")
	fs.Usage = func() {
		fmt.Fprintf(env.stderr, "usage: rolloff probe ADDRESS [--timeout 2s] [--write-term \\n] [--read-term \\n] [--record FILE] [--profile FILE]\n\n"+
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
	opts := probeOptions{address: pos[0], timeout: *timeout, record: *record, profile: *profilePath}
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

// probeMain identifies the instrument and prints its error queue, or
// with a profile checks the instrument against it; with record it writes
// the session's transcript. Its errors name the address, the transport
// and the time-out.
func probeMain(ctx context.Context, w io.Writer, o probeOptions) (err error) {
	addr, err := transport.ParseAddress(o.address)
	if err != nil {
		return &exitError{code: 2, err: err}
	}
	var prof any
	topts := transport.Opts{WriteTerm: o.writeTerm, ReadTerm: o.readTerm, Timeout: o.timeout}
	sopts := &scpi.Opts{QueryTimeout: o.timeout}
	if o.profile != "" {
		data, rerr := os.ReadFile(o.profile)
		if rerr != nil {
			return &exitError{code: 2, err: fmt.Errorf("--profile: %w", rerr)}
		}
		if prof, err = profile.Decode(o.profile, data); err != nil {
			return &exitError{code: 2, err: err}
		}
		f, d, r := profileDialect(prof)
		topts = transport.Opts{WriteTerm: f.WriteTerm(), ReadTerm: f.ReadTerm(), Timeout: f.QueryTimeout()}
		sopts = profile.SessionOpts(f, d, r)
	}
	where := fmt.Sprintf("%s (%s transport, time-out %v)", o.address, addr.Scheme, topts.Timeout)
	octx, cancel := context.WithTimeout(ctx, o.timeout)
	defer cancel()
	conn, err := transport.OpenAddress(octx, addr, topts)
	if err != nil {
		return fmt.Errorf("%s: cannot connect: %w", where, err)
	}
	if o.record != "" {
		rec := replay.NewRecorder(conn)
		conn = rec
		defer func() {
			heading := fmt.Sprintf("rolloff probe %s", addr)
			if o.profile != "" {
				heading += " --profile " + filepath.Base(o.profile)
			}
			if serr := rec.Transcript().Save(o.record, heading); serr != nil && err == nil {
				err = fmt.Errorf("--record %s: %w", o.record, serr)
			}
		}()
	}
	s := scpi.New(conn, sopts)
	defer s.Close()
	if prof != nil {
		return probeProfile(ctx, w, s, prof)
	}

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

// profileDialect returns the framing, dialect and response table of a
// decoded SCPI profile.
func profileDialect(p any) (profile.Framing, profile.Dialect, profile.Response) {
	switch x := p.(type) {
	case *profile.Generator:
		return x.Framing, x.Dialect, x.Response
	case *profile.DMM:
		return x.Framing, x.Dialect, x.Response
	case *profile.Switch:
		return x.Framing, x.Dialect, x.Response
	}
	return profile.Framing{}, profile.Dialect{}, profile.Response{}
}

// probeProfile checks one instrument against its profile, as `rolloff
// check` checks a bench: a DMM on each of its ranges and integration
// times, a generator with its output off and never switched on.
func probeProfile(ctx context.Context, w io.Writer, s *scpi.Session, p any) error {
	_, d, _ := profileDialect(p)
	check := func(checkErrors bool) *checker {
		return &checker{sess: s, check: checkErrors && s.HasErrorQuery(), nf: d.NumberFormat()}
	}
	var c *checker
	switch x := p.(type) {
	case *profile.Generator:
		c = check(x.Commands.CheckErrors)
		c.role = "generator"
		if c.identify(ctx, x.Identity) {
			checkGenerator(ctx, c, x, driver.GeneratorLimits{})
		}
	case *profile.DMM:
		c = check(x.CheckErrors)
		c.role = "dmm"
		if c.identify(ctx, x.Identity) {
			var uses []meterUse
			for _, r := range x.DC.RangesV {
				uses = append(uses, meterUse{rangeV: r})
			}
			top := x.DC.RangesV[len(x.DC.RangesV)-1]
			for _, n := range x.DC.NPLC {
				uses = append(uses, meterUse{rangeV: top, aperture: driver.Aperture{NPLC: n}})
			}
			checkMeter(ctx, c, x, false, uses)
			if ac := x.AC; ac != nil {
				var acUses []meterUse
				for _, r := range ac.RangesVrms {
					acUses = append(acUses, meterUse{rangeV: r})
				}
				checkMeter(ctx, c, x, true, acUses)
			}
		}
	case *profile.Switch:
		c = check(x.CheckErrors)
		c.role = "switch"
		if c.identify(ctx, x.Identity) {
			c.clear(ctx, x.Dialect)
			for _, sq := range seqOf("commands.init", x.T.Init) {
				c.run(ctx, sq.Key(), sq, false)
			}
			c.run(ctx, "commands.open_all", x.T.OpenAll, false)
			c.opc(ctx, x.Dialect)
		}
	default:
		return &exitError{code: 2, err: fmt.Errorf("--profile: a %T profile has no SCPI instrument to check", p)}
	}
	return printCheck(w, c.lines)
}
