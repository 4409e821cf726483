package data_test

import (
	"bytes"
	"encoding/csv"
	"errors"
	"math"
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/data/prep"
)

// FuzzReadCSV checks properties that hold for any input (no outside source
// is needed for them; the seeds are the unit tests' inputs):
//
//   - ReadCSV never panics, and every error is a *data.ParseError whose
//     cause is one of the documented sentinels or an encoding/csv syntax
//     error;
//   - a table it returns is consistent: every column has Rows entries,
//     numbers are finite or marked missing (and then NaN), categories are
//     never a missing marker, lines increase, at least two classes, and
//     kept plus dropped rows are all the records after the header;
//   - written back as CSV and read again with the kinds it found, the
//     table comes back the same, bit for bit;
//   - input that is not UTF-8 is refused, with ErrNotUTF8, and only
//     such input gets that error.
func FuzzReadCSV(f *testing.F) {
	for _, c := range badCases {
		f.Add(c.in, uint8(0), uint8(c.opt.OnMissing), uint8(0))
	}
	for _, c := range syntaxCases {
		f.Add(c.in, uint8(1), uint8(0), uint8(0))
	}
	f.Add("a,b,y\n1,x,p\n2,y,q\n", uint8(2), uint8(0), uint8(0))
	f.Add("a;b;y\n1;NA;p\n2;y;q\n", uint8(2), uint8(2), uint8(1))
	f.Add("a\tb\ty\n1\t?\tp\nNA\ty\tq\n", uint8(2), uint8(5), uint8(2))
	f.Add("\uFEFF id , size,colour , y \n7, NA ,red,p\n\n8, 2.5 ,\"dark, blue\", q\n9,-3e2,\"red\",p\n10,4,\"two\nlines\",q\n", uint8(3), uint8(2), uint8(0))
	f.Add("a,note,y\n1,x,p\n,y,q\n2,,q\nNA,z,p\n3,w,q\n", uint8(2), uint8(1), uint8(0))
	f.Add("y,a\n\"p\",0x1p-2\nq,-0\nq,1e-320\n", uint8(0), uint8(0), uint8(0))
	f.Add("reading,city,state\n1.5,M\xfcnster,on\n2.5,Berlin,off\n", uint8(2), uint8(0), uint8(0))
	f.Add("a,b,y\r1,2,p\r3,4,q\r", uint8(2), uint8(0), uint8(0))
	f.Add("a,y\n\"two\nl\xe9nes\",p\nx,q\n", uint8(1), uint8(0), uint8(0))
	f.Add("a,y\r\nM\u00fcnster,\"p\r\nq\"\r\n\"x\"\"\",q\r", uint8(1), uint8(0), uint8(0))

	commas := []rune{',', ';', '\t'}
	f.Fuzz(func(t *testing.T, in string, labelAt, policy, commaAt uint8) {
		comma := commas[int(commaAt)%len(commas)]
		o := data.CSVOptions{
			Comma:     comma,
			OnMissing: data.MissingPolicy(policy % 3),
		}
		if policy/3%2 == 1 {
			o.Missing = []string{"?"}
		}
		// Pick the label from the header, read here with encoding/csv.
		hr := csv.NewReader(strings.NewReader(strings.TrimPrefix(in, "\uFEFF")))
		hr.Comma = comma
		hr.FieldsPerRecord = -1
		if h, err := hr.Read(); err == nil && len(h) > 0 {
			o.Label = strings.TrimSpace(h[int(labelAt)%len(h)])
		}

		tab, err := data.ReadCSV(strings.NewReader(in), "fuzz.csv", o)
		// Text that is not UTF-8 (RFC 3629, as package unicode/utf8
		// decodes it) never gets into a table, and is the only cause of
		// ErrNotUTF8.
		if err == nil && !utf8.ValidString(in) {
			t.Fatalf("accepted input that is not UTF-8: %q", in)
		}
		if errors.Is(err, data.ErrNotUTF8) && utf8.ValidString(in) {
			t.Fatalf("UTF-8 input refused as not UTF-8: %v", err)
		}
		// And the position is that of the first byte the standard
		// library's decoder refuses (after a byte-order mark, which no
		// column counts).
		var pe *data.ParseError
		if errors.Is(err, data.ErrNotUTF8) && errors.As(err, &pe) {
			if line, col := firstInvalid(strings.TrimPrefix(in, "\uFEFF")); pe.Line != line || pe.Column != col {
				t.Fatalf("%v: at %d:%d, the first invalid byte is at %d:%d", err, pe.Line, pe.Column, line, col)
			}
		}
		if err != nil {
			checkCause(t, err)
			return
		}
		markers := o.Missing
		if markers == nil {
			markers = prep.DefaultMissing
		}
		checkTable(t, tab, markers)

		// Records after the header, counted by encoding/csv.
		cr := csv.NewReader(strings.NewReader(strings.TrimPrefix(in, "\uFEFF")))
		cr.Comma = comma
		cr.FieldsPerRecord = -1
		all, err := cr.ReadAll()
		if err != nil {
			t.Fatalf("ReadCSV accepted what encoding/csv rejects: %v", err)
		}
		if tab.Rows+tab.Dropped != len(all)-1 {
			t.Errorf("%d rows + %d dropped, but %d records after the header", tab.Rows, tab.Dropped, len(all)-1)
		}

		// Round trip.
		text := writeTable(t, tab, comma, markers)
		o2 := data.CSVOptions{Label: tab.Label, Comma: comma, Missing: o.Missing, OnMissing: data.MissingKeep,
			Kinds: map[string]data.Kind{}}
		for _, c := range tab.Columns {
			o2.Kinds[c.Name] = c.Kind
		}
		back, err := data.ReadCSV(bytes.NewReader(text), "back.csv", o2)
		if err != nil {
			t.Fatalf("reading back %q: %v", text, err)
		}
		sameTable(t, tab, back)
	})
}

var sentinels = []error{
	data.ErrEmpty, data.ErrDuplicateHeader, data.ErrNoLabel, data.ErrRagged,
	data.ErrMissing, data.ErrNotNumber, data.ErrInfinite, data.ErrOneClass,
	data.ErrNotUTF8, data.ErrLineEnds, data.ErrTooLarge,
}

func checkCause(t *testing.T, err error) {
	t.Helper()
	var pe *data.ParseError
	if !errors.As(err, &pe) {
		t.Fatalf("%v (%T) is not a *data.ParseError", err, err)
	}
	var cpe *csv.ParseError
	if errors.As(err, &cpe) {
		return
	}
	for _, s := range sentinels {
		if errors.Is(err, s) {
			return
		}
	}
	t.Fatalf("%v has no documented cause", err)
}

func checkTable(t *testing.T, tab *data.Table, markers []string) {
	t.Helper()
	if tab.Rows < 2 || len(tab.Labels) != tab.Rows || len(tab.Lines) != tab.Rows {
		t.Fatalf("%d rows, %d labels, %d lines", tab.Rows, len(tab.Labels), len(tab.Lines))
	}
	if len(tab.Classes()) < 2 {
		t.Errorf("classes %v", tab.Classes())
	}
	for r, l := range tab.Labels {
		if prep.IsMissing(l, markers) {
			t.Errorf("row %d: label %q is a missing marker", r, l)
		}
	}
	for r := 1; r < tab.Rows; r++ {
		if tab.Lines[r] <= tab.Lines[r-1] || tab.Lines[0] < 2 {
			t.Fatalf("lines %v", tab.Lines)
		}
	}
	for _, c := range tab.Columns {
		if len(c.Missing) != tab.Rows {
			t.Fatalf("%s: %d missing flags for %d rows", c.Name, len(c.Missing), tab.Rows)
		}
		switch c.Kind {
		case data.Numeric:
			if len(c.Num) != tab.Rows || c.Cat != nil {
				t.Fatalf("%s: %d numbers, %d categories for %d rows", c.Name, len(c.Num), len(c.Cat), tab.Rows)
			}
			for r, v := range c.Num {
				if c.Missing[r] != math.IsNaN(v) || math.IsInf(v, 0) {
					t.Fatalf("%s row %d: %v, missing %v", c.Name, r, v, c.Missing[r])
				}
			}
		case data.Categorical:
			if len(c.Cat) != tab.Rows || c.Num != nil {
				t.Fatalf("%s: %d categories, %d numbers for %d rows", c.Name, len(c.Cat), len(c.Num), tab.Rows)
			}
			for r, v := range c.Cat {
				if c.Missing[r] && v != "" || !c.Missing[r] && prep.IsMissing(v, markers) {
					t.Fatalf("%s row %d: %q, missing %v", c.Name, r, v, c.Missing[r])
				}
			}
		default:
			t.Fatalf("%s: kind %v", c.Name, c.Kind)
		}
	}
}

// writeTable writes tab as CSV, label last, missing cells as the first
// marker, preceded by a byte-order mark (which ReadCSV skips, so a
// header name that itself begins with one survives).
func writeTable(t *testing.T, tab *data.Table, comma rune, markers []string) []byte {
	var buf bytes.Buffer
	buf.WriteString("\uFEFF")
	w := csv.NewWriter(&buf)
	w.Comma = comma
	write := func(rec []string) {
		// encoding/csv writes a lone empty field as an empty line, which
		// readers skip (its own fuzz test notes this); quote it.
		if len(rec) == 1 && rec[0] == "" {
			w.Flush()
			buf.WriteString("\"\"\n")
			return
		}
		if err := w.Write(rec); err != nil {
			t.Fatal(err)
		}
	}
	rec := make([]string, 0, len(tab.Columns)+1)
	for _, c := range tab.Columns {
		rec = append(rec, c.Name)
	}
	write(append(rec, tab.Label))
	for r := range tab.Rows {
		rec = rec[:0]
		for _, c := range tab.Columns {
			switch {
			case c.Missing[r]:
				rec = append(rec, markers[0])
			case c.Kind == data.Numeric:
				rec = append(rec, strconv.FormatFloat(c.Num[r], 'g', -1, 64))
			default:
				rec = append(rec, c.Cat[r])
			}
		}
		write(append(rec, tab.Labels[r]))
	}
	w.Flush()
	return buf.Bytes()
}

func sameTable(t *testing.T, a, b *data.Table) {
	t.Helper()
	if a.Rows != b.Rows || b.Dropped != 0 || len(a.Columns) != len(b.Columns) || a.Label != b.Label {
		t.Fatalf("read back %d rows (%d dropped), %d columns, label %q; first read %d, %d, %q",
			b.Rows, b.Dropped, len(b.Columns), b.Label, a.Rows, len(a.Columns), a.Label)
	}
	for r := range a.Rows {
		if a.Labels[r] != b.Labels[r] {
			t.Fatalf("row %d: label %q read back as %q", r, a.Labels[r], b.Labels[r])
		}
	}
	for j, ca := range a.Columns {
		cb := b.Columns[j]
		if ca.Name != cb.Name || ca.Kind != cb.Kind {
			t.Fatalf("column %d: %q %v read back as %q %v", j, ca.Name, ca.Kind, cb.Name, cb.Kind)
		}
		for r := range a.Rows {
			if ca.Missing[r] != cb.Missing[r] {
				t.Fatalf("%s row %d: missing %v read back as %v", ca.Name, r, ca.Missing[r], cb.Missing[r])
			}
			if ca.Kind == data.Numeric && !ca.Missing[r] && math.Float64bits(ca.Num[r]) != math.Float64bits(cb.Num[r]) {
				t.Fatalf("%s row %d: %v read back as %v", ca.Name, r, ca.Num[r], cb.Num[r])
			}
			if ca.Kind == data.Categorical && ca.Cat[r] != cb.Cat[r] {
				t.Fatalf("%s row %d: %q read back as %q", ca.Name, r, ca.Cat[r], cb.Cat[r])
			}
		}
	}
}
