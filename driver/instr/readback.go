package instr

import (
	"context"
	"fmt"
	"math"

	"rolloff/driver"
)

// ReadbackError is a generator setting read back different from what was
// sent. The output was switched off before it was returned. It wraps
// driver.ErrReadback.
type ReadbackError struct {
	Key       string  // profile key of the query, e.g. "commands.query_amplitude"
	Quantity  string  // "frequency (Hz)" or "amplitude (<unit>)"
	Sent, Got float64 // in the quantity's unit
	TolRel    float64
	OffErr    error // the output-off command's error, if it failed
}

// Error names the query, both values and the tolerance.
func (e *ReadbackError) Error() string {
	s := fmt.Sprintf("generator: %s: %s read back %g, sent %g (tolerance %g relative): output switched off", e.Key, e.Quantity, e.Got, e.Sent, e.TolRel)
	if e.OffErr != nil {
		s += "; switching it off failed: " + e.OffErr.Error()
	}
	return s
}

// Unwrap returns driver.ErrReadback.
func (e *ReadbackError) Unwrap() error { return driver.ErrReadback }

// readBack queries the frequency and/or amplitude where the profile has
// a query for them and compares with what was sent (amplitude in the
// instrument's unit, compared as Vrms). On a difference beyond the
// profile's tolerance it switches the output off and returns a
// *ReadbackError. g.mu must be held.
func (g *Generator) readBack(ctx context.Context, freq, amp bool, freqHz, amplitude float64) error {
	tol := g.p.ReadbackTol()
	t := &g.p.T
	if freq && t.QueryFreq != nil {
		got, err := g.queryFloat(ctx, t.QueryFreq)
		if err != nil {
			return err
		}
		if !(math.Abs(got-freqHz) <= tol*math.Abs(freqHz)) {
			return g.mismatch(ctx, t.QueryFreq.Key(), "frequency (Hz)", freqHz, got, tol)
		}
	}
	if amp && t.QueryAmpl != nil {
		got, err := g.queryFloat(ctx, t.QueryAmpl)
		if err != nil {
			return err
		}
		o := &g.p.Output
		want, have := o.FromUnit(amplitude), o.FromUnit(got)
		if !(math.Abs(have-want) <= tol*math.Abs(want)) {
			return g.mismatch(ctx, t.QueryAmpl.Key(), "amplitude ("+o.Unit+")", amplitude, got, tol)
		}
	}
	return nil
}

func (g *Generator) mismatch(ctx context.Context, key, what string, sent, got, tol float64) error {
	e := &ReadbackError{Key: key, Quantity: what, Sent: sent, Got: got, TolRel: tol}
	if err := g.sendGen(ctx, g.p.T.OutputOff); err != nil {
		e.OffErr = err
	}
	return e
}
