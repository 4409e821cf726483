// Package atomicfile writes a file so that readers see either the old
// contents or the complete new ones, never a part: the data goes to a
// temporary file in the same directory, is synced to disk, and is renamed
// over the target; the directory is synced so the rename survives a crash.
//
// A writer killed before it could remove its temporary file (kill -9, a
// power cut) leaves it behind. The next Create for the same target
// removes such leftovers: files named as Create names them for that
// target ("." + the target's name + ".tmp-" + a number in base 36), that
// are regular files, that no live writer holds, and that were last
// written more than a minute ago. A writer holds its temporary file with
// an advisory lock (flock) from creation to the end, and the lock goes
// with the process, however it ends; so a file that can be locked has no
// writer. The minute covers the instant between a writer's creating the
// file and locking it. Where locks are not available (or the file
// system refuses them), only files older than a day are removed, since
// no save takes that long. Files of any other name are never touched.
package atomicfile

import (
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"time"
)

// Ages beyond which a leftover temporary file is removed: unlocked
// (its writer gone), or of unknown state where locks cannot tell.
const (
	graceUnlocked = time.Minute
	graceUnknown  = 24 * time.Hour
)

// tmpMark separates the target's name from the number in a temporary
// file's name.
const tmpMark = ".tmp-"

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
	removeStale(dir, base)
	for range 100 {
		tmp := filepath.Join(dir, "."+base+tmpMark+strconv.FormatUint(rand.Uint64(), 36))
		f, err := os.OpenFile(tmp, os.O_RDWR|os.O_CREATE|os.O_EXCL, 0o666)
		if os.IsExist(err) {
			continue
		}
		if err != nil {
			return nil, err
		}
		hold(f)
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

// ours reports whether name is a temporary file's name as Create gives it
// for the target base: "." + base + ".tmp-" + a uint64 in base 36 (1 to
// 13 digits and lower-case letters).
func ours(name, base string) bool {
	num, ok := strings.CutPrefix(name, "."+base+tmpMark)
	if !ok || num == "" {
		return false
	}
	v, err := strconv.ParseUint(num, 36, 64)
	return err == nil && strconv.FormatUint(v, 36) == num
}

// removeStale removes the temporary files for base in dir that their
// writers left behind (see the package documentation). It is best
// effort: a file it cannot examine or remove is left alone.
func removeStale(dir, base string) {
	entries, err := os.ReadDir(dir)
	if err != nil {
		return
	}
	now := time.Now()
	for _, e := range entries {
		if !e.Type().IsRegular() || !ours(e.Name(), base) {
			continue
		}
		info, err := e.Info()
		if err != nil {
			continue
		}
		age := now.Sub(info.ModTime())
		if age < graceUnlocked {
			continue
		}
		removeIfOrphaned(filepath.Join(dir, e.Name()), age)
	}
}
