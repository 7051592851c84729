package instr

import (
	"context"
	"fmt"
	"strings"
	"time"

	"rolloff/driver"
	"rolloff/driver/profile"
	"rolloff/driver/scpi"
)

// lock is a mutex that can be waited for under a context.
type lock chan struct{}

func newLock() lock { return make(lock, 1) }

func (l lock) acquire(ctx context.Context) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	select {
	case l <- struct{}{}:
		return nil
	case <-ctx.Done():
		return ctx.Err()
	}
}

func (l lock) release() { <-l }

// link is what every SCPI role shares: a session, whether to check the
// error queue, the profile's dialect (number format, wait after
// settings) and the role's name for messages.
type link struct {
	role        string
	sess        *scpi.Session
	checkErrors bool
	dialect     profile.Dialect
}

// seqOf makes a one-command sequence of t.
func seqOf(t *scpi.Template) *scpi.Seq { return scpi.NewSeq(t.Key(), t) }

// num is a number argument in the profile's format, and the value the
// instrument receives (rounded to the profile's digits).
func (l *link) num(name string, v float64) (scpi.Arg, float64) {
	f := l.dialect.NumberFormat()
	return scpi.NumIn(name, v, f), f.Round(v)
}

// send formats s with args and writes its commands in order. When the
// profile asks for it, the error queue is read afterwards; an entry
// fails the call.
func (l *link) send(ctx context.Context, s *scpi.Seq, args ...scpi.Arg) error {
	cmds, err := s.Format(args...)
	if err != nil {
		return fmt.Errorf("%s: %w", l.role, err)
	}
	for _, cmd := range cmds {
		if err := l.sess.Write(ctx, cmd); err != nil {
			return fmt.Errorf("%s: %s: %w", l.role, s.Key(), err)
		}
	}
	if l.checkErrors {
		return l.check(ctx, s.Key(), strings.Join(cmds, " then "))
	}
	return nil
}

// sendAll sends templates without placeholders in order.
func (l *link) sendAll(ctx context.Context, ts []*scpi.Template) error {
	for _, t := range ts {
		if err := l.send(ctx, seqOf(t)); err != nil {
			return err
		}
	}
	return nil
}

// afterSettings waits as the profile's dialect says after a setting:
// for the operation-complete query to answer 1, or a fixed delay.
func (l *link) afterSettings(ctx context.Context) error {
	switch l.dialect.WaitAfterSettings {
	case profile.WaitOPC:
		if err := l.sess.OperationComplete(ctx); err != nil {
			return fmt.Errorf("%s: waiting for the settings to complete (dialect.wait_after_settings = \"opc\"): %w", l.role, err)
		}
	case profile.WaitDelay:
		return sleep(ctx, l.dialect.DelayAfterSettings())
	}
	return nil
}

// query formats s, writes all its commands but the last and returns the
// answer to the last, a query.
func (l *link) query(ctx context.Context, s *scpi.Seq, args ...scpi.Arg) (string, string, error) {
	cmds, err := s.Format(args...)
	if err != nil {
		return "", "", fmt.Errorf("%s: %w", l.role, err)
	}
	for _, cmd := range cmds[:len(cmds)-1] {
		if err := l.sess.Write(ctx, cmd); err != nil {
			return "", "", fmt.Errorf("%s: %s: %w", l.role, s.Key(), err)
		}
	}
	last := cmds[len(cmds)-1]
	resp, err := l.sess.Query(ctx, last)
	if err != nil {
		return "", last, fmt.Errorf("%s: %s: %w", l.role, s.Key(), err)
	}
	return resp, last, nil
}

// queryFloat formats s and returns the number it answers.
func (l *link) queryFloat(ctx context.Context, s *scpi.Seq, args ...scpi.Arg) (float64, error) {
	resp, last, err := l.query(ctx, s, args...)
	if err != nil {
		return 0, err
	}
	v, err := l.sess.Opts().Response.ParseNumber(resp)
	if err != nil {
		return 0, fmt.Errorf("%s: %s: %s: %w", l.role, s.Key(), last, err)
	}
	return v, nil
}

func (l *link) queryFloats(ctx context.Context, s *scpi.Seq, args ...scpi.Arg) ([]float64, error) {
	resp, last, err := l.query(ctx, s, args...)
	if err != nil {
		return nil, err
	}
	v, err := l.sess.Opts().Response.ParseNumbers(resp)
	if err != nil {
		return nil, fmt.Errorf("%s: %s: %s: %w", l.role, s.Key(), last, err)
	}
	return v, nil
}

// check drains the error queue after cmd; any entry is an error wrapping
// driver.ErrInstrument that names the command.
func (l *link) check(ctx context.Context, key, cmd string) error {
	errs, err := l.sess.DrainErrors(ctx)
	if len(errs) > 0 {
		msgs := make([]string, len(errs))
		for i, e := range errs {
			msgs[i] = e.Error()
		}
		if err != nil {
			msgs = append(msgs, "reading the rest of the queue: "+err.Error())
		}
		return fmt.Errorf("%s: %s %q: %s: %w", l.role, key, cmd, strings.Join(msgs, "; "), driver.ErrInstrument)
	}
	if err != nil {
		return fmt.Errorf("%s: reading the error queue after %s %q: %w", l.role, key, cmd, err)
	}
	return nil
}

// Identify returns the instrument's *IDN? identity.
func (l *link) Identify(ctx context.Context) (driver.Identity, error) {
	id, err := l.sess.Identify(ctx)
	if err != nil {
		return driver.Identity{}, fmt.Errorf("%s: %w", l.role, err)
	}
	return id, nil
}

// Clear sends the profile's clear command (*CLS by default; nothing
// where dialect.clear is "") and, where the instrument has an error
// query and the profile checks errors, drains the error queue,
// returning what was in it.
func (l *link) Clear(ctx context.Context) ([]scpi.Error, error) {
	if c := l.dialect.ClearCommand(); c != "" {
		if err := l.sess.Write(ctx, c); err != nil {
			return nil, fmt.Errorf("%s: %s: %w", l.role, c, err)
		}
	}
	if !l.checkErrors || !l.sess.HasErrorQuery() {
		return nil, nil
	}
	errs, err := l.sess.DrainErrors(ctx)
	if err != nil {
		return errs, fmt.Errorf("%s: %w", l.role, err)
	}
	return errs, nil
}

// outOfRange is an argument refused before anything was sent.
func outOfRange(role, what string, v float64, allowed string) error {
	return fmt.Errorf("%s: %s %g: allowed %s: %w", role, what, v, allowed, driver.ErrOutOfRange)
}

// sleep waits d or until ctx is done.
func sleep(ctx context.Context, d time.Duration) error {
	if d <= 0 {
		return nil
	}
	t := time.NewTimer(d)
	defer t.Stop()
	select {
	case <-t.C:
		return nil
	case <-ctx.Done():
		return ctx.Err()
	}
}
