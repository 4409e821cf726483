package main

import (
	"flag"
	"fmt"
	"os"
	"path/filepath"

	"github.com/rhomb/rhomb/data/demo"
)

const demoSummary = `Train on rhomb's embedded demo data: 1,200 readings from an invented fleet
of water pumps (vibration, temperature, current and suction features, a
site column and some sensor dropouts), labelled healthy, imbalance,
bearing-wear or cavitation. Needs no files and writes none unless -o is
given. Takes every train flag; the data flags are preset.

The pumps are invented: a model trained on them says nothing about real
machinery. A classifier is no safety guarantee — validate on your own data
and follow the applicable codes before its output drives an alarm or a
shutdown.`

const demoExample = `  rhomb demo
  rhomb demo -report demo.html                 # the run as one HTML page: figures, margins, collapse, bound
  rhomb demo -epochs 80 -temp 1e-6 -o pumps.model && rhomb describe -model pumps.model`

func runDemo(e *env, args []string) error {
	c := defaultConfig()
	c.Label, c.Missing = demo.Label, "impute"
	c.Hidden = []int{32, 32}
	fs := newFlags(e, "demo", demoSummary, demoExample)
	c.bind(fs)
	var o runOptions
	fs.StringVar(&o.out, "o", "", "model `file` to write (default: none)")
	fs.StringVar(&o.metrics, "metrics", "", "write diagnostics of every epoch as JSON Lines to this `file`")
	fs.StringVar(&o.report, "report", "", "write a self-contained HTML run report to this `file`")
	fs.BoolVar(&o.quiet, "quiet", false, "print only the final summary")
	if err := parse(fs, args); err != nil {
		return err
	}
	var preset string
	fs.Visit(func(f *flag.Flag) {
		switch f.Name {
		case "data", "images", "labels", "label", "skip", "kind", "missing", "na":
			preset = f.Name
		}
	})
	if preset != "" {
		return usageError{fmt.Errorf("demo: -%s is preset for the demo data; use rhomb train for your own files", preset)}
	}
	// The demo's data goes through exactly the train path, from a
	// temporary copy of the embedded file.
	dir, err := os.MkdirTemp("", "rhomb-demo-")
	if err != nil {
		return err
	}
	defer os.RemoveAll(dir)
	c.Data = filepath.Join(dir, "pumps.csv")
	if err := os.WriteFile(c.Data, demo.CSV, 0o644); err != nil {
		return err
	}
	o.title, o.source = "rhomb demo run: invented pump-condition readings", "the embedded demo file (data/demo/pumps.csv)"
	o.notes = []string{"The demo data are invented: a model trained on them says nothing about real machinery."}
	keep := o.out != ""
	if keep {
		o.checkpoint = o.out + ".checkpoint" // written only if interrupted
	}
	if err := c.check(); err != nil {
		return err
	}
	fmt.Fprintf(e.stdout, "demo: invented pump-condition readings, %d rows embedded in the binary\n", demo.DefaultRows)
	if c.Float == 32 {
		err = train[float32](e, &c, &o)
	} else {
		err = train[float64](e, &c, &o)
	}
	if err == nil && !keep {
		fmt.Fprintln(e.stdout, "(the model was not kept; pass -o FILE to save it)")
	}
	return err
}
