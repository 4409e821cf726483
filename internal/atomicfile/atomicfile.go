// Package atomicfile writes a file so that readers see either the old
// contents or the complete new ones, never a part: the data goes to a
// temporary file in the same directory, is synced to disk, and is renamed
// over the target; the directory is synced so the rename survives a crash.
package atomicfile

import (
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
)

// File is a file being written; Commit makes it the target, Abort (or a
// failed Commit) removes it.
type File struct {
	*os.File
	target string
	done   bool
}

// Create starts writing path. The new file gets mode 0666 less the umask,
// as os.Create would give it.
func Create(path string) (*File, error) {
	dir, base := filepath.Split(path)
	if dir == "" {
		dir = "."
	}
	for range 100 {
		tmp := filepath.Join(dir, "."+base+".tmp-"+strconv.FormatUint(rand.Uint64(), 36))
		f, err := os.OpenFile(tmp, os.O_RDWR|os.O_CREATE|os.O_EXCL, 0o666)
		if os.IsExist(err) {
			continue
		}
		if err != nil {
			return nil, err
		}
		return &File{File: f, target: path}, nil
	}
	return nil, fmt.Errorf("atomicfile: no free temporary name beside %s", path)
}

// Commit syncs and closes the file and renames it over the target.
func (f *File) Commit() error {
	if f.done {
		return fmt.Errorf("atomicfile: %s already committed or aborted", f.target)
	}
	f.done = true
	err := f.Sync()
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Rename(f.Name(), f.target)
	}
	if err != nil {
		os.Remove(f.Name())
		return err
	}
	if d, err := os.Open(filepath.Dir(f.target)); err == nil {
		d.Sync()
		d.Close()
	}
	return nil
}

// Abort discards the file; after Commit it does nothing, so it can be
// deferred.
func (f *File) Abort() {
	if f.done {
		return
	}
	f.done = true
	f.Close()
	os.Remove(f.Name())
}

// WriteFile writes b to path atomically.
func WriteFile(path string, b []byte) error {
	f, err := Create(path)
	if err != nil {
		return err
	}
	defer f.Abort()
	if _, err := f.Write(b); err != nil {
		return err
	}
	return f.Commit()
}
