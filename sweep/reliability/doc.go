// Package reliability is rolloff's fault, crash and bad-input suite: it
// proves that an unattended sweep survives. Its tests inject faults into
// the simulated bench (dropped and delayed links, corrupt and truncated
// answers, instrument errors, a vanishing serial device, overloads, a full
// disk), kill the real rolloff binary in the middle of a sweep and restart
// it, and feed it bad plans, profiles and API requests. In every case the
// engineer must come back to either a complete run or a clearly
// interrupted one with every measured point intact, and to a generator
// whose output is off.
//
// The package has no API of its own; `make reliability` runs it and
// prints one summary line of what the tests observed.
package reliability
