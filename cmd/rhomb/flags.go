package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"strconv"
	"strings"
)

// errHelp reports that -h was asked for and the usage shown.
var errHelp = errors.New("help shown")

// newFlags returns a flag set whose usage shows the command's summary,
// flags and an example; parse errors become usageErrors.
func newFlags(e *env, name, summary, example string) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	fs.Usage = func() {
		w := e.stdout
		fmt.Fprintf(w, "usage: rhomb %s [flags]\n\n%s\n\nflags:\n", name, summary)
		fs.SetOutput(w)
		fs.PrintDefaults()
		fs.SetOutput(io.Discard)
		fmt.Fprintf(w, "\nexample:\n%s\n", example)
	}
	return fs
}

// parse parses args. A flag that does not parse is one line with a hint,
// not the whole help: the flag package would show the usage on any
// error, so it is shown here, only when asked for (-h).
func parse(fs *flag.FlagSet, args []string) error {
	show := fs.Usage
	fs.Usage = func() {}
	err := fs.Parse(args)
	fs.Usage = show
	if err != nil {
		if errors.Is(err, flag.ErrHelp) {
			show()
			return errHelp
		}
		return usageError{fmt.Errorf("%s: %w (rhomb help %s lists the flags)", fs.Name(), err, fs.Name())}
	}
	if fs.NArg() > 0 {
		return usageError{fmt.Errorf("%s: unexpected argument %q (rhomb help %s lists the flags)", fs.Name(), fs.Arg(0), fs.Name())}
	}
	return nil
}

// listFlag is a comma-separated list of strings.
type listFlag []string

func (l *listFlag) String() string { return strings.Join(*l, ",") }
func (l *listFlag) Set(s string) error {
	*l = nil
	for _, v := range strings.Split(s, ",") {
		if v = strings.TrimSpace(v); v != "" {
			*l = append(*l, v)
		}
	}
	return nil
}

// intsFlag is a comma-separated list of positive integers.
type intsFlag []int

func (l *intsFlag) String() string {
	s := make([]string, len(*l))
	for i, v := range *l {
		s[i] = strconv.Itoa(v)
	}
	return strings.Join(s, ",")
}

func (l *intsFlag) Set(s string) error {
	*l = nil
	if strings.TrimSpace(s) == "" || s == "none" {
		return nil
	}
	for _, v := range strings.Split(s, ",") {
		n, err := strconv.Atoi(strings.TrimSpace(v))
		if err != nil || n < 1 {
			return fmt.Errorf("%q is not a positive whole number", v)
		}
		*l = append(*l, n)
	}
	return nil
}

// mapFlag collects name=value pairs, repeatable or comma-separated.
type mapFlag map[string]string

func (m mapFlag) String() string {
	var s []string
	for k, v := range m {
		s = append(s, k+"="+v)
	}
	return strings.Join(s, ",")
}

func (m mapFlag) Set(s string) error {
	for _, kv := range strings.Split(s, ",") {
		k, v, ok := strings.Cut(kv, "=")
		if !ok || strings.TrimSpace(k) == "" {
			return fmt.Errorf("%q is not name=value", kv)
		}
		m[strings.TrimSpace(k)] = strings.TrimSpace(v)
	}
	return nil
}

// split parses "name:a:b" settings such as "cosine:0.01".
func split(s string) (name string, args []float64, err error) {
	parts := strings.Split(s, ":")
	for _, p := range parts[1:] {
		v, err := strconv.ParseFloat(p, 64)
		if err != nil {
			return "", nil, fmt.Errorf("%q: %q is not a number", s, p)
		}
		args = append(args, v)
	}
	return parts[0], args, nil
}
