// Package driver defines the instrument roles a sweep depends on: a
// signal generator, a DC voltmeter, an AC voltmeter and an analog true-RMS
// converter. It is the users' side of the bench; the transports
// (driver/transport), the SCPI session (driver/scpi), the profile-driven
// instrument dialects and the simulated bench implement it underneath.
//
// The required interfaces are deliberately tiny. Optional capabilities
// (reading a burst, switching a converter range remotely, reporting an
// identity, an accuracy specification) are discovered by type assertion.
//
// Errors that a sweep must act on are sentinels in this package, wrapped
// with %w by the layers below and checked with errors.Is.
package driver
