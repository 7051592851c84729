package store

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
)

// tempPrefix starts the names of temporary files; names starting with a
// dot are never run files, so List and OpenFile ignore them.
const tempPrefix = ".tmp-"

// WriteFileAtomic replaces the file at path with data, as the store
// replaces its own files: a temporary file in the same directory, named
// with the store's temporary prefix, fsynced, renamed over path, then the
// directory fsynced. A reader sees the old content or the new, never a
// mix. A crash leaves at most a temporary file; in a run directory the
// next recovery removes it. Run.WriteFileAtomic is the checked form for a
// run's result files.
func WriteFileAtomic(path string, data []byte) error {
	return writeFileAtomic(filepath.Dir(path), filepath.Base(path), data)
}

// testHookTempWritten, when set, is called with the temporary file's path
// once its data is synced and before it is renamed: where a crash leaves
// a temporary file behind.
var testHookTempWritten func(tmp string)

// writeFileAtomic replaces dir/name with data: it writes a temporary file
// in dir, fsyncs it, renames it over name and fsyncs dir. A reader sees the
// old content or the new, never a mix; a crash leaves at most a temporary
// file, removed by the next recovery.
func writeFileAtomic(dir, name string, data []byte) (err error) {
	f, err := os.CreateTemp(dir, tempPrefix+name+"-*")
	if err != nil {
		return fmt.Errorf("store: write %s: %w", filepath.Join(dir, name), err)
	}
	tmp := f.Name()
	defer func() {
		if err != nil {
			f.Close()
			os.Remove(tmp)
		}
	}()
	if _, err = f.Write(data); err != nil {
		return fmt.Errorf("store: write %s: %w", filepath.Join(dir, name), err)
	}
	if err = f.Sync(); err != nil {
		return fmt.Errorf("store: fsync %s: %w", filepath.Join(dir, name), err)
	}
	if err = f.Chmod(0o644); err != nil {
		return fmt.Errorf("store: write %s: %w", filepath.Join(dir, name), err)
	}
	if err = f.Close(); err != nil {
		return fmt.Errorf("store: write %s: %w", filepath.Join(dir, name), err)
	}
	if testHookTempWritten != nil {
		testHookTempWritten(tmp)
	}
	if err = os.Rename(tmp, filepath.Join(dir, name)); err != nil {
		return fmt.Errorf("store: replace %s: %w", filepath.Join(dir, name), err)
	}
	return syncDir(dir)
}

// syncDir fsyncs a directory so that a rename or a new file in it is on
// disk.
func syncDir(dir string) error {
	d, err := os.Open(dir)
	if err != nil {
		return fmt.Errorf("store: fsync %s: %w", dir, err)
	}
	defer d.Close()
	if err := d.Sync(); err != nil {
		return fmt.Errorf("store: fsync %s: %w", dir, err)
	}
	return nil
}

// removeTemps deletes temporary files a crash left in dir and returns how
// many it removed.
func removeTemps(dir string) int {
	ents, err := os.ReadDir(dir)
	if err != nil {
		return 0
	}
	n := 0
	for _, e := range ents {
		if strings.HasPrefix(e.Name(), tempPrefix) && e.Type().IsRegular() {
			if os.Remove(filepath.Join(dir, e.Name())) == nil {
				n++
			}
		}
	}
	return n
}
