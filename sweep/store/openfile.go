package store

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
)

// ErrNotRegular is a run file that is not a regular file (a FIFO, a
// device, a directory, a symbolic link): never opened for reading. It
// wraps ErrNotFound, as nothing the store wrote is there.
var ErrNotRegular = fmt.Errorf("not a regular file: %w", ErrNotFound)

// openRegular opens dir/name for reading when it is a regular file: the
// name is looked at without following a link (Lstat), then opened
// without blocking inside dir (a FIFO's open would wait for a writer)
// and checked again on the open file, so that a swap in between is
// caught. Errors name the run and the file, never the directory.
func openRegular(dir, id, name string) (*os.File, error) {
	root, err := os.OpenRoot(dir)
	if err != nil {
		return nil, fmt.Errorf("store: run %s: %w", id, ErrNotFound)
	}
	defer root.Close()
	st, err := root.Lstat(name)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return nil, fmt.Errorf("store: run %s: %s: %w", id, name, ErrNotFound)
		}
		return nil, fmt.Errorf("store: run %s: %s: cannot be read", id, name)
	}
	if !st.Mode().IsRegular() {
		return nil, fmt.Errorf("store: run %s: %s: %w", id, name, ErrNotRegular)
	}
	f, err := root.OpenFile(name, os.O_RDONLY|openReadFlags, 0)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return nil, fmt.Errorf("store: run %s: %s: %w", id, name, ErrNotFound)
		}
		return nil, fmt.Errorf("store: run %s: %s: cannot be read", id, name)
	}
	if st, err := f.Stat(); err != nil || !st.Mode().IsRegular() {
		f.Close()
		return nil, fmt.Errorf("store: run %s: %s: %w", id, name, ErrNotRegular)
	}
	return f, nil
}

// readRegular reads the file at path like os.ReadFile, but refuses what
// is not a regular file (a FIFO would block the read; a link could lead
// out of the run) without opening it blockingly. A missing file is an
// error satisfying errors.Is(err, fs.ErrNotExist).
func readRegular(path string) ([]byte, error) {
	st, err := os.Lstat(path)
	if err != nil {
		return nil, err
	}
	if !st.Mode().IsRegular() {
		return nil, fmt.Errorf("%s: %w", filepath.Base(path), ErrNotRegular)
	}
	f, err := os.OpenFile(path, os.O_RDONLY|openReadFlags, 0)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	if st, err := f.Stat(); err != nil || !st.Mode().IsRegular() {
		return nil, fmt.Errorf("%s: %w", filepath.Base(path), ErrNotRegular)
	}
	return io.ReadAll(f)
}
