//go:build !(linux || darwin || freebsd || netbsd || openbsd || dragonfly)

package atomicfile

import (
	"os"
	"time"
)

// lockable: without advisory locks a leftover file's writer cannot be
// known to be gone, so only files older than graceUnknown are removed.
const lockable = false

func hold(*os.File) {}

func removeIfOrphaned(p string, age time.Duration) {
	if age > graceUnknown {
		os.Remove(p)
	}
}
