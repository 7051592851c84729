//go:build !unix

package store

import "os"

// tryLock opens path. Without flock there is no owner detection here: the
// lock always succeeds, so another process's live run is not told apart
// from an abandoned one. Keep to one process per store on such systems.
func tryLock(path string) (*os.File, error) {
	return os.OpenFile(path, os.O_RDWR|os.O_CREATE, 0o644)
}
