// Package scpiserver is the instrument side of SCPI: it parses program
// messages as IEEE 488.2-1992 §7 and SCPI-1999 Vol 1 §6-7 describe them,
// dispatches each program message unit to a handler registered under a
// SCPI header pattern, and keeps the IEEE 488.2 status bytes and the
// SCPI error/event queue (SCPI-1999 §21.8).
//
// A Device knows nothing of transports: a server reads one program message
// (a line without its terminator), calls Execute and writes the response,
// if any, followed by "\n".
//
// # Header patterns
//
// Patterns use the notation of the SCPI-1999 command tables:
//
//	[SOURce[1]:]FREQuency[:CW]
//	[SENSe:]VOLTage[:DC]:NPLCycles?
//
// Upper-case letters are the short form, the whole word the long form;
// a received mnemonic must be exactly one of the two, in any case. A node
// in square brackets is optional. A trailing "[n]" on a mnemonic allows an
// optional numeric suffix 1..n (default 1). A trailing "?" registers the
// query form. Common commands are written as they are ("*IDN?").
//
// # Compound messages
//
// Units are separated by ";". A header that does not start with ":" is
// resolved relative to the path of the previous unit in the same message
// (the previous header less its last node), per IEEE 488.2 §A.1.1 and
// SCPI-1999 §6.2.4; a leading ":" returns to the root and common commands
// leave the path unchanged. Responses of several queries in one message
// are joined with ";" (IEEE 488.2 §8.4.1).
//
// # Parameters
//
// Decimal numeric data (NRf) may carry a suffix with an IEEE 488.2
// §7.7.3 multiplier (EX PE T G MA K M U N P F A; "MHZ" and "MOHM" mean
// mega, SCPI-1999 §7.3.3). Character data, strings, channel lists "(@1,3:5)"
// and the nondecimal forms #H, #Q, #B are recognised.
package scpiserver
