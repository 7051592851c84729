// Package scpi speaks SCPI (IEEE 488.2 common commands, SCPI-1999 syntax)
// over a transport.Conn: a Session sends commands and queries, parses
// numeric responses with the SCPI special values, the *IDN? identity and
// the SYSTem:ERRor? queue; Templates build profile commands from validated
// arguments so that no unvalidated string ever reaches an instrument.
package scpi
