// Package transport carries SCPI messages to instruments over a LAN raw
// socket, a serial port or a Linux USBTMC device, chosen by an address
// string such as tcp://host:5025, serial:///dev/ttyUSB0?baud=115200 or
// usbtmc:///dev/usbtmc0.
package transport

import (
	"context"
	"time"
)

// Conn is the transport contract: one message out, one response in, each
// bounded by the context. Framing (terminators) is the Conn's job.
//
// Write sends msg followed by the write terminator. Read returns one
// response without its read terminator. Both return errors wrapping
// driver.ErrTimeout, driver.ErrDisconnected or driver.ErrClosed.
type Conn interface {
	Write(ctx context.Context, msg []byte) error
	Read(ctx context.Context) ([]byte, error)
	Close() error
}

// Opts are the per-instrument framing and timing settings.
type Opts struct {
	WriteTerm string        // appended to every message; default "\n" (IEEE 488.2 §7.5)
	ReadTerm  string        // ends every response; default "\n"
	Timeout   time.Duration // used when the context has no deadline; default 2 s
	MaxRead   int           // longest response accepted, bytes; default 1 MiB
}
