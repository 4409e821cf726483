package classify

import (
	"errors"
	"fmt"
	"math"
	"reflect"

	"github.com/rhomb/rhomb/data/prep"
)

// Binding classifies rows given as values of a struct type R of the
// caller's, one struct field per input field of the model. Fields are
// matched to inputs by the tag `classify:"name"`, or else by the Go field
// name; `classify:"-"` skips a field. A numeric input reads a field of any
// integer or float type, a categorical input a string field; a pointer to
// either may be nil, which means missing. A NaN float field is missing too,
// as a NaN is in the training table.
//
// The values go through prep.Pipeline.ApplyColumns, the very encoder the
// training rows went through: a float field is encoded from its bits with
// no text round trip. Bind does the reflection on the type once; Classify
// allocates nothing.
type Binding[R any] struct {
	m      *Model
	fields []boundField // one per pipeline step, in step order
}

type boundField struct {
	index []int
	ptr   bool
	kind  reflect.Kind // of the value, after the pointer
}

// Bind matches the fields of R to m's inputs. It returns an error naming
// the field when R is not a struct, when an input has no field, when two
// fields claim one input, when a tagged field names no input, or when a
// field's type does not suit its input's kind.
func Bind[R any](m *Model) (*Binding[R], error) {
	if m.pipeline == nil {
		return nil, ErrNoPipeline
	}
	t := reflect.TypeFor[R]()
	if t.Kind() != reflect.Struct {
		return nil, fmt.Errorf("classify: Bind: %v is not a struct type", t)
	}
	steps := m.pipeline.Encodings
	at := make(map[string]int, len(steps))
	for i := range steps {
		at[steps[i].Name] = i
	}
	b := &Binding[R]{m: m, fields: make([]boundField, len(steps))}
	found := make([]string, len(steps))
	for _, f := range reflect.VisibleFields(t) {
		if !f.IsExported() || f.Anonymous {
			continue
		}
		name, tagged := f.Tag.Lookup("classify")
		if name == "-" {
			continue
		}
		if !tagged {
			name = f.Name
		}
		i, ok := at[name]
		if !ok {
			if tagged {
				return nil, &prep.FieldError{Field: name, Row: -1, Err: fmt.Errorf("%w: struct field %s.%s is tagged with it", prep.ErrUnknownField, t.Name(), f.Name)}
			}
			continue
		}
		if found[i] != "" {
			return nil, fmt.Errorf("classify: Bind: fields %s and %s of %v both give input %q", found[i], f.Name, t, name)
		}
		found[i] = f.Name
		bf := boundField{index: f.Index}
		ft := f.Type
		if ft.Kind() == reflect.Pointer {
			bf.ptr, ft = true, ft.Elem()
		}
		bf.kind = ft.Kind()
		numeric := steps[i].Kind == prep.Numeric
		switch bf.kind {
		case reflect.Float32, reflect.Float64,
			reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64,
			reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64:
			if !numeric {
				return nil, fmt.Errorf("classify: Bind: field %s (%v) gives categorical input %q; use a string field", f.Name, f.Type, name)
			}
		case reflect.String:
			if numeric {
				return nil, fmt.Errorf("classify: Bind: field %s (%v) gives numeric input %q; use a number field", f.Name, f.Type, name)
			}
		default:
			return nil, fmt.Errorf("classify: Bind: field %s has type %v; want a number, a string, or a pointer to one", f.Name, f.Type)
		}
		b.fields[i] = bf
	}
	for i, f := range found {
		if f == "" {
			return nil, &prep.FieldError{Field: steps[i].Name, Row: -1, Err: fmt.Errorf("%w: %v has no field for this input (name a field after it or tag one `classify:%q`)", prep.ErrMissing, t, steps[i].Name)}
		}
	}
	return b, nil
}

// columns returns the Work's one-row columns, made on first use.
func (w *Work) columns(p *prep.Pipeline) []prep.Column {
	if w.cols == nil {
		n := len(p.Encodings)
		w.cols = make([]prep.Column, n)
		w.num, w.cat, w.miss = make([]float64, n), make([]string, n), make([]bool, n)
		for i := range p.Encodings {
			c := &w.cols[i]
			c.Name, c.Kind = p.Encodings[i].Name, p.Encodings[i].Kind
			c.Missing = w.miss[i : i+1]
			if c.Kind == prep.Numeric {
				c.Num = w.num[i : i+1]
			} else {
				c.Cat = w.cat[i : i+1]
			}
		}
	}
	return w.cols
}

// encode fills the Work's columns from *row and encodes them into w.feat.
func (b *Binding[R]) encode(w *Work, row *R) error {
	p := b.m.pipeline
	cols := w.columns(p)
	v := reflect.ValueOf(row).Elem()
	for i := range b.fields {
		f := &b.fields[i]
		fv := v.FieldByIndex(f.index)
		missing := false
		if f.ptr {
			if fv.IsNil() {
				missing = true
			} else {
				fv = fv.Elem()
			}
		}
		w.miss[i] = missing
		c := &cols[i]
		if c.Kind == prep.Numeric {
			x := math.NaN()
			if !missing {
				switch f.kind {
				case reflect.Float32, reflect.Float64:
					x = fv.Float()
				case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64:
					x = float64(fv.Int())
				default:
					x = float64(fv.Uint())
				}
			}
			w.num[i] = x
		} else {
			s := ""
			if !missing {
				s = fv.String()
			}
			w.cat[i] = s
		}
	}
	if err := p.ApplyColumns(cols, 0, w.feat); err != nil {
		var fe *prep.FieldError
		if errors.As(err, &fe) {
			fe.Row = -1 // one row, not a table row
		}
		return err
	}
	return nil
}

// Classify classifies one struct row. Errors are *prep.FieldError naming
// the input field.
func (b *Binding[R]) Classify(w *Work, row *R) (Answer, error) {
	w = b.m.work(w)
	if err := b.encode(w, row); err != nil {
		return Answer{}, err
	}
	return b.m.run(w, w.feat, w.one(), 0)
}

// ClassifyBatch classifies rows, writing one Answer per row into dst
// (len ≥ len(rows)); the first bad row stops it with a *RowError.
func (b *Binding[R]) ClassifyBatch(w *Work, rows []R, dst []Answer) error {
	w = b.m.work(w)
	if len(dst) < len(rows) {
		return &RowError{Row: -1, Err: fmt.Errorf("classify: %d answers for %d rows", len(dst), len(rows))}
	}
	w.grow(len(rows))
	o := b.m.outputs
	for r := range rows {
		if err := b.encode(w, &rows[r]); err != nil {
			return &RowError{Row: r, Err: err}
		}
		a, err := b.m.run(w, w.feat, w.scores[r*o:(r+1)*o], r)
		if err != nil {
			return &RowError{Row: r, Err: err}
		}
		dst[r] = a
	}
	return nil
}
