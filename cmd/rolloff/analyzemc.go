package main

import (
	"errors"
	"fmt"

	"rolloff/sweep/analysis"
)

// monteCarloSeed seeds the Monte Carlo draws, so that a report can be
// reproduced.
const monteCarloSeed = 1

// monteCarlo runs n Monte Carlo trials on each analysed response of the
// batch (none when n is 0).
func monteCarlo(b *analysis.Batch, n int) error {
	if n == 0 {
		return nil
	}
	for _, e := range b.Entries {
		if e.Result == nil {
			continue
		}
		mc, err := e.Result.RunMonteCarlo(n, monteCarloSeed)
		if errors.Is(err, analysis.ErrNoBudget) {
			continue
		}
		if err != nil {
			return fmt.Errorf("%s: --monte-carlo: %w", e.Name, err)
		}
		e.Result.MonteCarlo = mc
	}
	return nil
}
