//go:build !unix

package transport

import (
	"errors"
	"net"
)

var (
	errWouldBlock = errors.New("transport: nothing to read")
	errNoPoll     = errors.New("transport: cannot poll this connection")
)

// readNow cannot look at a socket without waiting on this system; idle
// drops are then noticed by the next Read.
func readNow(nc net.Conn, p []byte) (int, error) { return 0, errNoPoll }
