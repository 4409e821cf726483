package data

import (
	"fmt"

	"github.com/rhomb/rhomb/data/prep"
)

// Kind is the type of a feature column; see prep.Kind.
type Kind = prep.Kind

// The column kinds.
const (
	Auto        = prep.Auto
	Numeric     = prep.Numeric
	Categorical = prep.Categorical
)

// Column is one feature column of a Table; see prep.Column.
type Column = prep.Column

// Table is a labelled table as read from a file, before preprocessing:
// feature columns in file order (the label column taken out), the label of
// every row, and the line each row came from, for error messages.
type Table struct {
	Source  string // file name, for errors
	Columns []Column
	Label   string   // the label column's name
	Labels  []string // one per row
	Lines   []int    // Lines[r] is the 1-based line of row r in Source
	Rows    int
	// Dropped counts the rows left out for holding missing values, when
	// the reader was asked to drop them.
	Dropped int
}

// Column returns the feature column with the given name, or nil.
func (t *Table) Column(name string) *Column {
	for i := range t.Columns {
		if t.Columns[i].Name == name {
			return &t.Columns[i]
		}
	}
	return nil
}

// Subset returns a new Table holding the given rows of t, in that order (a
// row may appear more than once): their labels, lines, and every column's
// values and missing markers, copied, so that changing one table leaves
// the other alone. Source, Label, the columns' names and kinds, and
// Dropped (which describes the read of Source) are kept. A column without
// missing markers (Missing nil) stays without. Subset panics on a row
// outside [0, t.Rows), as an index into a slice does.
func (t *Table) Subset(rows []int) *Table {
	n := len(t.Labels)
	for _, r := range rows {
		if r < 0 || r >= n {
			panic(fmt.Sprintf("data: Table.Subset: row %d out of range [0, %d)", r, n))
		}
	}
	out := &Table{Source: t.Source, Label: t.Label, Rows: len(rows), Dropped: t.Dropped,
		Labels: pick(t.Labels, rows), Lines: pick(t.Lines, rows), Columns: make([]Column, len(t.Columns))}
	for j := range t.Columns {
		c := &t.Columns[j]
		out.Columns[j] = Column{Name: c.Name, Kind: c.Kind, Num: pick(c.Num, rows), Cat: pick(c.Cat, rows), Missing: pick(c.Missing, rows)}
	}
	return out
}

// pick returns s[rows[0]], s[rows[1]], …, or nil when s is nil (a column
// keeps only one of Num and Cat; a table read without line numbers has no
// Lines).
func pick[E any](s []E, rows []int) []E {
	if s == nil {
		return nil
	}
	out := make([]E, len(rows))
	for i, r := range rows {
		out[i] = s[r]
	}
	return out
}

// Classes returns the distinct labels in sorted order.
func (t *Table) Classes() []string {
	seen := map[string]bool{}
	var out []string
	for _, l := range t.Labels {
		if !seen[l] {
			seen[l] = true
			out = append(out, l)
		}
	}
	sortStrings(out)
	return out
}

func sortStrings(s []string) {
	for i := 1; i < len(s); i++ {
		for j := i; j > 0 && s[j] < s[j-1]; j-- {
			s[j], s[j-1] = s[j-1], s[j]
		}
	}
}

// ParseError reports a problem in an input file, with where it is. Line
// and Column are 1-based; Column is 0 when the problem is the whole line
// or file. Err is one of the sentinel errors below, possibly wrapped.
type ParseError struct {
	File   string
	Line   int
	Column int
	Field  string // the column's header name, when known
	Err    error
}

func (e *ParseError) Error() string {
	where := e.File
	if where == "" {
		where = "input"
	}
	if e.Line > 0 {
		where += fmt.Sprintf(":%d", e.Line)
	}
	if e.Column > 0 {
		where += fmt.Sprintf(":%d", e.Column)
	}
	if e.Field != "" {
		where += fmt.Sprintf(" (column %q)", e.Field)
	}
	return where + ": " + e.Err.Error()
}

func (e *ParseError) Unwrap() error { return e.Err }

// Sentinel causes carried by ParseError (the same values as prep's).
var (
	ErrEmpty           = prep.ErrEmpty
	ErrDuplicateHeader = prep.ErrDuplicateHeader
	ErrNoLabel         = prep.ErrNoLabel
	// ErrNoColumn is ErrNoLabel by a name that reads better where an
	// option other than the label names an unknown column.
	ErrNoColumn        = prep.ErrNoLabel
	ErrRagged          = prep.ErrRagged
	ErrMissing         = prep.ErrMissing
	ErrNotNumber       = prep.ErrNotNumber
	ErrInfinite        = prep.ErrInfinite
	ErrOneClass        = prep.ErrOneClass
	ErrUnknownCategory = prep.ErrUnknownCategory
	ErrUnknownField    = prep.ErrUnknownField
)
