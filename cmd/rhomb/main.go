// Command rhomb trains, checks and runs small classifiers on tabular and
// image-like data, and writes model files that a Go service or an edge
// binary can serve.
//
//	rhomb demo                                   train on the embedded demo data
//	rhomb train -data readings.csv -label condition -o pumps.model
//	rhomb check -model pumps.model -data holdout.csv
//	rhomb classify -model pumps.model -data new.csv -o labelled.csv
//	rhomb describe -model pumps.model
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
	// terminal reports whether stderr is a terminal (progress bars) .
	terminal bool
}

func commands() []command {
	return []command{
		{"train", "train a classifier on a CSV or IDX file and save it", runTrain},
		{"check", "measure a saved model on labelled data", runCheck},
		{"classify", "label new rows with a saved model, CSV in, CSV out", runClassify},
		{"describe", "show what a model file holds", runDescribe},
		{"demo", "train on the embedded demo data (no files needed)", runDemo},
		{"sweep", "train a grid of ρ0, λ, learning rate, temperature and seed; rank the runs", runSweep},
		{"sweep-merge", "combine the results of a sweep's shards into one ranking", runSweepMerge},
	}
}

func main() {
	e := &env{stdout: os.Stdout, stderr: os.Stderr, stdin: os.Stdin, terminal: isTerminal(os.Stderr)}
	os.Exit(dispatch(e, os.Args[1:]))
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
