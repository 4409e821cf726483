package main

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"hash"
	"io"
	"math"
	"os"
	"runtime"
	"runtime/debug"
	"strconv"

	"github.com/rhomb/rhomb/internal/version"
)

// runRecord is what a model file and every checkpoint record of the run
// that made them, beside its settings: the data read, by content; every
// command line that trained it (a resumed run adds its own); and the
// build that ran it.
type runRecord struct {
	Data     []dataSource `json:"data"`
	Commands [][]string   `json:"commands"`
	Library  string       `json:"library"`
	// Revision and Modified are the build's version-control revision and
	// whether the checkout had changes, when the build recorded them
	// (runtime/debug.ReadBuildInfo).
	Revision string `json:"revision,omitempty"`
	Modified bool   `json:"modified,omitempty"`
	Go       string `json:"go"`
}

// dataSource is one data file read, by name and content.
type dataSource struct {
	Flag   string `json:"flag"` // -data, -images or -labels
	Path   string `json:"path"`
	SHA256 string `json:"sha256"`
	Bytes  int64  `json:"bytes"`
}

// newRunRecord describes the build and this command line.
func newRunRecord(args []string) *runRecord {
	r := &runRecord{Library: "rhomb " + version.Version, Go: runtime.Version(),
		Commands: [][]string{append([]string{"rhomb"}, args...)}}
	if bi, ok := debug.ReadBuildInfo(); ok {
		for _, s := range bi.Settings {
			switch s.Key {
			case "vcs.revision":
				r.Revision = s.Value
			case "vcs.modified":
				r.Modified = s.Value == "true"
			}
		}
	}
	return r
}

// hashing counts and hashes what is read through it.
type hashing struct {
	r io.Reader
	h hash.Hash
	n int64
}

func newHashing(r io.Reader) *hashing { return &hashing{r: r, h: sha256.New()} }

func (h *hashing) Read(p []byte) (int, error) {
	n, err := h.r.Read(p)
	h.h.Write(p[:n])
	h.n += int64(n)
	return n, err
}

func (h *hashing) source(flag, path string) dataSource {
	return dataSource{Flag: flag, Path: path, SHA256: hex.EncodeToString(h.h.Sum(nil)), Bytes: h.n}
}

// hashFile hashes the file at path.
func hashFile(flag, path string) (dataSource, error) {
	f, err := os.Open(path)
	if err != nil {
		return dataSource{}, dataError{err}
	}
	defer f.Close()
	h := newHashing(f)
	if _, err := io.Copy(io.Discard, h); err != nil {
		return dataSource{}, dataError{err}
	}
	return h.source(flag, path), nil
}

// sameData checks, when a run resumes, that the data read now is the data
// the run began with, by content: rows that were relabelled or reordered
// would otherwise train the kept readout on other classes.
func sameData(checkpoint string, then, now []dataSource) error {
	if len(then) == 0 {
		return nil // a checkpoint written before runs recorded their data
	}
	for i, s := range now {
		if i >= len(then) || then[i].Flag != s.Flag {
			return dataError{fmt.Errorf("%s was trained on other inputs than %s %s: resume with the flags it records", checkpoint, s.Flag, s.Path)}
		}
		if then[i].SHA256 != s.SHA256 {
			return dataError{fmt.Errorf("%s %s is not the data the run in %s began with: its content differs (SHA-256 %.16s… now, %.16s… then, %s read %d bytes then); resume with the same file, or start a new run",
				s.Flag, s.Path, checkpoint, s.SHA256, then[i].SHA256, then[i].Path, then[i].Bytes)}
		}
	}
	return nil
}

// metricsRecord is one line of -metrics: what the console shows for an
// epoch, numbered from 1 as the console and the messages number them.
type metricsRecord struct {
	Kind       string    `json:"kind"` // "epoch"
	Epoch      int       `json:"epoch"`
	Epochs     int       `json:"epochs"`
	Loss       metricNum `json:"loss"`
	TrainAcc   metricNum `json:"train_accuracy"`
	ValAcc     metricNum `json:"validation_accuracy"` // null without validation rows
	Rho        metricNum `json:"rho"`
	RhoStar    metricNum `json:"rho_equilibrium"` // null for a loss without one
	MinMargin  metricNum `json:"min_margin"`
	Seconds    float64   `json:"seconds"`
	Best       bool      `json:"best"`
	ResumedRun bool      `json:"resumed,omitempty"` // written by a run that resumed a checkpoint
}

func newMetricsRecord(l epochLine, resumed bool) metricsRecord {
	return metricsRecord{Kind: "epoch", Epoch: l.epoch, Epochs: l.epochs, Loss: metricNum(l.loss), TrainAcc: metricNum(l.trainAcc),
		ValAcc: metricNum(l.valAcc), Rho: metricNum(l.rho), RhoStar: metricNum(l.rhoStar), MinMargin: metricNum(l.minMargin),
		Seconds: l.elapsed.Seconds(), Best: l.best, ResumedRun: resumed}
}

// metricNum writes NaN and infinities as null, which JSON has no numbers
// for.
type metricNum float64

func (v metricNum) MarshalJSON() ([]byte, error) {
	f := float64(v)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return strconv.AppendFloat(nil, f, 'g', -1, 64), nil
}
