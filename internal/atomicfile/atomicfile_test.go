package atomicfile

import (
	"os"
	"path/filepath"
	"syscall"
	"testing"
)

func TestWriteAndAbort(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "out")
	if err := WriteFile(path, []byte("one")); err != nil {
		t.Fatal(err)
	}
	f, err := Create(path)
	if err != nil {
		t.Fatal(err)
	}
	f.Write([]byte("partial"))
	f.Abort()
	if b, _ := os.ReadFile(path); string(b) != "one" {
		t.Errorf("after an aborted write the file holds %q, want the old contents", b)
	}
	if entries, _ := os.ReadDir(dir); len(entries) != 1 {
		t.Errorf("%d entries left, want 1", len(entries))
	}
	// Mode follows the umask, as os.Create's does.
	old := syscall.Umask(0o027)
	defer syscall.Umask(old)
	if err := WriteFile(path, []byte("two")); err != nil {
		t.Fatal(err)
	}
	if fi, _ := os.Stat(path); fi.Mode().Perm() != 0o640 {
		t.Errorf("mode %v with umask 027, want 0640", fi.Mode().Perm())
	}
	if err := WriteFile(filepath.Join(dir, "missing", "x"), nil); err == nil {
		t.Error("writing into a missing directory succeeded")
	}
}
