//go:build unix

package store

import "syscall"

// openReadFlags open a run file for reading without blocking: a FIFO or
// device put into a run directory must not hang the reader.
const openReadFlags = syscall.O_NONBLOCK
