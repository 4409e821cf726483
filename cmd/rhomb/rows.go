package main

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/modelfile"
	"github.com/rhomb/rhomb/optim"
)

// withModel loads the model at path in the element type it was saved in
// and calls f with it.
func withModel(path string, f32 func(*modelfile.Model[float32]) error, f64 func(*modelfile.Model[float64]) error) error {
	dt, err := modelfile.ElementType(path)
	if err != nil {
		return modelError{err}
	}
	if dt == "float32" {
		m, err := modelfile.Load[float32](path)
		if err != nil {
			return modelError{err}
		}
		return f32(m)
	}
	m, err := modelfile.Load[float64](path)
	if err != nil {
		return modelError{err}
	}
	return f64(m)
}

// openInput opens a data file, or standard input for "-".
func openInput(e *env, path string) (io.Reader, func(), error) {
	if path == "-" {
		return e.stdin, func() {}, nil
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, nil, dataError{err}
	}
	return f, func() { f.Close() }, nil
}

// rowStream reads a CSV file row by row and encodes each row with a
// model's pipeline, in batches, never holding the whole file.
type rowStream[T net.Float] struct {
	source   string
	r        *csv.Reader
	pipe     *prep.Pipeline
	cols     []int // column of each pipeline input
	labelCol int   // -1 when not read
	// skipMissing passes rows with a missing cell through as invalid
	// instead of failing (the model cannot impute them).
	skipMissing bool
	fields      []string
	feat        []float64
	batch       int
	x           []T
	labels      []string
	lines       []int
	valid       []bool
}

func newRowStream[T net.Float](in io.Reader, source string, pipe *prep.Pipeline, label string, batch int) (*rowStream[T], error) {
	r := csv.NewReader(in)
	r.ReuseRecord = true
	r.FieldsPerRecord = -1
	head, err := r.Read()
	if errors.Is(err, io.EOF) {
		return nil, dataError{&data.ParseError{File: source, Err: data.ErrEmpty}}
	}
	if err != nil {
		return nil, dataError{fmt.Errorf("%s: %w", source, err)}
	}
	index := map[string]int{}
	for i, h := range head {
		index[strings.TrimSpace(strings.TrimPrefix(h, "\ufeff"))] = i
	}
	s := &rowStream[T]{source: source, r: r, pipe: pipe, labelCol: -1, batch: batch,
		fields: make([]string, len(pipe.Inputs())), feat: make([]float64, pipe.Width())}
	var missing []string
	for _, name := range pipe.Inputs() {
		i, ok := index[name]
		if !ok {
			missing = append(missing, name)
		}
		s.cols = append(s.cols, i)
	}
	if len(missing) > 0 {
		return nil, dataError{&data.ParseError{File: source, Line: 1, Err: fmt.Errorf("%w: the model needs column(s) %s", data.ErrNoColumn, strings.Join(missing, ", "))}}
	}
	if label != "" {
		i, ok := index[label]
		if !ok {
			return nil, dataError{&data.ParseError{File: source, Line: 1, Field: label, Err: fmt.Errorf("%w: no label column %q to check against (set -label)", data.ErrNoLabel, label)}}
		}
		s.labelCol = i
	}
	return s, nil
}

// next reads up to batch rows and returns their features (rows×Width) and,
// if asked for, labels; rows == 0 at the end. valid[r] is false for a row
// skipped for a missing cell (its features are zero).
func (s *rowStream[T]) next() (x []T, labels []string, lines []int, valid []bool, rows int, err error) {
	s.x, s.labels, s.lines, s.valid = s.x[:0], s.labels[:0], s.lines[:0], s.valid[:0]
	for rows < s.batch {
		rec, err := s.r.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		line, _ := s.r.FieldPos(0)
		if err != nil {
			return nil, nil, nil, nil, 0, dataError{fmt.Errorf("%s: %w", s.source, err)}
		}
		for i, c := range s.cols {
			if c >= len(rec) {
				return nil, nil, nil, nil, 0, dataError{&data.ParseError{File: s.source, Line: line, Err: fmt.Errorf("%w: %d fields, the model's column %q is field %d", data.ErrRagged, len(rec), s.pipe.Inputs()[i], c+1)}}
			}
			s.fields[i] = rec[c]
		}
		ok := true
		if err := s.pipe.ApplyStrings(s.fields, s.feat); err != nil && s.skipMissing && errors.Is(err, prep.ErrMissing) {
			ok = false
			clear(s.feat)
		} else if err != nil {
			pe := &data.ParseError{File: s.source, Line: line, Err: err}
			var fe *prep.FieldError
			if errors.As(err, &fe) {
				pe.Field = fe.Field
				for i, name := range s.pipe.Inputs() {
					if name == fe.Field {
						pe.Line, pe.Column = s.r.FieldPos(s.cols[i])
					}
				}
			}
			return nil, nil, nil, nil, 0, dataError{withHint(pe)}
		}
		for _, v := range s.feat {
			s.x = append(s.x, T(v))
		}
		if s.labelCol >= 0 {
			if s.labelCol >= len(rec) {
				return nil, nil, nil, nil, 0, dataError{&data.ParseError{File: s.source, Line: line, Err: fmt.Errorf("%w: no label field", data.ErrRagged)}}
			}
			s.labels = append(s.labels, strings.TrimSpace(rec[s.labelCol]))
		}
		s.lines = append(s.lines, line)
		s.valid = append(s.valid, ok)
		rows++
	}
	return s.x, s.labels, s.lines, s.valid, rows, nil
}

// forEachRow streams path through the model: f gets each row's outputs
// and, when label is set, its label. With skipMissing, a row with a
// missing cell gets out == nil instead of failing the run.
func forEachRow[T net.Float](e *env, m *modelfile.Model[T], path, label string, skipMissing bool, f func(line int, out []T, label string) error) error {
	if m.Pipeline == nil {
		return modelError{errors.New("the model has no preprocessing for CSV rows (it was trained on IDX data): use -images and -labels")}
	}
	in, done, err := openInput(e, path)
	if err != nil {
		return err
	}
	defer done()
	s, err := newRowStream[T](in, path, m.Pipeline, label, 256)
	if err != nil {
		return err
	}
	s.skipMissing = skipMissing
	var model optim.Model[T] = m.Network
	width := m.Network.Out()
	for {
		x, labels, lines, valid, rows, err := s.next()
		if err != nil {
			return err
		}
		if rows == 0 {
			return nil
		}
		out := model.Forward(x, rows)
		for r := range rows {
			l := ""
			if labels != nil {
				l = labels[r]
			}
			o := out[r*width : (r+1)*width]
			if !valid[r] {
				o = nil
			}
			if err := f(lines[r], o, l); err != nil {
				return err
			}
		}
	}
}
