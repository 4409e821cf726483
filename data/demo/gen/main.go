// Command gen writes the demo dataset; `go generate ./data/demo` runs it to
// refresh the embedded pumps.csv.
package main

import (
	"bytes"
	"flag"
	"log"
	"os"

	"github.com/rhomb/rhomb/data/demo"
)

func main() {
	out := flag.String("out", "pumps.csv", "file to write")
	seed := flag.Uint64("seed", demo.DefaultSeed, "random seed")
	rows := flag.Int("rows", demo.DefaultRows, "readings to generate")
	flag.Parse()
	var b bytes.Buffer
	if err := demo.Generate(&b, *seed, *rows); err != nil {
		log.Fatal(err)
	}
	if err := os.WriteFile(*out, b.Bytes(), 0o644); err != nil {
		log.Fatal(err)
	}
}
