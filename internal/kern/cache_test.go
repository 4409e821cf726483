package kern

import (
	"os"
	"path/filepath"
	"testing"
)

// TestL2Bytes reads a cache description laid out as Linux's sysfs lays it
// out (Documentation/ABI/testing/sysfs-devices-system-cpu: index<N>/level,
// type, size), with the level-1 caches first, and sizes in each suffix.
func TestL2Bytes(t *testing.T) {
	dir := t.TempDir()
	write := func(i int, level, kind, size string) {
		d := filepath.Join(dir, "index"+string(rune('0'+i)))
		if err := os.MkdirAll(d, 0o755); err != nil {
			t.Fatal(err)
		}
		for name, v := range map[string]string{"level": level, "type": kind, "size": size} {
			if err := os.WriteFile(filepath.Join(d, name), []byte(v+"\n"), 0o644); err != nil {
				t.Fatal(err)
			}
		}
	}
	write(0, "1", "Data", "48K")
	write(1, "1", "Instruction", "32K")
	write(2, "2", "Unified", "2048K")
	write(3, "3", "Unified", "32768K")
	if got := l2Bytes(dir); got != 2<<20 {
		t.Errorf("l2Bytes: %d, want %d", got, 2<<20)
	}
	if got := l2Bytes(filepath.Join(dir, "missing")); got != 0 {
		t.Errorf("l2Bytes of a missing folder: %d, want 0", got)
	}
	for s, want := range map[string]int{"1M": 1 << 20, "512K": 512 << 10, "3G": 3 << 30, "4096": 4096, "": 0, "K": 0, "12Q": 0, "-1K": 0} {
		if got := parseCacheSize(s); got != want {
			t.Errorf("parseCacheSize(%q) = %d, want %d", s, got, want)
		}
	}
	if r := tileRows(); r != 192 && r != 384 {
		t.Errorf("tileRows() = %d, want 192 or 384", r)
	}
}
