package sched

import (
	"context"
	"fmt"
	"time"

	"rolloff/driver"
)

// The retry policy for an instrument operation failing with a transient
// error (driver.Transient: a dropped link, a time-out, a garbled answer),
// mid-sweep and while a bench is opened alike.
const (
	DefaultRetries      = 3                      // tries in all
	DefaultRetryBackoff = 100 * time.Millisecond // wall time before the second try, doubling after
)

// Retry runs f until it succeeds, fails with an error that is not
// transient, ctx ends, or n tries (DefaultRetries when n ≤ 0) have
// failed; it sleeps backoff (DefaultRetryBackoff when ≤ 0), doubling,
// between tries, with sleep (WallClock's when nil), and tells onRetry
// (may be nil) of each retry. Operations passed here must be idempotent.
func Retry(ctx context.Context, what string, n int, backoff time.Duration,
	sleep func(context.Context, time.Duration) error, onRetry func(try, of int, err error),
	f func(ctx context.Context) error) error {
	if n <= 0 {
		n = DefaultRetries
	}
	if backoff <= 0 {
		backoff = DefaultRetryBackoff
	}
	if sleep == nil {
		sleep = WallClock.Sleep
	}
	for i := 1; ; i++ {
		err := f(ctx)
		if err == nil || !driver.Transient(err) || ctx.Err() != nil {
			return err
		}
		if i >= n {
			return fmt.Errorf("%s: gave up after %d tries: %w", what, i, err)
		}
		if onRetry != nil {
			onRetry(i, n-1, err)
		}
		if serr := sleep(ctx, backoff); serr != nil {
			return serr
		}
		backoff *= 2
	}
}
