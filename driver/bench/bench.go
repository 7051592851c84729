// Package bench opens a whole bench from a bench file: it connects every
// instrument through its transport and SCPI session, checks identities,
// clears the instruments, puts the generator in its safe state (output
// off) and configures the roles. With a [sim] table it starts the
// simulated bench in-process and reaches it through the real TCP
// transport, so the whole stack is exercised.
package bench

import (
	"context"
	"errors"
	"fmt"
	"sync"

	"github.com/rs/zerolog"

	"rolloff/configs"
	"rolloff/driver"
	"rolloff/driver/bench/benchlock"
	"rolloff/driver/instr"
	"rolloff/driver/profile"
	"rolloff/driver/scpi"
	"rolloff/driver/sim"
	"rolloff/driver/transport"
)

// Bench is an open bench: its roles, ready to use.
type Bench struct {
	Generator driver.Generator
	// DCVoltmeter and Converter are set with voltmeter_mode "converter";
	// ACVoltmeter with "ac-dmm".
	DCVoltmeter driver.DCVoltmeter
	ACVoltmeter driver.ACVoltmeter
	Converter   driver.Converter
	// Vin is the optional second voltmeter on the DUT input (nil when the
	// bench file has no [vin]).
	Vin driver.ACVoltmeter
	// Switch is the converter's range switch, nil unless the converter is
	// selected remotely.
	Switch *instr.Switch
	// TimeScale is model seconds per wall second: 1 on a real bench.
	TimeScale float64
	// LineHz is the power-line frequency the voltmeter's NPLC refers to.
	LineHz float64
	// Identities are the *IDN? answers by role.
	Identities map[string]driver.Identity
	// Sim is the in-process simulated bench, nil on a real bench.
	Sim *sim.Bench
	// Limits are the bench file's limits (the amplitude cap protects the
	// DUT); Generator.Limits() is the tighter of these and the
	// instrument's.
	Limits driver.GeneratorLimits
	// DCConfig and ACConfig are the voltmeter configurations applied.
	DCConfig driver.DCConfig
	ACConfig driver.ACConfig
	// Raw is the bench file's bytes as given, for the run store.
	Raw []byte
	// Config is the decoded bench file with its resolved profiles.
	Config *profile.BenchFile

	log       zerolog.Logger
	gen       *instr.Generator
	sessions  []*scpi.Session
	closeOnce sync.Once
	closeErr  error
	lock      *benchlock.Lock // the instruments' addresses, held while open
}

// Role names, as in the bench file and the simulator.
const (
	RoleGenerator = "generator"
	RoleVoltmeter = "voltmeter"
	RoleSwitch    = "switch"
	RoleDMM       = "dmm"
	RoleVin       = "vin"
)

// Load reads and validates a bench file and the profiles it names.
func Load(path string) (*profile.BenchFile, error) { return profile.LoadBench(path) }

// OpenDemo opens the demo simulated bench (the embedded
// configs/sim-bench.toml) in-process.
func OpenDemo(ctx context.Context, log zerolog.Logger) (*Bench, error) {
	cfg, err := configs.LoadBench(configs.SimBench)
	if err != nil {
		return nil, err
	}
	return Open(ctx, cfg, log)
}

// Open connects to every instrument of cfg and configures the roles. ctx
// bounds the opening. On any failure everything opened so far is halted
// and closed, and the error names the role, address and transport.
func Open(ctx context.Context, cfg *profile.BenchFile, log zerolog.Logger) (*Bench, error) {
	if cfg == nil {
		return nil, errors.New("bench: nil bench configuration")
	}
	b := &Bench{
		TimeScale:  cfg.TimeScale,
		Identities: map[string]driver.Identity{},
		Limits:     cfg.Limits.Driver(),
		Raw:        cfg.Raw,
		Config:     cfg,
		log:        log,
	}
	if b.TimeScale == 0 {
		b.TimeScale = 1
	}
	if err := b.open(ctx, cfg); err != nil {
		b.Close()
		return nil, err
	}
	return b, nil
}

func (b *Bench) open(ctx context.Context, cfg *profile.BenchFile) error {
	if cfg.Sim != nil {
		sc, err := sim.FromBenchFile(cfg)
		if err != nil {
			return err
		}
		s, err := sim.New(*sc)
		if err != nil {
			return fmt.Errorf("bench %s: simulated bench: %w", cfg.File, err)
		}
		b.Sim = s
		if err := s.Start(ctx); err != nil {
			return fmt.Errorf("bench %s: starting the simulated bench: %w", cfg.File, err)
		}
		b.TimeScale = s.TimeScale()
		b.log.Info().Float64("time_scale", b.TimeScale).Msg("simulated bench started")
	}

	if err := b.takeLock(cfg); err != nil {
		return err
	}
	// The generator first, and its output off before anything else.
	g := cfg.Generator
	sess, where, err := b.connect(ctx, cfg, RoleGenerator, g.Address, g.Generator.Framing, g.Generator.Dialect, g.Generator.Response)
	if err != nil {
		return err
	}
	gen, err := instr.NewGenerator(sess, g.Generator, b.Limits)
	if err != nil {
		return fmt.Errorf("%s: %w", where, err)
	}
	b.gen, b.Generator = gen, gen
	if err := gen.Halt(); err != nil {
		return fmt.Errorf("%s: switching the output off: %w", where, err)
	}
	if err := b.greet(ctx, RoleGenerator, where, sess, g.Generator.Identity, g.Generator.Dialect, g.Generator.Commands.CheckErrors); err != nil {
		return err
	}
	if err := gen.Setup(ctx); err != nil {
		return fmt.Errorf("%s: %w", where, err)
	}

	if r := cfg.Switch; r != nil {
		sess, where, err := b.connect(ctx, cfg, RoleSwitch, r.Address, r.Switch.Framing, r.Switch.Dialect, r.Switch.Response)
		if err != nil {
			return err
		}
		sw, err := instr.NewSwitch(sess, r.Switch)
		if err != nil {
			return fmt.Errorf("%s: %w", where, err)
		}
		if err := b.greet(ctx, RoleSwitch, where, sess, r.Switch.Identity, r.Switch.Dialect, r.Switch.CheckErrors); err != nil {
			return err
		}
		if err := sw.Setup(ctx); err != nil {
			return fmt.Errorf("%s: %w", where, err)
		}
		b.Switch = sw
	}

	if r := cfg.Voltmeter; r != nil {
		sess, where, err := b.connect(ctx, cfg, RoleVoltmeter, r.Address, r.DMM.Framing, r.DMM.Dialect, r.DMM.Response)
		if err != nil {
			return err
		}
		v, err := instr.NewDCVoltmeter(sess, r.DMM)
		if err != nil {
			return fmt.Errorf("%s: %w", where, err)
		}
		if err := b.greet(ctx, RoleVoltmeter, where, sess, r.DMM.Identity, r.DMM.Dialect, r.DMM.CheckErrors); err != nil {
			return err
		}
		if err := v.Setup(ctx); err != nil {
			return fmt.Errorf("%s: %w", where, err)
		}
		b.DCConfig = cfg.DCConfig()
		if err := v.ConfigureDC(ctx, b.DCConfig); err != nil {
			return fmt.Errorf("%s: %w", where, err)
		}
		b.DCVoltmeter = v
		b.LineHz = v.LineHz()
	}

	if r := cfg.Converter; r != nil {
		var sw *instr.Switch
		if r.Spec.Selection == profile.SelectRemote {
			sw = b.Switch
		}
		c, err := instr.NewConverter(r.Spec, sw)
		if err != nil {
			return fmt.Errorf("bench %s: converter %s: %w", cfg.File, r.Profile, err)
		}
		b.Converter = c
	}

	for _, m := range []struct {
		role string
		r    *profile.ACMeterRole
		into *driver.ACVoltmeter
	}{{RoleDMM, cfg.DMM, &b.ACVoltmeter}, {RoleVin, cfg.Vin, &b.Vin}} {
		if m.r == nil {
			continue
		}
		sess, where, err := b.connect(ctx, cfg, m.role, m.r.Address, m.r.DMM.Framing, m.r.DMM.Dialect, m.r.DMM.Response)
		if err != nil {
			return err
		}
		a, err := instr.NewACVoltmeter(sess, m.r.DMM)
		if err != nil {
			return fmt.Errorf("%s: %w", where, err)
		}
		a.SetRole(m.role)
		if err := b.greet(ctx, m.role, where, sess, m.r.DMM.Identity, m.r.DMM.Dialect, m.r.DMM.CheckErrors); err != nil {
			return err
		}
		if err := a.Setup(ctx); err != nil {
			return fmt.Errorf("%s: %w", where, err)
		}
		ac := m.r.ACConfig()
		if err := a.ConfigureAC(ctx, ac); err != nil {
			return fmt.Errorf("%s: %w", where, err)
		}
		if m.role == RoleDMM {
			b.ACConfig = ac
			b.LineHz = a.LineHz()
		}
		*m.into = a
	}
	if b.LineHz == 0 && b.Sim != nil {
		b.LineHz = b.Sim.LineHz()
	}
	return nil
}

// connect opens the transport and SCPI session of one role. where names
// the role, address and transport for error messages.
func (b *Bench) connect(ctx context.Context, cfg *profile.BenchFile, role, address string, f profile.Framing, d profile.Dialect, r profile.Response) (*scpi.Session, string, error) {
	addr := address
	if addr == profile.AddressSim {
		if b.Sim == nil {
			return nil, "", fmt.Errorf("bench %s: %s: address \"sim\" without a simulated bench", cfg.File, role)
		}
		addr = b.Sim.Addr(role)
		if addr == "" {
			return nil, "", fmt.Errorf("bench %s: %s: the simulated bench has no %s instrument", cfg.File, role, role)
		}
	}
	scheme := "?"
	if a, err := transport.ParseAddress(addr); err == nil {
		scheme = a.Scheme
	}
	where := fmt.Sprintf("bench %s: %s at %s (%s transport)", cfg.File, role, address, scheme)
	if address == profile.AddressSim {
		where = fmt.Sprintf("bench %s: %s at sim = %s (%s transport)", cfg.File, role, addr, scheme)
	}
	conn, err := transport.Open(ctx, addr, transport.Opts{WriteTerm: f.WriteTerm(), ReadTerm: f.ReadTerm(), Timeout: f.QueryTimeout()})
	if err != nil {
		return nil, where, fmt.Errorf("%s: %w", where, err)
	}
	sess := scpi.New(conn, profile.SessionOpts(f, d, r))
	b.sessions = append(b.sessions, sess)
	return sess, where, nil
}

// greet asks the instrument who it is, checks that against the profile,
// sends the profile's clear command (dialect.clear, *CLS by default) and,
// where the profile checks errors and has an error query, drains the
// error queue.
func (b *Bench) greet(ctx context.Context, role, where string, sess *scpi.Session, check profile.IdentityCheck, d profile.Dialect, checkErrors bool) error {
	id, err := sess.Identify(ctx)
	if err != nil {
		return fmt.Errorf("%s: *IDN?: %w", where, err)
	}
	if !check.Match(id.Manufacturer, id.Model) {
		return fmt.Errorf("%s: *IDN? answered %q; the profile expects manufacturer %q, model beginning %q", where, id.String(), check.Manufacturer, check.ModelPrefix)
	}
	b.Identities[role] = id
	if c := d.ClearCommand(); c != "" {
		if err := sess.Write(ctx, c); err != nil {
			return fmt.Errorf("%s: %s: %w", where, c, err)
		}
	}
	var errs []scpi.Error
	if checkErrors && sess.HasErrorQuery() {
		if errs, err = sess.DrainErrors(ctx); err != nil {
			return fmt.Errorf("%s: reading the error queue: %w", where, err)
		}
	}
	for _, e := range errs {
		b.log.Warn().Str("role", role).Int("code", e.Code).Str("message", e.Message).Msg("error queue not empty after *CLS")
	}
	b.log.Info().Str("role", role).Str("idn", id.String()).Msg("instrument opened")
	return nil
}

// Close halts the generator (output off), then closes every session and
// the simulated bench. It is idempotent.
func (b *Bench) Close() error {
	b.closeOnce.Do(func() {
		var errs []error
		if b.gen != nil {
			if err := b.gen.Halt(); err != nil {
				errs = append(errs, fmt.Errorf("bench: halting the generator: %w", err))
			}
		}
		for i := len(b.sessions) - 1; i >= 0; i-- {
			if err := b.sessions[i].Close(); err != nil && !errors.Is(err, driver.ErrClosed) {
				errs = append(errs, fmt.Errorf("bench: %w", err))
			}
		}
		if b.Sim != nil {
			if err := b.Sim.Close(); err != nil {
				errs = append(errs, fmt.Errorf("bench: simulated bench: %w", err))
			}
		}
		b.releaseLock()
		b.closeErr = errors.Join(errs...)
	})
	return b.closeErr
}

// Halt switches the generator output off.
func (b *Bench) Halt() error {
	if b.gen == nil {
		return nil
	}
	return b.gen.Halt()
}
