// Command rhomb trains, checks and runs small classifiers on tabular and
// image-like data, and writes model files that a Go service or an edge
// binary can serve.
//
//	rhomb demo                                   train on the embedded demo data
//	rhomb train -data readings.csv -label condition -o pumps.model
//	rhomb check -model pumps.model -data holdout.csv
//	rhomb classify -model pumps.model -data new.csv -o labelled.csv
//	rhomb describe -model pumps.model
//	rhomb export -model pumps.model -onnx pumps.onnx
//	rhomb version
//
// Run `rhomb help COMMAND` for a command's flags and an example.
//
// Exit status: 0 success; 1 the work failed (training diverged, a write
// failed); 2 the command line is wrong; 3 an input data file is bad; 4 a
// model file is bad; 130 interrupted (a checkpoint was saved when one was
// asked for).
//
// A classifier is no safety guarantee. Where its output drives alarms,
// interlocks, credit or anything else that can hurt someone, validate it on
// your own data and follow the applicable codes and licensed practice.
package main

import (
	"errors"
	"fmt"
	"io"
	"os"
	"runtime"
	"runtime/debug"
	"strings"

	"golang.org/x/term"

	"github.com/rhomb/rhomb/internal/version"
)

// Exit codes; see the package documentation.
const (
	exitOK          = 0
	exitFailed      = 1
	exitUsage       = 2
	exitBadData     = 3
	exitBadModel    = 4
	exitInterrupted = 130
)

// command is one subcommand.
type command struct {
	name    string
	summary string
	run     func(env *env, args []string) error
}

// env is what a command reads and writes; tests replace it.
type env struct {
	stdout, stderr io.Writer
	stdin          io.Reader
	// terminal reports whether stderr is a terminal (progress bars);
	// width, when set, gives its width in columns (nil: 80).
	terminal bool
	width    func() int
}

func commands() []command {
	return []command{
		{"train", "train a classifier on a CSV or IDX file and save it", runTrain},
		{"check", "measure a saved model on labelled data", runCheck},
		{"classify", "label new rows with a saved model, CSV in, CSV out", runClassify},
		{"describe", "show what a model file holds", runDescribe},
		{"export", "write a saved model as an ONNX file", runExport},
		{"demo", "train on the embedded demo data (no files needed)", runDemo},
		{"sweep", "train a grid of ρ0, λ, learning rate, temperature and seed; rank the runs", runSweep},
		{"sweep-merge", "combine the results of a sweep's shards into one ranking", runSweepMerge},
		{"version", "print the library version and the build's source revision", runVersion},
	}
}

func main() {
	e := &env{stdout: os.Stdout, stderr: os.Stderr, stdin: os.Stdin, terminal: isTerminal(os.Stderr), width: stderrWidth}
	os.Exit(dispatch(e, os.Args[1:]))
}

// stderrWidth is the width of the terminal on stderr, asked anew each time
// so that a resized window is followed; 80 when it cannot be told.
func stderrWidth() int {
	if w, _, err := term.GetSize(int(os.Stderr.Fd())); err == nil && w > 0 {
		return w
	}
	return 80
}

const versionSummary = `Print the version of the rhomb library this binary holds (the version
model files record as their writer), then, when the build recorded them,
the version-control revision it was built from, the time of that
revision, whether the checkout had changes not committed, and the Go
release and platform.`

const versionExample = `  rhomb version
  rhomb version -short        # the library version only, for scripts`

func runVersion(e *env, args []string) error {
	fs := newFlags(e, "version", versionSummary, versionExample)
	short := fs.Bool("short", false, "print the library version only")
	if err := parse(fs, args); err != nil {
		return err
	}
	if *short {
		fmt.Fprintln(e.stdout, version.Version)
		return nil
	}
	fmt.Fprint(e.stdout, versionText(debug.ReadBuildInfo()))
	return nil
}

// versionText describes the build from what runtime/debug knows of it.
func versionText(bi *debug.BuildInfo, ok bool) string {
	var b strings.Builder
	fmt.Fprintf(&b, "rhomb %s\n", version.Version)
	if !ok {
		b.WriteString("build: not recorded in this binary\n")
		return b.String()
	}
	set := map[string]string{}
	for _, s := range bi.Settings {
		set[s.Key] = s.Value
	}
	if rev := set["vcs.revision"]; rev != "" {
		fmt.Fprintf(&b, "revision: %s", rev)
		if t := set["vcs.time"]; t != "" {
			fmt.Fprintf(&b, " of %s", t)
		}
		if set["vcs.modified"] == "true" {
			b.WriteString(", with changes not committed")
		}
		b.WriteString("\n")
	} else {
		b.WriteString("revision: not recorded (built outside a version-control checkout, or with -buildvcs=false)\n")
	}
	if v := bi.Main.Version; v != "" && v != "(devel)" {
		fmt.Fprintf(&b, "module: %s %s\n", bi.Main.Path, v)
	}
	goos, goarch := set["GOOS"], set["GOARCH"]
	if goos == "" {
		goos, goarch = runtime.GOOS, runtime.GOARCH
	}
	fmt.Fprintf(&b, "go: %s %s/%s\n", bi.GoVersion, goos, goarch)
	return b.String()
}

func dispatch(e *env, args []string) int {
	if len(args) == 0 || args[0] == "-h" || args[0] == "-help" || args[0] == "--help" {
		usage(e.stderr)
		if len(args) == 0 {
			return exitUsage
		}
		return exitOK
	}
	name, rest := args[0], args[1:]
	if name == "help" {
		if len(rest) == 0 {
			usage(e.stdout)
			return exitOK
		}
		name, rest = rest[0], []string{"-h"}
	}
	for _, c := range commands() {
		if c.name == name {
			return exitCode(e, c.run(e, rest))
		}
	}
	fmt.Fprintf(e.stderr, "rhomb: unknown command %q\n\n", name)
	usage(e.stderr)
	return exitUsage
}

func usage(w io.Writer) {
	fmt.Fprintln(w, "usage: rhomb COMMAND [flags]")
	fmt.Fprintln(w)
	for _, c := range commands() {
		fmt.Fprintf(w, "  %-12s %s\n", c.name, c.summary)
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w, "rhomb help COMMAND shows a command's flags and an example.")
	fmt.Fprintln(w, "Exit status: 0 ok, 1 failed, 2 bad command line, 3 bad data, 4 bad model file, 130 interrupted.")
}

// Errors that choose an exit code.
type (
	usageError struct{ error }
	dataError  struct{ error }
	modelError struct{ error }
)

var errInterrupted = errors.New("interrupted")

func (e usageError) Unwrap() error { return e.error }
func (e dataError) Unwrap() error  { return e.error }
func (e modelError) Unwrap() error { return e.error }

func exitCode(e *env, err error) int {
	if err == nil {
		return exitOK
	}
	if errors.Is(err, errHelp) {
		return exitOK
	}
	fmt.Fprintln(e.stderr, "rhomb:", err)
	var u usageError
	var d dataError
	var m modelError
	switch {
	case errors.As(err, &u):
		return exitUsage
	case errors.Is(err, errInterrupted):
		return exitInterrupted
	case errors.As(err, &d):
		return exitBadData
	case errors.As(err, &m):
		return exitBadModel
	}
	return exitFailed
}
