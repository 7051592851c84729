//go:build unix

package transport

import (
	"errors"
	"io"
	"net"
	"syscall"
)

var (
	errWouldBlock = errors.New("transport: nothing to read")
	errNoPoll     = errors.New("transport: cannot poll this connection")
)

// readNow reads what has already arrived on nc without waiting: it returns
// errWouldBlock when nothing has, io.EOF when the peer has closed.
func readNow(nc net.Conn, p []byte) (int, error) {
	sc, ok := nc.(syscall.Conn)
	if !ok {
		return 0, errNoPoll
	}
	rc, err := sc.SyscallConn()
	if err != nil {
		return 0, err
	}
	var n int
	var rerr error
	err = rc.Read(func(fd uintptr) bool {
		for {
			n, rerr = syscall.Read(int(fd), p)
			if rerr != syscall.EINTR {
				return true
			}
		}
	})
	if err != nil {
		return 0, err
	}
	switch {
	case rerr == syscall.EAGAIN || rerr == syscall.EWOULDBLOCK:
		return 0, errWouldBlock
	case rerr != nil:
		return 0, rerr
	case n == 0 && len(p) > 0:
		return 0, io.EOF
	}
	return n, nil
}
