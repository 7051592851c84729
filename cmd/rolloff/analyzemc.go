package main

import (
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"

	"rolloff/sweep/analysis"
)

// runSpec returns the specification the finish step recorded in a run
// directory's result.json (the budget then splits the converter's figure
// into its components as during the run), nil for a CSV file or a run
// without one.
func runSpec(input string) *analysis.Spec {
	data, err := os.ReadFile(filepath.Join(input, "result.json"))
	if err != nil {
		return nil
	}
	var v struct {
		Spec *analysis.Spec `json:"spec"`
	}
	if json.Unmarshal(data, &v) != nil {
		return nil
	}
	return v.Spec
}

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
