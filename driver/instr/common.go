package instr

import (
	"context"
	"fmt"
	"strings"
	"time"

	"rolloff/driver"
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
// error queue, and the role's name for messages.
type link struct {
	role        string
	sess        *scpi.Session
	checkErrors bool
}

// send formats t with args and writes it. When the profile asks for it,
// the error queue is read afterwards; an entry fails the call.
func (l *link) send(ctx context.Context, t *scpi.Template, args ...scpi.Arg) error {
	cmd, err := t.Format(args...)
	if err != nil {
		return fmt.Errorf("%s: %w", l.role, err)
	}
	if err := l.sess.Write(ctx, cmd); err != nil {
		return fmt.Errorf("%s: %s: %w", l.role, t.Key(), err)
	}
	if l.checkErrors {
		return l.check(ctx, t.Key(), cmd)
	}
	return nil
}

// sendAll sends templates without placeholders in order.
func (l *link) sendAll(ctx context.Context, ts []*scpi.Template) error {
	for _, t := range ts {
		if err := l.send(ctx, t); err != nil {
			return err
		}
	}
	return nil
}

// query formats t and returns the number it answers.
func (l *link) queryFloat(ctx context.Context, t *scpi.Template, args ...scpi.Arg) (float64, error) {
	cmd, err := t.Format(args...)
	if err != nil {
		return 0, fmt.Errorf("%s: %w", l.role, err)
	}
	v, err := l.sess.QueryFloat(ctx, cmd)
	if err != nil {
		return 0, fmt.Errorf("%s: %s: %w", l.role, t.Key(), err)
	}
	return v, nil
}

func (l *link) queryFloats(ctx context.Context, t *scpi.Template, args ...scpi.Arg) ([]float64, error) {
	cmd, err := t.Format(args...)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", l.role, err)
	}
	v, err := l.sess.QueryFloats(ctx, cmd)
	if err != nil {
		return nil, fmt.Errorf("%s: %s: %w", l.role, t.Key(), err)
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

// Clear sends *CLS and drains the error queue, returning what was in it.
func (l *link) Clear(ctx context.Context) ([]scpi.Error, error) {
	if err := l.sess.Clear(ctx); err != nil {
		return nil, fmt.Errorf("%s: %w", l.role, err)
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
