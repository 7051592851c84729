package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"sort"
	"strings"
	"time"

	"rolloff/driver"
	"rolloff/driver/bench"
	"rolloff/driver/bench/benchlock"
	"rolloff/driver/profile"
	"rolloff/driver/scpi"
	"rolloff/driver/sim"
	"rolloff/driver/transport"
	"rolloff/sweep/plan"
	"rolloff/sweep/sched/onbench"
	"rolloff/sweep/settle"
)

func init() {
	register(&command{
		name:    "check",
		summary: "dry-run every profile command on a bench, output off, and say which the instruments accept",
		run:     runCheck,
	})
}

func runCheck(ctx context.Context, env *cmdEnv, args []string) error {
	fs := flag.NewFlagSet("rolloff check", flag.ContinueOnError)
	fs.SetOutput(env.stderr)
	fs.Usage = func() {
		fmt.Fprintf(env.stderr, "usage: rolloff check BENCH [PLAN]\n\n"+
			"Opens every instrument of BENCH with the generator output off (it is never\n"+
			"switched on), sends each configured command once, reading the error queue\n"+
			"after each, takes one reading on each range and integration time PLAN will\n"+
			"use (the bench's own without PLAN), times the queries and tries the\n"+
			"operation-complete query. One line per profile key: accepted, refused (with\n"+
			"the instrument's error) or no answer, with a suggestion. Exit status 1 when\n"+
			"any key fails.\n\n")
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return err
	}
	if len(pos) < 1 || len(pos) > 2 {
		fs.Usage()
		return &exitError{code: 2, err: errors.New("want BENCH and an optional PLAN")}
	}
	cfg, err := profile.LoadBench(pos[0])
	if err != nil {
		return &exitError{code: 2, err: err}
	}
	var p *plan.Plan
	if len(pos) == 2 {
		if p, err = plan.Load(pos[1]); err != nil {
			return &exitError{code: 2, err: err}
		}
		if err := onbench.CheckPlan(cfg, p); err != nil {
			return &exitError{code: 2, err: err}
		}
	}
	return checkBench(ctx, env.stdout, cfg, p)
}

// checkLine is the outcome of one profile key.
type checkLine struct {
	role, key string
	cmds      []string
	status    string // statusAccepted, statusRefused, statusNoAnswer, statusSkipped, statusSent
	detail    string
	suggest   string
	took      time.Duration
	query     bool
}

const (
	statusAccepted = "accepted"
	statusRefused  = "refused"
	statusNoAnswer = "no answer"
	statusSent     = "sent"     // no error query to confirm it
	statusSkipped  = "not sent" // deliberately (output_on)
)

func (l checkLine) failed() bool { return l.status == statusRefused || l.status == statusNoAnswer }

// checker dry-runs one instrument's profile keys over its session.
type checker struct {
	role  string
	sess  *scpi.Session
	check bool // drain the error queue after each command
	nf    scpi.NumberFormat
	lines []checkLine
}

// run sends cmds (the last one a query when query) and records the line.
func (c *checker) run(ctx context.Context, key string, s *scpi.Seq, query bool, args ...scpi.Arg) (string, bool) {
	l := checkLine{role: c.role, key: key, query: query}
	cmds, err := s.Format(args...)
	if err != nil {
		l.status, l.detail = statusRefused, err.Error()
		l.suggest = "fix the template in the profile"
		c.lines = append(c.lines, l)
		return "", false
	}
	l.cmds = cmds
	var resp string
	t0 := time.Now()
	for i, cmd := range cmds {
		if query && i == len(cmds)-1 {
			resp, err = c.sess.Query(ctx, cmd)
		} else {
			err = c.sess.Write(ctx, cmd)
		}
		if err != nil {
			break
		}
	}
	l.took = time.Since(t0)
	switch {
	case err != nil && errors.Is(err, driver.ErrTimeout):
		l.status, l.detail = statusNoAnswer, err.Error()
		l.suggest = "the instrument did not answer: check that it knows this query, framing.read_terminator and framing.query_timeout_s"
	case err != nil:
		l.status, l.detail = statusRefused, err.Error()
		l.suggest = "the link failed: check the address and framing"
	}
	if l.status == "" {
		l.status = statusAccepted
		if !c.check {
			l.status = statusSent
			if !query {
				l.detail = "no error query to confirm it"
			}
		}
	}
	if c.check {
		errs, derr := c.sess.DrainErrors(ctx)
		if len(errs) > 0 {
			msgs := make([]string, len(errs))
			for i, e := range errs {
				msgs[i] = e.Error()
			}
			l.status, l.detail = statusRefused, strings.Join(msgs, "; ")
			l.suggest = suggestFor(errs[0])
		} else if derr != nil && !l.failed() {
			l.status, l.detail = statusNoAnswer, "reading the error queue: "+derr.Error()
			l.suggest = "check dialect.error_query (\"\" if the instrument has none, with check_errors = false)"
		}
	}
	c.lines = append(c.lines, l)
	return resp, !l.failed()
}

// suggestFor turns an instrument's error into advice (SCPI-1999 Vol 2
// §21.8 error classes).
func suggestFor(e scpi.Error) string {
	switch {
	case e.Code <= -100 && e.Code >= -199:
		if e.Code == -113 {
			return "the instrument does not know this header: look the command up in its manual, or leave an optional key empty"
		}
		return "the instrument cannot parse this command: check its spelling and parameters in the manual"
	case e.Code == -222 || e.Code == -224:
		return "the value is outside what the instrument takes: check the ranges, integration times and limits in the profile"
	case e.Code == -230:
		return "the reading was not ready: trigger it first (a read list such as [\"INITiate\", \"FETCh?\"])"
	case e.Code <= -200 && e.Code >= -299:
		return "the instrument could not execute it in its present state: check the order of the commands"
	case e.Code <= -400 && e.Code >= -499:
		return "the instrument had no answer to give: check that the key is a query where one is expected"
	}
	return "see the instrument's manual for this error"
}

// parseLine records a numeric answer that did not parse.
func (c *checker) parseFailed(err error, resp string) {
	l := &c.lines[len(c.lines)-1]
	if errors.Is(err, driver.ErrOverload) {
		l.detail = fmt.Sprintf("answered %q, an overload (flagged, not a value)", resp)
		return
	}
	l.status, l.detail = statusRefused, fmt.Sprintf("answered %q: %v", resp, err)
	l.suggest = "the answer is not a number: describe its units and words in [response] (strip_suffixes, overload_words, trailing_separator)"
}

func (c *checker) note(key, status, detail, suggest string) {
	c.lines = append(c.lines, checkLine{role: c.role, key: key, status: status, detail: detail, suggest: suggest})
}

// opc tries the operation-complete query.
func (c *checker) opc(ctx context.Context, d profile.Dialect) {
	q := d.OPCQueryCommand()
	if q == "" {
		c.note("dialect.opc_query", statusSkipped, "none in the profile: halts are confirmed by query_output or a delay", "")
		return
	}
	s, err := scpi.CompileSeq("dialect.opc_query", q)
	if err != nil {
		c.note("dialect.opc_query", statusRefused, err.Error(), "fix dialect.opc_query")
		return
	}
	resp, ok := c.run(ctx, "dialect.opc_query", s, true)
	if ok && strings.TrimSpace(resp) != "1" && strings.TrimSpace(resp) != "+1" {
		l := &c.lines[len(c.lines)-1]
		l.status, l.detail = statusRefused, fmt.Sprintf("answered %q, want 1 (IEEE 488.2 §10.19)", resp)
		l.suggest = "set dialect.opc_query to the instrument's completion query, or \"\" if it has none"
	}
}

// identify reads *IDN? and the check of the profile's identity table.
func (c *checker) identify(ctx context.Context, id profile.IdentityCheck) bool {
	t0 := time.Now()
	got, err := c.sess.Identify(ctx)
	l := checkLine{role: c.role, key: "identity", cmds: []string{"*IDN?"}, took: time.Since(t0), query: true, status: statusAccepted}
	switch {
	case errors.Is(err, driver.ErrTimeout):
		l.status, l.detail, l.suggest = statusNoAnswer, err.Error(), "check the address, framing.write_terminator and framing.read_terminator"
	case err != nil:
		l.status, l.detail, l.suggest = statusRefused, err.Error(), "an identity of fewer than four fields needs response.lenient_identity = true"
	case !id.Match(got.Manufacturer, got.Model):
		l.status, l.detail = statusRefused, fmt.Sprintf("answered %q; the profile expects manufacturer %q, model beginning %q", got.String(), id.Manufacturer, id.ModelPrefix)
		l.suggest = "fix [identity] or the address"
	default:
		l.detail = got.String()
	}
	c.lines = append(c.lines, l)
	return !l.failed()
}

// clear sends the profile's clear command and empties the error queue.
func (c *checker) clear(ctx context.Context, d profile.Dialect) {
	if cmd := d.ClearCommand(); cmd != "" {
		s, err := scpi.CompileSeq("dialect.clear", cmd)
		if err == nil {
			c.run(ctx, "dialect.clear", s, false)
		}
	}
	if c.sess.HasErrorQuery() {
		_, _ = c.sess.DrainErrors(ctx)
	}
}

func seqOf(key string, ts []*scpi.Template) []*scpi.Seq {
	out := make([]*scpi.Seq, len(ts))
	for i, t := range ts {
		out[i] = scpi.NewSeq(t.Key(), t)
	}
	return out
}

// checkGenerator dry-runs a generator profile: output off first, every
// setting at the lowest level the limits allow, never output_on.
func checkGenerator(ctx context.Context, c *checker, g *profile.Generator, bench driver.GeneratorLimits) {
	t := &g.T
	f := math.Max(g.Limits.MinFreqHz, math.Max(bench.MinFreqHz, math.Min(1000, g.Limits.MaxFreqHz)))
	ampVrms := math.Max(g.MinVrms(), bench.MinVrms)
	amp := g.Output.ToUnit(g.Output.ShownVrms(ampVrms))
	if math.IsInf(amp, 0) || math.IsNaN(amp) {
		if g.Limits.MinAmplitude != nil {
			amp = *g.Limits.MinAmplitude
		} else {
			amp = g.Limits.MaxAmplitude - 40 // dBm: 40 dB under the limit
		}
	}
	gen := func(s *scpi.Seq, extra ...scpi.Arg) []scpi.Arg {
		out := append([]scpi.Arg(nil), extra...)
		for _, n := range s.Placeholders() {
			switch n {
			case "freq_hz":
				out = append(out, scpi.NumIn(n, f, c.nf))
			case "amplitude":
				out = append(out, scpi.NumIn(n, amp, c.nf))
			case "offset_v":
				out = append(out, scpi.NumIn(n, g.Output.OffsetV, c.nf))
			}
		}
		return out
	}
	off := func() { c.run(ctx, "commands.output_off", t.OutputOff, false, gen(t.OutputOff)...) }
	off()
	c.clear(ctx, g.Dialect)
	for _, s := range seqOf("commands.init", t.Init) {
		c.run(ctx, s.Key(), s, false)
	}
	c.run(ctx, "commands.function_sine", t.FunctionSine, false, gen(t.FunctionSine)...)
	if t.SetUnit != nil {
		c.run(ctx, "commands.set_unit", t.SetUnit, false, gen(t.SetUnit, scpi.Word("unit", g.Output.UnitWord()))...)
	}
	if t.SetLoad != nil {
		arg := scpi.Word("load", "INFinity")
		if r := g.Output.LoadOhms(); !math.IsInf(r, 1) {
			arg = scpi.NumIn("load", r, c.nf)
		}
		c.run(ctx, "commands.set_load", t.SetLoad, false, gen(t.SetLoad, arg)...)
	}
	if t.SetOffset != nil {
		c.run(ctx, "commands.set_offset", t.SetOffset, false, gen(t.SetOffset)...)
	}
	c.run(ctx, "commands.set_frequency", t.SetFrequency, false, gen(t.SetFrequency)...)
	c.run(ctx, "commands.set_amplitude", t.SetAmplitude, false, gen(t.SetAmplitude)...)
	readBack := func(key string, s *scpi.Seq, sent float64) {
		if s == nil {
			return
		}
		resp, ok := c.run(ctx, key, s, true)
		if !ok {
			return
		}
		v, err := g.Response.Format().ParseNumber(resp)
		if err != nil {
			c.parseFailed(err, resp)
			return
		}
		if sent != 0 && math.Abs(v/sent-1) > g.ReadbackTol() {
			l := &c.lines[len(c.lines)-1]
			l.status, l.detail = statusRefused, fmt.Sprintf("read back %g, sent %g", v, sent)
			l.suggest = "the instrument holds another value than it was sent: check output.unit, the limits and commands.readback_tolerance"
		}
	}
	readBack("commands.query_frequency", t.QueryFreq, c.nf.Round(f))
	readBack("commands.query_amplitude", t.QueryAmpl, c.nf.Round(amp))
	c.note("commands.output_on", statusSkipped, "the check never switches the output on", "")
	off()
	if t.QueryOutput != nil {
		resp, ok := c.run(ctx, "commands.query_output", t.QueryOutput, true)
		if ok {
			switch strings.ToUpper(strings.TrimSpace(resp)) {
			case "0", "OFF", "+0":
				c.lines[len(c.lines)-1].detail = "off"
			default:
				l := &c.lines[len(c.lines)-1]
				l.status, l.detail = statusRefused, fmt.Sprintf("answered %q after output_off, want 0 or OFF", resp)
				l.suggest = "check commands.output_off and commands.query_output"
			}
		}
	}
	c.opc(ctx, g.Dialect)
}

// meterUse is one range and integration time a sweep will read with.
type meterUse struct {
	rangeV   float64 // 0: autorange
	aperture driver.Aperture
}

// dcUses returns the DC ranges and apertures the plan will read with:
// the bench's range (every range on autorange) and, with a plan, the
// apertures the settle planner picks at its frequencies on each
// converter range (sweep/settle), else the bench's aperture.
func dcUses(cfg *profile.BenchFile, p *plan.Plan) []meterUse {
	v := cfg.Voltmeter
	base := cfg.DCConfig()
	ranges := []float64{base.RangeV}
	if base.RangeV == 0 && v.DMM.T.DCSetAutoRange == nil {
		ranges = v.DMM.DC.RangesV
	}
	aps := []driver.Aperture{base.Aperture}
	if p != nil && cfg.Converter != nil && cfg.Converter.Spec != nil {
		m := onbench.Meter(cfg)
		seen := map[float64]bool{}
		aps = nil
		freqs, _ := p.Freqs()
		for _, rg := range cfg.Converter.Spec.DriverRanges() {
			for _, fr := range freqs {
				rd, err := settle.ChooseAperture(fr.Hz, rg.TimeConstantS, 0.25*p.Settle.Tolerance, m)
				if err != nil || seen[rd.ApertureS] {
					continue
				}
				seen[rd.ApertureS] = true
				a := driver.Aperture{Seconds: rd.ApertureS}
				if v.DMM.DC.MaxApertureS == 0 && len(v.DMM.DC.NPLC) > 0 {
					a = driver.Aperture{NPLC: math.Round(rd.ApertureS*v.DMM.LineHz*1e9) / 1e9}
				}
				aps = append(aps, a)
			}
		}
		sort.Slice(aps, func(i, j int) bool { return aps[i].Duration(v.DMM.LineHz) < aps[j].Duration(v.DMM.LineHz) })
		if len(aps) == 0 {
			aps = []driver.Aperture{base.Aperture}
		}
	}
	var out []meterUse
	for _, r := range ranges {
		for _, a := range aps {
			out = append(out, meterUse{rangeV: r, aperture: a})
		}
	}
	return out
}

// checkMeter dry-runs a DMM profile's DC (ac false) or AC function: each
// command once, then one reading on each range and aperture of uses.
func checkMeter(ctx context.Context, c *checker, d *profile.DMM, ac bool, uses []meterUse) {
	t := &d.T
	c.clear(ctx, d.Dialect)
	for _, s := range seqOf("init", t.Init) {
		c.run(ctx, s.Key(), s, false)
	}
	sect := "dc"
	configure, setRange, setAuto, setNPLC, setAp, read := t.DCConfigure, t.DCSetRange, t.DCSetAutoRange, t.DCSetNPLC, t.DCSetAperture, t.DCRead
	rangeName := "range_v"
	if ac {
		sect, rangeName = "ac", "range_vrms"
		configure, setRange, setAuto, setNPLC, setAp, read = t.ACConfigure, t.ACSetRange, t.ACSetAutoRange, t.ACSetNPLC, t.ACSetAperture, t.ACRead
	}
	var latencies []time.Duration
	reading := func(rangeV float64, label string) {
		var args []scpi.Arg
		if read.Has(rangeName) {
			args = append(args, scpi.NumIn(rangeName, rangeV, c.nf))
		}
		resp, ok := c.run(ctx, sect+".read"+label, read, true, args...)
		if !ok {
			return
		}
		latencies = append(latencies, c.lines[len(c.lines)-1].took)
		vals, err := d.Response.Format().ParseNumbers(resp)
		if err != nil {
			c.parseFailed(err, resp)
			return
		}
		c.lines[len(c.lines)-1].detail = fmt.Sprintf("%d reading(s), first %g", len(vals), vals[0])
	}
	lastRange := -1.0
	for _, u := range uses {
		label := fmt.Sprintf(" (%g V range", u.rangeV)
		if u.rangeV == 0 {
			label = " (autorange"
		}
		if u.rangeV != lastRange {
			// CONFigure resets the range and integration time: once
			// per range, then each integration time on it.
			lastRange = u.rangeV
			if configure != nil {
				c.run(ctx, sect+".configure", configure, false)
			}
			switch {
			case u.rangeV == 0 && setAuto != nil:
				c.run(ctx, sect+".set_auto_range", setAuto, false)
			case setRange != nil:
				c.run(ctx, sect+".set_range", setRange, false, scpi.NumIn(rangeName, u.rangeV, c.nf))
			}
		}
		switch a := u.aperture; {
		case a.NPLC > 0 && setNPLC != nil:
			c.run(ctx, sect+".set_nplc", setNPLC, false, scpi.NumIn("nplc", a.NPLC, c.nf))
			label += fmt.Sprintf(", %g NPLC", c.nf.Round(a.NPLC))
		case a.Seconds > 0 && setAp != nil:
			c.run(ctx, sect+".set_aperture", setAp, false, scpi.NumIn("aperture_s", a.Seconds, c.nf))
			label += fmt.Sprintf(", %g s", c.nf.Round(a.Seconds))
		case a.NPLC > 0 || a.Seconds > 0:
			c.note(sect+".set_nplc", statusRefused, fmt.Sprintf("the bench asks for an integration time of %g NPLC / %g s and the profile has no command for it", a.NPLC, a.Seconds),
				"give the profile's integration-time commands, or leave the bench's nplc and aperture_s out")
		}
		reading(u.rangeV, label+")")
	}
	if d.MaxSamples > 1 && t.SetSampleCount != nil {
		n := min(d.MaxSamples, 2)
		if _, ok := c.run(ctx, "set_sample_count", t.SetSampleCount, false, scpi.Int("count", n)); ok {
			var args []scpi.Arg
			if read.Has(rangeName) && len(uses) > 0 {
				args = append(args, scpi.NumIn(rangeName, uses[0].rangeV, c.nf))
			}
			resp, ok := c.run(ctx, sect+".read (burst of 2)", read, true, args...)
			if ok {
				vals, err := d.Response.Format().ParseNumbers(resp)
				switch {
				case err != nil:
					c.parseFailed(err, resp)
				case len(vals) != n:
					l := &c.lines[len(c.lines)-1]
					l.status, l.detail = statusRefused, fmt.Sprintf("%d reading(s) for a burst of %d", len(vals), n)
					l.suggest = "check set_sample_count and max_samples (1 for a meter without bursts)"
				}
			}
			c.run(ctx, "set_sample_count", t.SetSampleCount, false, scpi.Int("count", 1))
		}
	}
	if len(latencies) > 0 {
		sort.Slice(latencies, func(i, j int) bool { return latencies[i] < latencies[j] })
		c.note(sect+".read timing", statusAccepted, fmt.Sprintf("%d reading(s): fastest %v, median %v, slowest %v", len(latencies),
			latencies[0].Round(time.Microsecond), latencies[len(latencies)/2].Round(time.Microsecond), latencies[len(latencies)-1].Round(time.Microsecond)), "")
	}
	c.opc(ctx, d.Dialect)
}

// checkBench dry-runs every instrument of cfg and prints the lines.
func checkBench(ctx context.Context, w io.Writer, cfg *profile.BenchFile, p *plan.Plan) error {
	var simb *sim.Bench
	if cfg.Sim != nil {
		sc, err := sim.FromBenchFile(cfg)
		if err != nil {
			return err
		}
		if simb, err = sim.New(*sc); err != nil {
			return err
		}
		if err := simb.Start(ctx); err != nil {
			return err
		}
		defer simb.Close()
	}
	var addrOf interface{ Addr(string) string }
	if simb != nil {
		addrOf = simb
	}
	lock, err := benchlock.Acquire(bench.Addresses(cfg, addrOf), benchlock.Holder{Command: bench.LockCommand})
	if err != nil {
		return fmt.Errorf("bench %s: %w", cfg.File, err)
	}
	defer lock.Release()
	var all []checkLine
	open := func(role, address string, f profile.Framing, d profile.Dialect, r profile.Response, checkErrors bool, id profile.IdentityCheck) (*checker, func(), error) {
		addr := address
		if addr == profile.AddressSim {
			if simb == nil {
				return nil, nil, fmt.Errorf("bench %s: %s: address \"sim\" without a [sim] table", cfg.File, role)
			}
			addr = simb.Addr(role)
		}
		conn, err := transport.Open(ctx, addr, transport.Opts{WriteTerm: f.WriteTerm(), ReadTerm: f.ReadTerm(), Timeout: f.QueryTimeout()})
		if err != nil {
			return nil, nil, fmt.Errorf("bench %s: %s at %s: %w", cfg.File, role, address, err)
		}
		sess := scpi.New(conn, profile.SessionOpts(f, d, r))
		c := &checker{role: role, sess: sess, check: checkErrors && sess.HasErrorQuery(), nf: d.NumberFormat()}
		if !c.identify(ctx, id) {
			all = append(all, c.lines...)
			sess.Close()
			return nil, nil, nil
		}
		return c, func() { all = append(all, c.lines...); sess.Close() }, nil
	}
	if g := cfg.Generator; g != nil {
		pg := g.Generator
		c, done, err := open(sim.RoleGenerator, g.Address, pg.Framing, pg.Dialect, pg.Response, pg.Commands.CheckErrors, pg.Identity)
		if err != nil {
			return err
		}
		if c != nil {
			checkGenerator(ctx, c, pg, cfg.Limits.Driver())
			done()
		}
	}
	if s := cfg.Switch; s != nil {
		ps := s.Switch
		c, done, err := open(sim.RoleSwitch, s.Address, ps.Framing, ps.Dialect, ps.Response, ps.CheckErrors, ps.Identity)
		if err != nil {
			return err
		}
		if c != nil {
			c.clear(ctx, ps.Dialect)
			for _, sq := range seqOf("commands.init", ps.T.Init) {
				c.run(ctx, sq.Key(), sq, false)
			}
			c.run(ctx, "commands.open_all", ps.T.OpenAll, false)
			c.opc(ctx, ps.Dialect)
			done()
		}
	}
	if v := cfg.Voltmeter; v != nil {
		d := v.DMM
		c, done, err := open(sim.RoleVoltmeter, v.Address, d.Framing, d.Dialect, d.Response, d.CheckErrors, d.Identity)
		if err != nil {
			return err
		}
		if c != nil {
			checkMeter(ctx, c, d, false, dcUses(cfg, p))
			done()
		}
	}
	for _, m := range []struct {
		role string
		r    *profile.ACMeterRole
	}{{sim.RoleDMM, cfg.DMM}, {"vin", cfg.Vin}} {
		if m.r == nil {
			continue
		}
		d := m.r.DMM
		simRole := m.role
		if simRole == "vin" {
			simRole = sim.RoleDMM
		}
		c, done, err := open(simRole, m.r.Address, d.Framing, d.Dialect, d.Response, d.CheckErrors, d.Identity)
		if err != nil {
			return err
		}
		if c != nil {
			c.role = m.role
			ac := m.r.ACConfig()
			checkMeter(ctx, c, d, true, []meterUse{{rangeV: ac.RangeVrms, aperture: ac.Aperture}})
			done()
		}
	}
	return printCheck(w, all)
}

// printCheck prints one line per key and returns an exit-1 error when
// any failed.
func printCheck(w io.Writer, lines []checkLine) error {
	failed := 0
	for _, l := range lines {
		mark := "ok  "
		if l.failed() {
			mark = "FAIL"
			failed++
		}
		cmd := ""
		if len(l.cmds) > 0 {
			cmd = " " + strings.Join(quoteAll(l.cmds), " then ") + ":"
		}
		took := ""
		if l.query && l.took > 0 {
			took = fmt.Sprintf(" [%v]", l.took.Round(time.Microsecond))
		}
		fmt.Fprintf(w, "%s %-9s %s:%s %s%s", mark, l.role, l.key, cmd, l.status, took)
		if l.detail != "" {
			fmt.Fprintf(w, ": %s", l.detail)
		}
		if l.suggest != "" {
			fmt.Fprintf(w, " — %s", l.suggest)
		}
		fmt.Fprintln(w)
	}
	fmt.Fprintf(w, "%d key(s) checked, %d failed; the generator output was never switched on\n", len(lines), failed)
	if failed > 0 {
		return &exitError{code: 1, err: fmt.Errorf("check: %d of %d profile key(s) failed", failed, len(lines))}
	}
	return nil
}

func quoteAll(s []string) []string {
	out := make([]string, len(s))
	for i, x := range s {
		out[i] = fmt.Sprintf("%q", x)
	}
	return out
}
