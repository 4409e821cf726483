package atomicfile

import (
	"bufio"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
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

// TestStaleTemporaries: a save that was killed (kill -9, a power cut)
// leaves its temporary file behind; the next save to the same target
// removes those whose writer is gone and that are older than the grace
// period, and nothing else: not a save still in progress, not a fresh
// temporary, not a file of another name however close.
func TestStaleTemporaries(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "pumps.model")
	old := time.Now().Add(-2 * time.Hour)
	put := func(name string) string {
		t.Helper()
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte("left behind"), 0o644); err != nil {
			t.Fatal(err)
		}
		if err := os.Chtimes(p, old, old); err != nil {
			t.Fatal(err)
		}
		return name
	}
	// Ours: the names Create gives (a dot, the target's name, ".tmp-" and
	// a number in base 36), left by writers that are gone.
	stale := []string{put(".pumps.model.tmp-1x2y3z"), put(".pumps.model.tmp-0"), put(".pumps.model.tmp-3w5e11264sgsf")}
	// Not ours, or not for this target, or not stale.
	keep := []string{
		put("pumps.model.tmp-1x2y3z"),          // no leading dot
		put(".pumps.model.tmp-1X2Y3Z"),         // not base 36 as we write it
		put(".pumps.model.tmp-1x2y3z.bak"),     // something after
		put(".pumps.model.tmp-"),               // no number
		put(".pumps.model.tmp-3w5e11264sgsf0"), // longer than a uint64 in base 36
		put(".other.model.tmp-1x2y3z"),         // another target
		put(".pumps.modelx.tmp-1x2y3z"),        // another target
		put("notes.txt"),
	}
	if err := os.Mkdir(filepath.Join(dir, ".pumps.model.tmp-d1r"), 0o755); err != nil {
		t.Fatal(err)
	}
	keep = append(keep, ".pumps.model.tmp-d1r") // a directory, not a file we wrote
	// A fresh one, inside the grace period: it may belong to a writer
	// that has not locked it yet.
	fresh := ".pumps.model.tmp-f4e5h"
	if err := os.WriteFile(filepath.Join(dir, fresh), nil, 0o644); err != nil {
		t.Fatal(err)
	}
	keep = append(keep, fresh)
	// A save in progress, made to look old: its writer holds it.
	busy, err := Create(path)
	if err != nil {
		t.Fatal(err)
	}
	defer busy.Abort()
	if err := os.Chtimes(busy.Name(), old, old); err != nil {
		t.Fatal(err)
	}
	keep = append(keep, filepath.Base(busy.Name()))

	if err := WriteFile(path, []byte("new")); err != nil {
		t.Fatal(err)
	}
	left := map[string]bool{}
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range entries {
		left[e.Name()] = true
	}
	for _, name := range stale {
		if left[name] && lockable {
			t.Errorf("stale temporary %s was left", name)
		}
	}
	for _, name := range keep {
		if !left[name] {
			t.Errorf("%s was removed", name)
		}
	}
	if !left["pumps.model"] {
		t.Error("the target is missing")
	}
	if n := len(entries); lockable && n != len(keep)+1 {
		t.Errorf("%d entries left, want the %d kept and the target", n, len(keep))
	}
}

// TestKilledWriter kills a process with SIGKILL in the middle of a save,
// as the defect report did 88 times, and checks that the next save
// removes what it left. The leftover is dated back past the grace
// period, which only guards the instant between creating and locking.
func TestKilledWriter(t *testing.T) {
	if os.Getenv("ATOMICFILE_WRITER") != "" {
		// The writer: start a save and wait to be killed.
		f, err := Create(os.Getenv("ATOMICFILE_WRITER"))
		if err != nil {
			os.Exit(3)
		}
		f.Write([]byte("partial"))
		fmt.Println(f.Name())
		time.Sleep(time.Minute)
		os.Exit(4)
	}
	if !lockable {
		t.Skip("no advisory locks here: leftovers are removed after a day")
	}
	dir := t.TempDir()
	path := filepath.Join(dir, "run.checkpoint")
	cmd := exec.Command(os.Args[0], "-test.run=^TestKilledWriter$")
	cmd.Env = append(os.Environ(), "ATOMICFILE_WRITER="+path)
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	line, err := bufio.NewReader(out).ReadString('\n')
	if err != nil {
		cmd.Process.Kill()
		t.Fatalf("the writer said nothing: %v", err)
	}
	tmp := strings.TrimSpace(line)
	if err := cmd.Process.Signal(syscall.SIGKILL); err != nil {
		t.Fatal(err)
	}
	cmd.Wait()
	if _, err := os.Stat(tmp); err != nil {
		t.Fatalf("the killed writer left no temporary file: %v", err)
	}
	old := time.Now().Add(-2 * graceUnlocked)
	if err := os.Chtimes(tmp, old, old); err != nil {
		t.Fatal(err)
	}
	if err := WriteFile(path, []byte("whole")); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(tmp); !os.IsNotExist(err) {
		t.Errorf("the killed writer's %s is still there (%v)", filepath.Base(tmp), err)
	}
}
