// Package instr implements the driver roles — generator, DC and AC
// voltmeter, analog converter, switch — from instrument profiles: each
// role formats its profile's compiled command templates with validated
// arguments and speaks them over a scpi.Session.
//
// Setters check every argument against the profile's (and the bench's)
// limits and refuse a bad one with driver.ErrOutOfRange before anything
// is sent. Where a profile asks for it, the instrument's error queue is
// read after configuring and an entry fails the call, naming the command.
package instr
