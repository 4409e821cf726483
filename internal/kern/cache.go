package kern

import (
	"os"
	"strconv"
	"strings"
	"sync/atomic"
)

// tileRows bounds a tile's rows, so that the tile's packed block of op(A)
// (rows × kcBlock elements) fits in half the second-level cache: 192 rows
// (384 KiB in float64) for a cache of 1 MiB, 384 rows where it holds 2 MiB
// or more. Fewer row tiles pack op(B) fewer times: on a 2 MiB cache 384
// rows ran 1024³ float64 products 8–11% faster than 192 on one core and
// did not slow the training step (bench, interleaved builds; see the
// README). The size is read once, on first use, from Linux's sysfs;
// elsewhere, or when it cannot be read, 192. (A plain atomic, not a
// sync.OnceValue: that allocates when the package initializes, and the
// Fashion-MNIST epoch turned out to run up to 20% slower or faster with
// the heap laid out differently — see DEVELOPERS.md.)
func tileRows() int {
	if r := tileRowsMemo.Load(); r != 0 {
		return int(r)
	}
	r := 192
	if l2Bytes("/sys/devices/system/cpu/cpu0/cache") >= 2<<20 {
		r = 384
	}
	tileRowsMemo.Store(int32(r))
	return r
}

var tileRowsMemo atomic.Int32

// l2Bytes returns the size of the second-level data or unified cache
// that Linux describes under dir (index0, index1, … with files level,
// type and size such as "2048K"), or 0.
func l2Bytes(dir string) int {
	for i := 0; i < 8; i++ {
		d := dir + "/index" + strconv.Itoa(i) + "/"
		level, err1 := os.ReadFile(d + "level")
		kind, err2 := os.ReadFile(d + "type")
		size, err3 := os.ReadFile(d + "size")
		if err1 != nil || err2 != nil || err3 != nil {
			continue
		}
		if strings.TrimSpace(string(level)) != "2" || strings.TrimSpace(string(kind)) == "Instruction" {
			continue
		}
		return parseCacheSize(strings.TrimSpace(string(size)))
	}
	return 0
}

// parseCacheSize reads sysfs's cache sizes: a number of bytes with an
// optional K, M or G suffix (powers of 1024). It returns 0 for anything
// else.
func parseCacheSize(s string) int {
	mult := 1
	switch {
	case strings.HasSuffix(s, "K"):
		mult, s = 1<<10, s[:len(s)-1]
	case strings.HasSuffix(s, "M"):
		mult, s = 1<<20, s[:len(s)-1]
	case strings.HasSuffix(s, "G"):
		mult, s = 1<<30, s[:len(s)-1]
	}
	n, err := strconv.Atoi(s)
	if err != nil || n < 0 {
		return 0
	}
	return n * mult
}
