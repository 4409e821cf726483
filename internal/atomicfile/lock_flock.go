//go:build linux || darwin || freebsd || netbsd || openbsd || dragonfly

package atomicfile

import (
	"errors"
	"os"
	"syscall"
	"time"
)

// lockable: this system has advisory locks, so a leftover file's writer
// is known to be gone.
const lockable = true

// hold locks a new temporary file for as long as f is open, which is no
// longer than its process lives.
func hold(f *os.File) {
	syscall.Flock(int(f.Fd()), syscall.LOCK_EX|syscall.LOCK_NB)
}

// removeIfOrphaned removes the temporary file p, last written age ago,
// if no writer holds it.
func removeIfOrphaned(p string, age time.Duration) {
	f, err := os.Open(p)
	if err != nil {
		return
	}
	defer f.Close()
	switch err := syscall.Flock(int(f.Fd()), syscall.LOCK_EX|syscall.LOCK_NB); {
	case err == nil:
		os.Remove(p)
	case errors.Is(err, syscall.EWOULDBLOCK): // a writer holds it
	case age > graceUnknown: // the file system has no locks to tell
		os.Remove(p)
	}
}
