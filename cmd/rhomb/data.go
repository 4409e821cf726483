package main

import (
	"errors"
	"fmt"
	"io"
	"os"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim/recipe"
)

// prepared is the data of a training run: the splits, encoded, and what
// encoded them.
type prepared[T net.Float] struct {
	table            *data.Table    // nil for IDX data
	pipeline         *prep.Pipeline // nil for IDX data
	classes          []string
	train, val, test *data.Set[T] // val and test may be nil
	unseen           []string     // held-out rows' categories unseen in training (recipe.Prepared.Unseen)
	sources          []dataSource // the files read, by content
}

// prepare reads the data the settings name (-data - reads stdin), hashing
// what it reads, splits it (stratified, seeded) and encodes it with a
// pipeline fitted on the training rows only.
func prepare[T net.Float](c *config, stdin io.Reader) (*prepared[T], error) {
	var t *data.Table
	var sources []dataSource
	if c.Images != "" {
		var err error
		if t, err = readIDXTable(c.Images, c.Labels); err != nil {
			return nil, err
		}
		for _, f := range [][2]string{{"-images", c.Images}, {"-labels", c.Labels}} {
			s, err := hashFile(f[0], f[1])
			if err != nil {
				return nil, err
			}
			sources = append(sources, s)
		}
	} else {
		in, name := stdin, stdinName
		if c.Data != "-" {
			f, err := os.Open(c.Data)
			if err != nil {
				return nil, dataError{err}
			}
			defer f.Close()
			in, name = f, c.Data
		}
		h := newHashing(in)
		var err error
		if t, err = data.ReadCSV(h, name, c.csvOptions()); err != nil {
			return nil, dataError{withHint(err)}
		}
		io.Copy(io.Discard, h) // the hash covers the whole input, even after the last row read
		sources = append(sources, h.source("-data", c.Data))
	}
	r, err := recipe.Prepare[T](t, recipe.Split{Holdout: c.Holdout, Test: c.Test, Seed: c.Seed, KeepIdentifiers: c.KeepIDs, Prep: prep.Options{
		Impute: c.Missing == "impute", UnitNorm: c.UnitNorm, ZeroUnseen: c.NewAsNil, Missing: c.Markers, LevelCap: c.LevelCap,
	}})
	var ide *recipe.IdentifierError
	if errors.As(err, &ide) {
		return nil, dataError{fmt.Errorf("%w; on the command line: -skip %s leaves it out, -keep-ids keeps it (add -level-cap N to bound its encoding)", err, ide.Column)}
	}
	if err != nil {
		return nil, dataError{err}
	}
	return &prepared[T]{table: t, pipeline: r.Pipeline, classes: r.Classes, train: r.Train, val: r.Val, test: r.Test, unseen: r.Unseen, sources: sources}, nil
}

// readIDXPair reads the two files of an images/labels pair.
func readIDXPair(images, labels string) (img, lab *data.IDX, err error) {
	if img, err = data.ReadIDXFile(images); err != nil {
		return nil, nil, dataError{err}
	}
	if lab, err = data.ReadIDXFile(labels); err != nil {
		return nil, nil, dataError{err}
	}
	return img, lab, nil
}

// readIDXTable reads an images/labels pair as a table of pixel columns
// (byte/255, named p0, p1, …), which then goes through the same
// preprocessing as a CSV file's numeric columns.
func readIDXTable(images, labels string) (*data.Table, error) {
	img, lab, err := readIDXPair(images, labels)
	if err != nil {
		return nil, err
	}
	t, err := data.IDXTable(img, lab)
	if err != nil {
		return nil, dataError{err}
	}
	return t, nil
}

// readIDXSet reads an images/labels pair, pixels scaled to [0, 1], for
// models made before image data went through the preprocessing (their
// files hold no pipeline).
func readIDXSet[T net.Float](images, labels string) (*data.Set[T], error) {
	img, lab, err := readIDXPair(images, labels)
	if err != nil {
		return nil, err
	}
	classes := 0
	for _, l := range lab.Data {
		classes = max(classes, int(l)+1)
	}
	s, err := data.IDXSet[T](img, lab, max(classes, 2), true)
	if err != nil {
		return nil, dataError{err}
	}
	return s, nil
}

// withHint adds what to do on the command line to a reader's error, whose
// own advice names the library's options.
func withHint(err error) error {
	hint := ""
	switch {
	case errors.Is(err, data.ErrMissing):
		hint = "on the command line: -missing drop, or -missing impute"
	case errors.Is(err, data.ErrNoLabel):
		hint = "on the command line: check the names given to -label, -skip and -kind"
	case errors.Is(err, data.ErrNotNumber):
		hint = "on the command line: -kind COLUMN=categorical if the column holds categories"
	case errors.Is(err, data.ErrOneClass):
		hint = "on the command line: check that -label names the column holding the classes"
	case errors.Is(err, prep.ErrMissing):
		hint = "the model was trained without imputation: fill the cell, or retrain with -missing impute"
	case errors.Is(err, prep.ErrUnknownCategory):
		hint = "retrain with -unknown-zero to encode unseen categories as zeros"
	}
	if hint == "" {
		return err
	}
	return fmt.Errorf("%w\n  (%s)", err, hint)
}
