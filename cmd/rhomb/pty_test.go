//go:build linux

package main

import (
	"bytes"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"
	"unicode/utf8"

	"golang.org/x/sys/unix"
)

// openPTY opens a pseudo-terminal pair through /dev/ptmx (unlockpt and
// ptsname by ioctl, as the Linux pts(4) manual page describes; from
// memory) and sets its window to cols × 24.
func openPTY(t *testing.T, cols uint16) (master, slave *os.File) {
	t.Helper()
	m, err := os.OpenFile("/dev/ptmx", os.O_RDWR|unix.O_NOCTTY, 0)
	if err != nil {
		t.Skipf("no pseudo-terminals here: %v", err)
	}
	fd := int(m.Fd())
	if err := unix.IoctlSetPointerInt(fd, unix.TIOCSPTLCK, 0); err != nil {
		t.Skipf("unlockpt: %v", err)
	}
	n, err := unix.IoctlGetInt(fd, unix.TIOCGPTN)
	if err != nil {
		t.Skipf("ptsname: %v", err)
	}
	s, err := os.OpenFile(fmt.Sprintf("/dev/pts/%d", n), os.O_RDWR|unix.O_NOCTTY, 0)
	if err != nil {
		t.Skipf("open the pseudo-terminal's slave: %v", err)
	}
	if err := unix.IoctlSetWinsize(int(s.Fd()), unix.TIOCSWINSZ, &unix.Winsize{Col: cols, Row: 24}); err != nil {
		t.Fatal(err)
	}
	return m, s
}

// TestProgressOnATerminal runs rhomb train with its stderr on a real
// pseudo-terminal of 80 and of 120 columns and reads what the terminal
// receives: the progress line is redrawn in place (carriage returns),
// every frame fits the window without wrapping (fewer columns than the
// width, so the cursor never reaches the last column), and the summary
// starts on a line of its own, not glued to the last frame.
func TestProgressOnATerminal(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the command")
	}
	dir := t.TempDir()
	bin := filepath.Join(dir, "rhomb")
	if out, err := exec.Command("go", "build", "-o", bin, ".").CombinedOutput(); err != nil {
		t.Fatalf("go build: %v\n%s", err, out)
	}
	csvPath := sensorCSV(t, dir, 3000)
	for _, cols := range []uint16{80, 120} {
		t.Run(fmt.Sprintf("cols=%d", cols), func(t *testing.T) {
			m, s := openPTY(t, cols)
			defer m.Close()
			cmd := exec.Command(bin, "train", "-data", csvPath, "-label", "state", "-hidden", "32,32", "-epochs", "6", "-o", filepath.Join(dir, "p.model"))
			var stdout bytes.Buffer
			cmd.Stdout, cmd.Stderr = &stdout, s
			if err := cmd.Start(); err != nil {
				t.Fatal(err)
			}
			s.Close()
			var screen bytes.Buffer
			done := make(chan struct{})
			go func() { io.Copy(&screen, m); close(done) }() // ends with EIO when the slave closes
			if err := cmd.Wait(); err != nil {
				t.Fatalf("train: %v\n%s", err, screen.String())
			}
			select {
			case <-done:
			case <-time.After(5 * time.Second):
			}
			text := screen.String()
			if !strings.Contains(text, "\r") {
				t.Fatalf("no frame redrawn in place on a terminal:\n%q", text)
			}
			// Every frame: the text after a carriage return, up to the
			// next one or the line's end, with terminal controls (ESC [ …
			// letter) removed. (Notes are whole lines printed above the
			// frame; a long one wraps like any text, once.)
			frames := 0
			for _, line := range strings.Split(strings.ReplaceAll(text, "\r\n", "\n"), "\n") {
				for _, f := range strings.Split(line, "\r")[1:] {
					f = stripControls(f)
					if f == "" {
						continue
					}
					frames++
					if n := utf8.RuneCountInString(f); n >= int(cols) {
						t.Errorf("a frame of %d columns on a %d-column terminal wraps:\n%q", n, cols, f)
					}
				}
			}
			if frames < 2 {
				t.Fatalf("%d frames drawn:\n%q", frames, text)
			}
			if !strings.HasPrefix(stdout.String(), "trained ") && !strings.Contains(stdout.String(), "\ntrained ") {
				t.Errorf("the summary does not start a line of its own:\n%s", stdout.String())
			}
		})
	}
}

// stripControls removes ANSI control sequences (ESC [ parameters letter).
func stripControls(s string) string {
	var b strings.Builder
	for i := 0; i < len(s); i++ {
		if s[i] == 0x1b && i+1 < len(s) && s[i+1] == '[' {
			j := i + 2
			for j < len(s) && (s[j] < '@' || s[j] > '~') {
				j++
			}
			i = j
			continue
		}
		b.WriteByte(s[i])
	}
	return b.String()
}
