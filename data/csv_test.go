package data_test

import (
	"bytes"
	"encoding/csv"
	"errors"
	"io"
	"math"
	"strconv"
	"strings"
	"testing"
	"testing/iotest"
	"unicode/utf8"
	"unsafe"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/internal/opendata"
)

// badCase is an input ReadCSV must reject, and where. Unless a comment
// says otherwise, every expected line and column is counted by hand on
// the input beside it (lines and byte columns from 1, as encoding/csv
// numbers them; FieldPos gives the first byte of a field, the opening
// quote of a quoted one). Column 0 is the whole line, line 0 the whole
// file, as data.ParseError documents.
type badCase struct {
	name  string
	in    string
	opt   data.CSVOptions
	cause error
	line  int
	col   int
	field string
	hint  string // advice the message must give
}

var badCases = []badCase{
	{name: "empty file", in: "", opt: data.CSVOptions{Label: "y"},
		cause: data.ErrEmpty, hint: "header"},
	{name: "blank lines only", in: "\n\n\r\n", opt: data.CSVOptions{Label: "y"},
		cause: data.ErrEmpty, hint: "header"},
	{name: "header only", in: "a,y\n", opt: data.CSVOptions{Label: "y"},
		cause: data.ErrEmpty, hint: "add rows"},
	{name: "every row dropped", in: "a,y\nNA,p\n,q\n", opt: data.CSVOptions{Label: "y", OnMissing: data.MissingDrop},
		cause: data.ErrEmpty, hint: "MissingKeep"},

	{name: "duplicate header", in: "a,b,a,y\n1,2,3,p\n", opt: data.CSVOptions{Label: "y"},
		cause: data.ErrDuplicateHeader, line: 1, col: 5, field: "a", hint: "rename"},
	// " b " (column 3) and " b" (column 7) are the same name once trimmed.
	{name: "duplicate header after trimming", in: "a, b , b,y\n1,2,3,p\n", opt: data.CSVOptions{Label: "y"},
		cause: data.ErrDuplicateHeader, line: 1, col: 7, field: "b", hint: "rename"},

	{name: "no such label", in: "a,y\n1,p\n", opt: data.CSVOptions{Label: "z"},
		cause: data.ErrNoLabel, line: 1, field: "z", hint: `"a", "y"`},
	{name: "label not set", in: "a,y\n1,p\n", opt: data.CSVOptions{},
		cause: data.ErrNoLabel, line: 1, hint: `set CSVOptions.Label to the label column, one of "a", "y"`},
	{name: "unknown ignored column", in: "a,y\n1,p\n", opt: data.CSVOptions{Label: "y", Ignore: []string{"q"}},
		cause: data.ErrNoLabel, line: 1, field: "q", hint: "CSVOptions.Ignore"},
	{name: "unknown kind column", in: "a,y\n1,p\n", opt: data.CSVOptions{Label: "y", Kinds: map[string]data.Kind{"q": data.Numeric}},
		cause: data.ErrNoLabel, line: 1, field: "q", hint: "CSVOptions.Kinds"},
	{name: "unknown missing-policy column", in: "a,y\n1,p\n", opt: data.CSVOptions{Label: "y", OnMissingIn: map[string]data.MissingPolicy{"q": data.MissingKeep}},
		cause: data.ErrNoLabel, line: 1, field: "q", hint: "CSVOptions.OnMissingIn"},

	// The fourth field of line 3 starts at column 7.
	{name: "too many fields", in: "a,b,y\n1,2,p\n1,2,q,4\n", opt: data.CSVOptions{Label: "y"},
		cause: data.ErrRagged, line: 3, col: 7, hint: "has 4 fields, the header 3"},
	{name: "too few fields", in: "a,b,y\n1,2,p\n1,2\n", opt: data.CSVOptions{Label: "y"},
		cause: data.ErrRagged, line: 3, hint: "has 2 fields, the header 3"},

	{name: "missing value", in: "a,b,y\n1,2,p\n1,NA,q\n", opt: data.CSVOptions{Label: "y"},
		cause: data.ErrMissing, line: 3, col: 3, field: "b", hint: "drop or impute missing values"},
	// An empty field starts where its separator ends: column 3.
	{name: "empty cell", in: "a,b,y\n1,,p\n", opt: data.CSVOptions{Label: "y"},
		cause: data.ErrMissing, line: 2, col: 3, field: "b", hint: "(empty cell)"},
	{name: "custom marker", in: "a,b,y\n1,?,p\n", opt: data.CSVOptions{Label: "y", Missing: []string{"?"}},
		cause: data.ErrMissing, line: 2, col: 3, field: "b", hint: "MissingDrop"},
	// A missing label is never kept (CSVOptions documents it).
	{name: "missing label kept", in: "a,y\n1,p\n2,NA\n", opt: data.CSVOptions{Label: "y", OnMissing: data.MissingKeep},
		cause: data.ErrMissing, line: 3, col: 3, field: "y", hint: `OnMissingIn["y"] = MissingDrop`},
	// A MissingFail column stops the read even when a MissingDrop column
	// of the same row would drop it.
	{name: "fail beats drop", in: "a,b,y\n1,2,p\nNA,NA,q\n", opt: data.CSVOptions{Label: "y", OnMissing: data.MissingDrop, OnMissingIn: map[string]data.MissingPolicy{"b": data.MissingFail}},
		cause: data.ErrMissing, line: 3, col: 4, field: "b", hint: `refused by CSVOptions.OnMissingIn["b"] = MissingFail`},
	{name: "column with no values", in: "a,b,y\nNA,1,p\n,2,q\n", opt: data.CSVOptions{Label: "y", OnMissing: data.MissingKeep},
		cause: data.ErrMissing, field: "a", hint: "CSVOptions.Ignore"},

	{name: "not a number", in: "a,y\n1.5,p\n2,q\nabc,r\n", opt: data.CSVOptions{Label: "y"},
		cause: data.ErrNotNumber, line: 4, col: 1, field: "a", hint: `from its first value "1.5" on line 2. If the column holds categories, set CSVOptions.Kinds["a"] = Categorical`},
	{name: "not a number, declared", in: "a,y\nx,p\n", opt: data.CSVOptions{Label: "y", Kinds: map[string]data.Kind{"a": data.Numeric}},
		cause: data.ErrNotNumber, line: 2, col: 1, field: "a", hint: `declared numeric by CSVOptions.Kinds["a"] = Numeric`},
	// Rows that are dropped are checked too.
	{name: "not a number in a dropped row", in: "a,b,y\n1,2,p\nabc,NA,q\n", opt: data.CSVOptions{Label: "y", OnMissing: data.MissingDrop},
		cause: data.ErrNotNumber, line: 3, col: 1, field: "a", hint: "Categorical"},
	// A quoted field's position is that of its opening quote.
	{name: "not a number, quoted", in: "a,b,y\n1,2,p\n3,\"x y\",q\n", opt: data.CSVOptions{Label: "y"},
		cause: data.ErrNotNumber, line: 3, col: 3, field: "b", hint: "CSVOptions.Missing"},
	// The record starting on line 3 spans two lines; z is on line 4 at
	// column 4 (y" , z).
	{name: "not a number after a line break", in: "a,b,y\n1,2,p\n\"x\ny\",z,q\n", opt: data.CSVOptions{Label: "y", Kinds: map[string]data.Kind{"a": data.Categorical}},
		cause: data.ErrNotNumber, line: 4, col: 4, field: "b", hint: "Categorical"},
	{name: "semicolons", in: "a;b;y\n1;2;p\n1;x;q\n", opt: data.CSVOptions{Label: "y", Comma: ';'},
		cause: data.ErrNotNumber, line: 3, col: 3, field: "b", hint: "Categorical"},

	// 1e999 overflows float64, whose largest value is about 1.8e308
	// (IEEE 754 binary64).
	{name: "overflow", in: "a,y\n1,p\n1e999,q\n", opt: data.CSVOptions{Label: "y"},
		cause: data.ErrInfinite, line: 3, col: 1, field: "a", hint: "replace it"},
	{name: "infinity first", in: "a,y\nInf,p\n1,q\n", opt: data.CSVOptions{Label: "y"},
		cause: data.ErrInfinite, line: 2, col: 1, field: "a", hint: "CSVOptions.Missing"},
	{name: "negative infinity", in: "a,y\n1,p\n -inf ,q\n", opt: data.CSVOptions{Label: "y"},
		cause: data.ErrInfinite, line: 3, col: 1, field: "a", hint: "CSVOptions.Missing"},

	{name: "one class", in: "a,y\n1,p\n2,p\n", opt: data.CSVOptions{Label: "y"},
		cause: data.ErrOneClass, field: "y", hint: "at least two classes"},
	{name: "one class left after dropping", in: "a,y\n1,p\nNA,q\n", opt: data.CSVOptions{Label: "y", OnMissing: data.MissingDrop},
		cause: data.ErrOneClass, field: "y", hint: `the only row is "p"`},
}

// syntaxCases are CSV syntax errors. The reference for where they are is
// encoding/csv itself: the test reads each input with csv.Reader and
// expects the same line and column, and also states them, counted by hand.
var syntaxCases = []struct {
	name      string
	in        string
	cause     error
	line, col int
}{
	// The quote in q"r is the fourth byte of line 3.
	{"bare quote", "a,y\n1,p\n2,q\"r\n", csv.ErrBareQuote, 3, 4},
	// "p" closes at column 5 and is followed by x.
	{"text after closing quote", "a,y\n1,\"p\"x\n", csv.ErrQuote, 2, 5},
	// The file ends inside a quoted field, after column 5 of line 2.
	{"unterminated quote", "a,y\n1,\"p\n", csv.ErrQuote, 2, 6},
	{"bare quote in header", "a\"b,y\n1,p\n", csv.ErrBareQuote, 1, 2},
}

func TestReadCSVErrors(t *testing.T) {
	for _, c := range badCases {
		t.Run(c.name, func(t *testing.T) {
			tab, err := data.ReadCSV(strings.NewReader(c.in), "in.csv", c.opt)
			checkParseError(t, tab, err, c.cause, c.line, c.col, c.field)
			if err != nil && !strings.Contains(err.Error(), c.hint) {
				t.Errorf("message %q lacks the advice %q", err, c.hint)
			}
			// The sentinels are prep's values, so a serving path that
			// imports only prep can test for them (data/table.go).
			if !errors.Is(err, c.cause) {
				t.Errorf("errors.Is(%v, prep sentinel) false", err)
			}
		})
	}
}

func TestReadCSVSyntaxErrors(t *testing.T) {
	for _, c := range syntaxCases {
		t.Run(c.name, func(t *testing.T) {
			tab, err := data.ReadCSV(strings.NewReader(c.in), "in.csv", data.CSVOptions{Label: "y"})
			checkParseError(t, tab, err, c.cause, c.line, c.col, "")
			var cpe *csv.ParseError
			if !errors.As(err, &cpe) {
				t.Fatalf("%v does not wrap a *csv.ParseError", err)
			}
			// The reference: encoding/csv's own report on the same input.
			_, want := csv.NewReader(strings.NewReader(c.in)).ReadAll()
			var ref *csv.ParseError
			if !errors.As(want, &ref) {
				t.Fatalf("encoding/csv accepts %q: %v", c.in, want)
			}
			var pe *data.ParseError
			errors.As(err, &pe)
			if pe.Line != ref.Line || pe.Column != ref.Column {
				t.Errorf("at %d:%d, encoding/csv says %d:%d", pe.Line, pe.Column, ref.Line, ref.Column)
			}
			if !strings.Contains(err.Error(), `("")`) {
				t.Errorf("message %q does not say how to write a quote", err)
			}
		})
	}
}

func checkParseError(t *testing.T, tab *data.Table, err, cause error, line, col int, field string) {
	t.Helper()
	if err == nil {
		t.Fatalf("no error; read %d rows", tab.Rows)
	}
	if tab != nil {
		t.Errorf("a table came back with the error %v", err)
	}
	checkParseErrorAt(t, err, cause, "in.csv", line, col, field)
}

func checkParseErrorAt(t *testing.T, err, cause error, file string, line, col int, field string) {
	t.Helper()
	var pe *data.ParseError
	if !errors.As(err, &pe) {
		t.Fatalf("%v (%T) is not a *data.ParseError", err, err)
	}
	if !errors.Is(err, cause) {
		t.Errorf("%v: errors.Is(err, %v) is false", err, cause)
	}
	if pe.File != file || pe.Line != line || pe.Column != col || pe.Field != field {
		t.Errorf("%v: at %s:%d:%d field %q, want %s:%d:%d field %q", err, pe.File, pe.Line, pe.Column, pe.Field, file, line, col, field)
	}
}

// Options that no file could satisfy are plain errors, not ParseErrors.
func TestReadCSVBadOptions(t *testing.T) {
	for name, o := range map[string]data.CSVOptions{
		"quote separator":    {Label: "y", Comma: '"'},
		"newline separator":  {Label: "y", Comma: '\n'},
		"invalid separator":  {Label: "y", Comma: utf8.RuneError},
		"policy":             {Label: "y", OnMissing: 7},
		"column policy":      {Label: "y", OnMissingIn: map[string]data.MissingPolicy{"a": -1}},
		"kind":               {Label: "y", Kinds: map[string]data.Kind{"a": 9}},
		"label ignored":      {Label: "y", Ignore: []string{"y"}},
		"label ignored, pad": {Label: "y", Ignore: []string{" y "}},
	} {
		_, err := data.ReadCSV(strings.NewReader("a,y\n1,p\n2,q\n"), "in.csv", o)
		var pe *data.ParseError
		if err == nil || errors.As(err, &pe) {
			t.Errorf("%s: got %v, want a plain error", name, err)
		}
	}
}

func TestReadCSV(t *testing.T) {
	// A byte-order mark, spaces around names and values, a blank line, a
	// quoted value with a separator and one spanning two lines, and a
	// column whose first values are missing (MissingKeep). Expected values
	// are read off the input by hand.
	in := "\uFEFF id , size,colour , y \n" +
		"7, NA ,red,p\n" +
		"\n" +
		"8, 2.5 ,\"dark, blue\", q\n" +
		"9,-3e2,\"red\",p\n" +
		"10,4,\"two\nlines\",q\n"
	tab, err := data.ReadCSV(strings.NewReader(in), "in.csv", data.CSVOptions{
		Label:     "y",
		Ignore:    []string{"id"},
		OnMissing: data.MissingKeep,
	})
	if err != nil {
		t.Fatal(err)
	}
	if tab.Source != "in.csv" || tab.Label != "y" || tab.Rows != 4 || tab.Dropped != 0 {
		t.Fatalf("table %+v", tab)
	}
	if got := strings.Join(tab.Labels, ","); got != "p,q,p,q" {
		t.Errorf("labels %s", got)
	}
	if got := tab.Classes(); len(got) != 2 || got[0] != "p" || got[1] != "q" {
		t.Errorf("classes %v", got)
	}
	// Line 3 is blank; the last record starts on line 6.
	if got := tab.Lines; len(got) != 4 || got[0] != 2 || got[1] != 4 || got[2] != 5 || got[3] != 6 {
		t.Errorf("lines %v, want [2 4 5 6]", got)
	}
	if len(tab.Columns) != 2 || tab.Columns[0].Name != "size" || tab.Columns[1].Name != "colour" {
		t.Fatalf("columns %+v", tab.Columns)
	}
	size := tab.Column("size")
	if size.Kind != data.Numeric || size.Cat != nil || len(size.Num) != 4 {
		t.Fatalf("size %+v", size)
	}
	if !math.IsNaN(size.Num[0]) || !size.Missing[0] || size.Num[1] != 2.5 || size.Num[2] != -300 || size.Num[3] != 4 {
		t.Errorf("size %v missing %v", size.Num, size.Missing)
	}
	colour := tab.Column("colour")
	if colour.Kind != data.Categorical || colour.Num != nil {
		t.Fatalf("colour %+v", colour)
	}
	if got := strings.Join(colour.Cat, "|"); got != "red|dark, blue|red|two\nlines" {
		t.Errorf("colour %q", got)
	}
	if got := colour.Missing; len(got) != 4 || got[0] || got[1] || got[2] || got[3] {
		t.Errorf("colour missing %v", got)
	}
	// Every distinct category is stored once, so the table does not pin
	// the text of the lines it came from.
	if unsafe.StringData(colour.Cat[0]) != unsafe.StringData(colour.Cat[2]) {
		t.Error("the two reds are separate copies")
	}
	if unsafe.StringData(tab.Labels[0]) != unsafe.StringData(tab.Labels[2]) {
		t.Error("the two labels p are separate copies")
	}
}

func TestReadCSVKinds(t *testing.T) {
	in := "code,grade,y\n01,3,p\n02,NA,q\n"
	tab, err := data.ReadCSV(strings.NewReader(in), "in.csv", data.CSVOptions{
		Label:     "y",
		Kinds:     map[string]data.Kind{"code": data.Categorical, "grade": data.Auto},
		OnMissing: data.MissingKeep,
	})
	if err != nil {
		t.Fatal(err)
	}
	// Declared categorical keeps the text as written; Auto reads 3 as a
	// number.
	if c := tab.Column("code"); c.Kind != data.Categorical || c.Cat[0] != "01" || c.Cat[1] != "02" {
		t.Errorf("code %+v", c)
	}
	if c := tab.Column("grade"); c.Kind != data.Numeric || c.Num[0] != 3 || !c.Missing[1] || !math.IsNaN(c.Num[1]) {
		t.Errorf("grade %+v", c)
	}
	// A column whose first value is not a number is categorical, even if
	// later values are numbers.
	tab, err = data.ReadCSV(strings.NewReader("a,y\nx,p\n2,q\n"), "in.csv", data.CSVOptions{Label: "y"})
	if err != nil {
		t.Fatal(err)
	}
	if c := tab.Columns[0]; c.Kind != data.Categorical || c.Cat[1] != "2" {
		t.Errorf("a %+v", c)
	}
}

func TestReadCSVMissingMarkers(t *testing.T) {
	in := "a,b,y\nNA,?,p\n1,2,q\n"
	// With only "?" as a marker, NA is a category and ? is missing.
	tab, err := data.ReadCSV(strings.NewReader(in), "in.csv", data.CSVOptions{
		Label: "y", Missing: []string{"?"}, OnMissing: data.MissingKeep,
	})
	if err != nil {
		t.Fatal(err)
	}
	if a := tab.Column("a"); a.Kind != data.Categorical || a.Cat[0] != "NA" || a.Missing[0] {
		t.Errorf("a %+v", a)
	}
	if b := tab.Column("b"); b.Kind != data.Numeric || !b.Missing[0] || b.Num[1] != 2 {
		t.Errorf("b %+v", b)
	}
	// An empty list: nothing is missing, so an empty numeric cell is not a
	// number.
	_, err = data.ReadCSV(strings.NewReader("a,y\n1,p\n,q\n"), "in.csv", data.CSVOptions{Label: "y", Missing: []string{}})
	if !errors.Is(err, data.ErrNotNumber) {
		t.Errorf("empty cell with no markers: %v", err)
	}
	// nil: prep.DefaultMissing, each of whose markers is missing.
	for _, m := range prep.DefaultMissing {
		tab, err := data.ReadCSV(strings.NewReader("a,y\n1,p\n"+m+",q\n"), "in.csv", data.CSVOptions{Label: "y", OnMissing: data.MissingKeep})
		if err != nil || !tab.Columns[0].Missing[1] {
			t.Errorf("marker %q not missing: %v", m, err)
		}
	}
}

func TestReadCSVDrop(t *testing.T) {
	// Rows 3 and 5 lack a; row 4 lacks only the optional note, which is
	// kept for imputation while rows lacking a are dropped.
	in := "a,note,y\n1,x,p\n,y,q\n2,,q\nNA,z,p\n3,w,q\n"
	tab, err := data.ReadCSV(strings.NewReader(in), "in.csv", data.CSVOptions{
		Label:       "y",
		OnMissing:   data.MissingDrop,
		OnMissingIn: map[string]data.MissingPolicy{"note": data.MissingKeep},
	})
	if err != nil {
		t.Fatal(err)
	}
	if tab.Rows != 3 || tab.Dropped != 2 {
		t.Fatalf("%d rows, %d dropped; want 3 and 2", tab.Rows, tab.Dropped)
	}
	if l := tab.Lines; l[0] != 2 || l[1] != 4 || l[2] != 6 {
		t.Errorf("lines %v, want [2 4 6]", l)
	}
	if n := tab.Column("note"); n.Cat[0] != "x" || !n.Missing[1] || n.Cat[1] != "" || n.Cat[2] != "w" {
		t.Errorf("note %+v", n)
	}
	// A missing label is dropped when asked for.
	tab, err = data.ReadCSV(strings.NewReader("a,y\n1,p\n2,\n3,q\n"), "in.csv", data.CSVOptions{
		Label: "y", OnMissing: data.MissingKeep, OnMissingIn: map[string]data.MissingPolicy{"y": data.MissingDrop},
	})
	if err != nil || tab.Rows != 2 || tab.Dropped != 1 {
		t.Fatalf("drop missing labels: %v", err)
	}
}

// TestReadCSVIris writes the vendored Iris rows to CSV in memory and reads
// them back: 150 rows, 50 per species (UCI Iris description;
// REFERENCES.md), and every number exactly as vendored, since
// strconv.FormatFloat(v, 'g', -1, 64) is the shortest text that parses
// back to the same float64 (strconv documentation).
func TestReadCSVIris(t *testing.T) {
	x, species, err := opendata.Iris()
	if err != nil {
		t.Fatal(err)
	}
	names := []string{"sepal_length", "sepal_width", "petal_length", "petal_width"}
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	w.Write(append(append([]string{}, names...), "species"))
	for r, row := range x {
		rec := make([]string, 0, 5)
		for _, v := range row {
			rec = append(rec, strconv.FormatFloat(v, 'g', -1, 64))
		}
		w.Write(append(rec, opendata.IrisSpecies[species[r]]))
	}
	w.Flush()
	tab, err := data.ReadCSV(&buf, "iris.csv", data.CSVOptions{Label: "species"})
	if err != nil {
		t.Fatal(err)
	}
	if tab.Rows != 150 {
		t.Fatalf("%d rows, want 150", tab.Rows)
	}
	count := map[string]int{}
	for _, l := range tab.Labels {
		count[l]++
	}
	for _, s := range opendata.IrisSpecies {
		if count[s] != 50 {
			t.Errorf("%s: %d rows, want 50", s, count[s])
		}
	}
	if len(count) != 3 {
		t.Errorf("classes %v", count)
	}
	for j, name := range names {
		c := tab.Column(name)
		if c == nil || c.Kind != data.Numeric {
			t.Fatalf("column %s: %+v", name, c)
		}
		for r := range x {
			if c.Num[r] != x[r][j] {
				t.Fatalf("%s row %d: %v, vendored %v", name, r, c.Num[r], x[r][j])
			}
		}
	}
	// Line r+2: line 1 is the header and no record spans lines.
	for r, l := range tab.Lines {
		if l != r+2 {
			t.Fatalf("row %d on line %d", r, l)
		}
	}
}

// The reader streams: fed one byte at a time it reads the same table, and
// a read error of the input comes back as it is, not as a ParseError.
func TestReadCSVStream(t *testing.T) {
	in := "\uFEFFa,b,y\n1,\"x\ny\",p\n2,z,q\n"
	whole, err := data.ReadCSV(strings.NewReader(in), "in.csv", data.CSVOptions{Label: "y"})
	if err != nil {
		t.Fatal(err)
	}
	bytewise, err := data.ReadCSV(iotest.OneByteReader(strings.NewReader(in)), "in.csv", data.CSVOptions{Label: "y"})
	if err != nil {
		t.Fatal(err)
	}
	sameTable(t, whole, bytewise)
	if whole.Columns[0].Name != "a" || whole.Lines[1] != 4 {
		t.Errorf("columns %+v, lines %v", whole.Columns, whole.Lines)
	}

	broken := errors.New("disk gone")
	for _, r := range []io.Reader{
		iotest.ErrReader(broken),
		io.MultiReader(strings.NewReader("a,y\n1,p\n"), iotest.ErrReader(broken)),
	} {
		_, err = data.ReadCSV(r, "in.csv", data.CSVOptions{Label: "y"})
		var pe *data.ParseError
		if !errors.Is(err, broken) || errors.As(err, &pe) || !strings.Contains(err.Error(), "in.csv") {
			t.Errorf("read error came back as %v", err)
		}
	}
}
