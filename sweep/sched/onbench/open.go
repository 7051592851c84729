package onbench

import (
	"context"
	"time"

	"github.com/rs/zerolog"

	"rolloff/driver/bench"
	"rolloff/driver/profile"
	"rolloff/sweep/sched"
)

// Open opens the bench of cfg as bench.Open does, retrying a transient
// failure (a link dropped, timed out or garbled while the instruments are
// greeted and set up) with the scheduler's retry policy for instrument
// operations mid-sweep (sched.Retry). bench.Open closes what it opened
// before it fails, so every try starts from nothing, with the generator's
// output switched off first.
func Open(ctx context.Context, cfg *profile.BenchFile, log zerolog.Logger) (*bench.Bench, error) {
	return OpenWith(ctx, cfg, log, 0, 0)
}

// OpenWith is Open with the number of tries and the first backoff of the
// policy (0: sched.DefaultRetries, sched.DefaultRetryBackoff).
func OpenWith(ctx context.Context, cfg *profile.BenchFile, log zerolog.Logger, tries int, backoff time.Duration) (*bench.Bench, error) {
	var b *bench.Bench
	err := sched.Retry(ctx, "opening the bench", tries, backoff, nil, func(i, of int, err error) {
		log.Warn().Err(err).Int("retry", i).Int("of", of).Msg("opening the bench failed; retrying")
	}, func(ctx context.Context) error {
		var err error
		b, err = bench.Open(ctx, cfg, log)
		return err
	})
	if err != nil {
		return nil, err
	}
	return b, nil
}
