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
