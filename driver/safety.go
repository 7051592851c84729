package driver

import "errors"

// Sentinel errors of the amplitude safeguards. Neither is transient: a
// run that meets one stops with the generator output off.
var (
	// ErrReadback is wrapped when an instrument reads a setting back
	// different from what was sent (a front-panel change, another
	// controller, a unit or load mismatch the instrument reports).
	ErrReadback = errors.New("driver: setting read back differs")
	// ErrOverLimit is wrapped when a measured amplitude at the DUT input
	// is above the bench's limit.
	ErrOverLimit = errors.New("driver: measured amplitude above the limit")
)
