//go:build unix

package store

import (
	"errors"
	"fmt"
	"os"
	"syscall"
)

// tryLock opens path (creating it when it can) and takes an exclusive,
// non-blocking flock on it. It returns ErrLocked when another open file
// description holds it: another process, or another handle in this one.
// On a store that cannot be written, an existing lock file is opened
// read-only (flock needs no write access).
func tryLock(path string) (*os.File, error) {
	f, err := os.OpenFile(path, os.O_RDWR|os.O_CREATE, 0o644)
	if err != nil {
		var rerr error
		if f, rerr = os.Open(path); rerr != nil {
			return nil, fmt.Errorf("store: lock %s: %w", path, err)
		}
	}
	for {
		err = syscall.Flock(int(f.Fd()), syscall.LOCK_EX|syscall.LOCK_NB)
		if !errors.Is(err, syscall.EINTR) {
			break
		}
	}
	if err != nil {
		f.Close()
		if errors.Is(err, syscall.EWOULDBLOCK) {
			return nil, ErrLocked
		}
		return nil, fmt.Errorf("store: lock %s: %w", path, err)
	}
	return f, nil
}
