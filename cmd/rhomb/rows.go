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
	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/optim/modelfile"
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

// loadServing loads the model file at path with the serving reader
// (net/classify), the one the HTTP server and the edge program use, so
// that every tool gives the same bits for the same file and rows.
func loadServing(path string) (*classify.Model, error) {
	m, err := classify.Load(path)
	if err != nil {
		return nil, modelError{err}
	}
	return m, nil
}

// csvRows reads a CSV file row by row and classifies each row with a
// model's pipeline and network, never holding the whole file.
type csvRows struct {
	source string
	r      *csv.Reader
	m      *classify.Model
	w      *classify.Work
	header []string
	cols   []int // column of each pipeline input
	// labelCol is the label's column, or -1 when not read; carry the
	// columns copied to the output.
	labelCol int
	carry    []int
	// skipMissing passes rows with a missing cell through as not
	// answered instead of failing (the model cannot impute them).
	skipMissing bool
	fields      []string
	carried     []string
}

// csvRow is one row read by csvRows.next. Answer's scores belong to the
// reader and are overwritten by the next row.
type csvRow struct {
	line     int
	answered bool // false: left out for a missing cell
	answer   classify.Answer
	label    string
	carried  []string
}

// openRows reads the header of a CSV file and matches it to the model's
// inputs, the label column (when label is not "") and the columns to
// carry to the output. A header that names a column twice, or lacks one
// the model needs, is refused.
func openRows(in io.Reader, source string, m *classify.Model, label string, carry []string, sep rune) (*csvRows, error) {
	if m.Pipeline() == nil {
		return nil, modelError{errors.New("the model has no preprocessing for CSV rows (it was trained on IDX data): use -images and -labels")}
	}
	// The same input checks as training's reader (UTF-8, line ends,
	// record limits): what train refuses, classify and check refuse too.
	r := data.NewCSVReader(in, data.CSVOptions{Comma: sep, Advise: flagWords})
	r.ReuseRecord = true
	r.FieldsPerRecord = 0 // every row as wide as the header
	head, err := r.Read()
	if errors.Is(err, io.EOF) {
		return nil, dataError{&data.ParseError{File: source, Err: data.ErrEmpty}}
	}
	if err != nil {
		return nil, dataError{csvError(source, nil, err)}
	}
	index := map[string]int{}
	names := make([]string, len(head))
	for i, h := range head {
		name := strings.TrimSpace(strings.TrimPrefix(h, "\ufeff"))
		names[i] = name
		if j, dup := index[name]; dup {
			return nil, dataError{&data.ParseError{File: source, Line: 1, Column: i + 1, Field: name,
				Err: fmt.Errorf("%w: %q is field %d and field %d; rename one of them", data.ErrDuplicateHeader, name, j+1, i+1)}}
		}
		index[name] = i
	}
	s := &csvRows{source: source, r: r, m: m, w: m.NewWork(), header: make([]string, len(head)), labelCol: -1,
		fields: make([]string, len(m.Inputs()))}
	var missing []string
	for _, name := range m.Inputs() {
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
	for _, name := range carry {
		i, ok := index[name]
		if !ok {
			return nil, dataError{&data.ParseError{File: source, Line: 1, Field: name, Err: fmt.Errorf("%w: -carry names column %q, which the file does not have", data.ErrNoColumn, name)}}
		}
		s.carry = append(s.carry, i)
	}
	s.carried = make([]string, len(s.carry))
	copy(s.header, names)
	return s, nil
}

// csvError turns the reader's errors into the CLI's, saying where and
// what to do in flags' words.
func csvError(source string, header []string, err error) error {
	return data.CSVInputError(err, source, header, flagWords)
}

// next reads and classifies one row; it returns io.EOF at the end.
func (s *csvRows) next() (csvRow, error) {
	rec, err := s.r.Read()
	if errors.Is(err, io.EOF) {
		return csvRow{}, io.EOF
	}
	if errors.Is(err, csv.ErrFieldCount) {
		line, _ := s.r.FieldPos(0)
		if len(rec) > len(s.header) {
			return csvRow{}, dataError{&data.ParseError{File: s.source, Line: line, Column: len(s.header) + 1, Err: fmt.Errorf("%w: the row has %d fields, the header %d; look for a decimal comma or an unquoted separator inside a value (quote the value, or choose another separator with -sep)", data.ErrRagged, len(rec), len(s.header))}}
		}
		name := s.header[len(rec)]
		return csvRow{}, dataError{&data.ParseError{File: s.source, Line: line, Err: fmt.Errorf("%w: the row has %d fields, the header %d: no value for %q and the columns after it; add the missing fields (empty if the values are missing)", data.ErrRagged, len(rec), len(s.header), name)}}
	}
	if err != nil {
		return csvRow{}, dataError{csvError(s.source, s.header, err)}
	}
	line, _ := s.r.FieldPos(0)
	for i, c := range s.cols {
		s.fields[i] = rec[c]
	}
	row := csvRow{line: line, answered: true}
	for i, c := range s.carry {
		s.carried[i] = rec[c]
	}
	row.carried = s.carried
	if s.labelCol >= 0 {
		row.label = strings.TrimSpace(rec[s.labelCol])
	}
	a, err := s.m.ClassifyFields(s.w, s.fields)
	switch {
	case err == nil:
		row.answer = a
	case s.skipMissing && errors.Is(err, prep.ErrMissing):
		row.answered = false
	default:
		pe := &data.ParseError{File: s.source, Line: line, Err: err}
		var fe *prep.FieldError
		if errors.As(err, &fe) {
			pe.Field = fe.Field
			for i, name := range s.m.Inputs() {
				if name == fe.Field {
					pe.Line, pe.Column = s.r.FieldPos(s.cols[i])
				}
			}
		}
		return csvRow{}, dataError{withHint(pe)}
	}
	return row, nil
}

// forEachRow streams path through the model: f gets each row. With
// skipMissing, a row with a missing cell comes with answered false
// instead of failing the run.
func forEachRow(e *env, m *classify.Model, path, label string, carry []string, sep rune, skipMissing bool, f func(row csvRow) error) error {
	in, done, err := openInput(e, path)
	if err != nil {
		return err
	}
	defer done()
	s, err := openRows(in, path, m, label, carry, sep)
	if err != nil {
		return err
	}
	s.skipMissing = skipMissing
	for {
		row, err := s.next()
		if errors.Is(err, io.EOF) {
			return nil
		}
		if err != nil {
			return err
		}
		if err := f(row); err != nil {
			return err
		}
	}
}
