//go:build !linux

package transport

import (
	"context"
	"errors"
	"fmt"
)

func openUSBTMC(_ context.Context, a Address, _ Opts) (Conn, error) {
	return nil, fmt.Errorf("transport: %s: open: %w", a, errors.New("usbtmc addresses need the Linux usbtmc driver"))
}
