package data

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"unicode/utf8"

	"github.com/rhomb/rhomb/data/prep"
)

// MissingPolicy says what ReadCSV does with a row that holds a missing
// value (a cell equal to one of CSVOptions.Missing).
type MissingPolicy int

const (
	// MissingFail, the zero value, stops at the first missing value with a
	// *ParseError wrapping ErrMissing that names the file, line, column and
	// field. It is the default so that missing data is never handled
	// silently: the caller chooses to drop or keep it.
	MissingFail MissingPolicy = iota
	// MissingDrop leaves the row out of the Table and counts it in
	// Table.Dropped.
	MissingDrop
	// MissingKeep keeps the row with Column.Missing set for the cell
	// (Num NaN, Cat ""), for the preprocessing pipeline to impute. A
	// missing label is never kept: a label column under MissingKeep
	// behaves as under MissingFail.
	MissingKeep
)

func (p MissingPolicy) String() string {
	switch p {
	case MissingFail:
		return "MissingFail"
	case MissingDrop:
		return "MissingDrop"
	case MissingKeep:
		return "MissingKeep"
	}
	return "MissingPolicy(" + strconv.Itoa(int(p)) + ")"
}

// CSVOptions says how ReadCSV reads a file. Only Label is required; every
// other zero value is a sensible default.
//
// Column names in Label, Kinds, Ignore and OnMissingIn are compared with
// the header's names after surrounding spaces are trimmed; a name that is
// not in the header is an error (ErrNoLabel, whose text reads "no column
// of that name in the header"), so that a typo never passes unnoticed.
type CSVOptions struct {
	// Label names the label column. Required: empty or not in the header
	// is a *ParseError wrapping ErrNoLabel that lists the header. Labels
	// are read as text whatever they look like; a Kinds entry for the
	// label column is ignored.
	Label string
	// Kinds overrides the kind of the named feature columns. A column not
	// named, or named with Auto, is Numeric if its first non-missing value
	// in the file (whether or not that row is kept) parses with
	// prep.ParseNumber, and Categorical otherwise; an infinity or an
	// overflow such as 1e999 counts as numeric, and is then reported as
	// ErrInfinite rather than silently turning the column into text. nil:
	// every column Auto.
	Kinds map[string]Kind
	// Ignore names columns to skip entirely: they are not parsed, checked
	// or returned (the row must still have the header's number of fields).
	// nil: no column is skipped. The label column cannot be ignored.
	Ignore []string
	// Missing lists the cell values read as missing, compared after
	// trimming surrounding spaces (quoted or not: "NA" and NA are the
	// same). nil: prep.DefaultMissing (empty, NA, NaN, null). An empty
	// non-nil slice: no value is missing, and an empty numeric cell is an
	// error.
	Missing []string
	// OnMissing is what to do with a row holding a missing value; zero:
	// MissingFail. When a row holds several, the first MissingFail column
	// from the left stops the read, else any MissingDrop column drops it,
	// else it is kept.
	OnMissing MissingPolicy
	// OnMissingIn overrides OnMissing for the named columns, e.g. drop the
	// rows that lack a measurement but keep those that lack only an
	// optional category. nil: OnMissing for every column.
	OnMissingIn map[string]MissingPolicy
	// Comma separates fields; zero: ','. It cannot be a quote, a line
	// break, or an invalid rune.
	Comma rune
	// MaxFields is the most fields a record (the header or a row) may
	// hold, and MaxRecordBytes the most bytes, line breaks inside quotes
	// included; zero: DefaultMaxFields and DefaultMaxRecordBytes. A record
	// beyond either is a *ParseError wrapping ErrTooLarge, found while the
	// record is read, so that a file that is no table (a line of ten
	// million separators, a quote never closed) costs memory by the limit,
	// not by its size.
	MaxFields, MaxRecordBytes int
	// Advise words the settings that error messages advise changing, for
	// a program whose users set them in their own way (a command line's
	// flags): it gets the change and returns how the user asks for it, or
	// "" when the user cannot (that advice is then left out). nil: the
	// messages name the fields of CSVOptions, as a Go caller sets them.
	Advise func(Fix) string
}

// Fix is a change of the reader's settings that an error message advises
// or refers to, for CSVOptions.Advise to word.
type Fix struct {
	// Setting is the CSVOptions field: "Label", "Kinds", "Ignore",
	// "Missing", "OnMissing", "OnMissingIn", "MaxFields" or
	// "MaxRecordBytes".
	Setting string
	// Column is the column the change is for, if for one: a Kinds,
	// Ignore or OnMissingIn entry.
	Column string
	// Value is the value set, if the message names one: a Kind for Kinds
	// ("Numeric", "Categorical"), a cell value for Missing, a
	// MissingPolicy for OnMissing and OnMissingIn ("MissingDrop").
	Value string
}

// words is how o's messages name settings.
func (o *CSVOptions) words() func(Fix) string {
	if o.Advise != nil {
		return o.Advise
	}
	return goWords
}

// reader returns an encoding/csv reader of r through the checks of the
// raw input.
func (o *CSVOptions) reader(r io.Reader, comma rune) *csv.Reader {
	maxFields, maxBytes := o.MaxFields, o.MaxRecordBytes
	if maxFields <= 0 {
		maxFields = DefaultMaxFields
	}
	if maxBytes <= 0 {
		maxBytes = DefaultMaxRecordBytes
	}
	cr := csv.NewReader(newScanner(r, comma, maxFields, maxBytes, o.words()))
	cr.Comma = comma
	return cr
}

// NewCSVReader returns an encoding/csv reader of r that checks the input
// as ReadCSV does: UTF-8 text, lines that end in LF or CR LF, records
// within MaxFields and MaxRecordBytes. It is for a program that reads
// rows itself, such as a serving path, which must refuse what training
// refused. It takes Comma (zero: ','), the limits and Advise from o; the
// caller sets the reader's other fields. A problem in the input comes out
// of Read as an error that CSVInputError turns into a *ParseError; the
// reader skips a UTF-8 byte-order mark at the start.
func NewCSVReader(r io.Reader, o CSVOptions) *csv.Reader {
	comma := o.Comma
	if comma == 0 {
		comma = ','
	}
	return o.reader(r, comma)
}

// CSVInputError returns err as a *ParseError naming source when it is a
// problem a reader made by NewCSVReader found in the input, or a syntax
// error of encoding/csv; header, the names read from the header line
// (nil before it is read), names the field, and advise words the settings
// the message advises changing (nil: CSVOptions' fields, as a Go caller
// sets them; a command line passes its flags' words, as for
// CSVOptions.Advise). Other errors come back as they are.
func CSVInputError(err error, source string, header []string, advise func(Fix) string) error {
	var ie *inputError
	var pe *csv.ParseError
	if !errors.As(err, &ie) && !errors.As(err, &pe) {
		return err
	}
	names := make([]string, len(header))
	for i, h := range header {
		names[i] = strings.TrimSpace(h)
	}
	if advise == nil {
		advise = goWords
	}
	rd := &csvRead{source: source, names: names, words: advise}
	return rd.readErr(err)
}

// goWords words a Fix as a Go caller sets it: CSVOptions' fields.
func goWords(f Fix) string {
	switch {
	case f.Setting == "Ignore" && f.Column != "":
		return fmt.Sprintf("CSVOptions.Ignore (listing %q)", f.Column)
	case f.Setting == "Missing":
		return "CSVOptions.Missing"
	case f.Column != "" && f.Value != "":
		return fmt.Sprintf("CSVOptions.%s[%q] = %s", f.Setting, f.Column, f.Value)
	case f.Value != "":
		return fmt.Sprintf("CSVOptions.%s = %s", f.Setting, f.Value)
	}
	return "CSVOptions." + f.Setting
}

// ReadCSV reads a labelled table from CSV (RFC 4180, as encoding/csv reads
// it): a header line of column names, then one row per record. source names
// the input in errors and in Table.Source.
//
// It reads in one pass and keeps no raw records: numbers are parsed as
// they arrive and every distinct category is stored once, so memory grows
// with the table, not with the text. Every value of every row is checked,
// also in rows that are then dropped, so a dropped row never hides a
// broken file. Categorical values and labels are trimmed of surrounding
// spaces, as numbers and missing markers are; the serving path must trim
// them the same way. A UTF-8 byte-order mark before the header is skipped.
// Empty lines are skipped.
//
// The input must be UTF-8 (RFC 3629): the first byte that is not is a
// *ParseError wrapping ErrNotUTF8 with its line, column and field, before
// any text of another encoding can reach a category name or a label, and
// from there a model file. Lines end in LF or CR LF, as encoding/csv reads
// them; a file whose first line ends in a CR alone (classic Mac OS) is
// ErrLineEnds, since encoding/csv would read it as one long line. Both say
// how to convert the file. A record beyond MaxFields or MaxRecordBytes is
// ErrTooLarge.
//
// Problems in the data are returned as a *ParseError whose Err wraps one
// of ErrEmpty, ErrDuplicateHeader, ErrNoLabel, ErrRagged, ErrMissing,
// ErrNotNumber, ErrInfinite, ErrOneClass, ErrNotUTF8, ErrLineEnds or
// ErrTooLarge (test with errors.Is), or wraps
// the *csv.ParseError of a syntax error (test with errors.As). A file
// whose rows are all dropped is ErrEmpty; a kept feature column with no
// values in the kept rows is ErrMissing, since nothing could impute it.
// Line and Column are 1-based (Column counts bytes, as encoding/csv does);
// Line 0 means the whole file and Column 0 the whole line. Invalid options
// and read errors of r are returned as plain errors.
func ReadCSV(r io.Reader, source string, o CSVOptions) (*Table, error) {
	comma := o.Comma
	if comma == 0 {
		comma = ','
	}
	if err := o.check(comma); err != nil {
		return nil, err
	}
	markers := o.Missing
	if markers == nil {
		markers = prep.DefaultMissing
	}
	cr := o.reader(r, comma)
	cr.FieldsPerRecord = -1 // ragged rows are reported here, with advice
	cr.ReuseRecord = true   // values are copied out; records are not kept

	rd := &csvRead{source: source, cr: cr, words: o.words()}
	header, err := cr.Read()
	if err == io.EOF {
		return nil, rd.fail(0, 0, "", fmt.Errorf("%w: the file holds no header and no rows; give it a header line of column names and at least one row", ErrEmpty))
	}
	if err != nil {
		return nil, rd.readErr(err)
	}
	cols, label, err := rd.header(header, o)
	if err != nil {
		return nil, err
	}

	var lines []int
	records, dropped := 0, 0
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, rd.readErr(err)
		}
		records++
		line, _ := cr.FieldPos(0)
		if len(rec) != len(header) {
			return nil, rd.ragged(rec, len(header))
		}
		drop := false
		for _, c := range cols {
			v := rec[c.field]
			if prep.IsMissing(v, markers) {
				switch c.policy {
				case MissingFail:
					return nil, rd.missing(c, label, v)
				case MissingDrop:
					drop = true
				}
				c.rowMiss = true
				continue
			}
			c.rowMiss = false
			if err := rd.parse(c, v); err != nil {
				return nil, err
			}
		}
		if drop {
			dropped++
			continue
		}
		for _, c := range cols {
			c.keep()
		}
		lines = append(lines, line)
	}

	rows := len(lines)
	if records == 0 {
		return nil, rd.fail(0, 0, "", fmt.Errorf("%w: the file has a header but no rows; add rows below the header", ErrEmpty))
	}
	if rows == 0 {
		return nil, rd.fail(0, 0, "", fmt.Errorf("%w: all %d rows hold missing values and were dropped; %s", ErrEmpty, dropped, rd.either("keep them to impute later with %s, or fix the file", "fix the file", Fix{Setting: "OnMissing", Value: "MissingKeep"})))
	}
	t := &Table{Source: source, Label: label.name, Lines: lines, Rows: rows, Dropped: dropped}
	for _, c := range cols {
		if c == label {
			continue
		}
		if c.values == 0 {
			return nil, rd.fail(0, 0, c.name, fmt.Errorf("%w: the column holds no values in the %d rows kept; %s", ErrMissing, rows, rd.either("leave it out with %s", "leave it out", Fix{Setting: "Ignore", Column: c.name})))
		}
		col := Column{Name: c.name, Kind: c.kind, Missing: c.miss}
		if c.kind == Numeric {
			col.Num = c.num
		} else {
			col.Cat = c.cat
		}
		t.Columns = append(t.Columns, col)
	}
	t.Labels = label.cat
	for _, l := range t.Labels[1:] {
		if l != t.Labels[0] {
			return t, nil
		}
	}
	all := fmt.Sprintf("all %d rows are", rows)
	if rows == 1 {
		all = "the only row is"
	}
	return nil, rd.fail(0, 0, label.name, fmt.Errorf("%w: %s %q, and a classifier needs rows of at least two classes; %s", ErrOneClass, all, t.Labels[0], rd.either("check that %s names the label column", "check that the label column is the right one", Fix{Setting: "Label"})))
}

// either words advice that names a setting (format holds one %s), or
// gives plain, when the caller has no such setting.
func (rd *csvRead) either(format, plain string, f Fix) string {
	if n := rd.words(f); n != "" {
		return fmt.Sprintf(format, n)
	}
	return plain
}

// check reports options that no file could satisfy.
func (o *CSVOptions) check(comma rune) error {
	if comma == '"' || comma == '\r' || comma == '\n' || !utf8.ValidRune(comma) || comma == utf8.RuneError {
		return fmt.Errorf("data: CSVOptions.Comma %q cannot separate fields: it must not be a quote, a line break or an invalid rune", comma)
	}
	if o.OnMissing < MissingFail || o.OnMissing > MissingKeep {
		return fmt.Errorf("data: CSVOptions.OnMissing is %v; use MissingFail, MissingDrop or MissingKeep", o.OnMissing)
	}
	for name, p := range o.OnMissingIn {
		if p < MissingFail || p > MissingKeep {
			return fmt.Errorf("data: CSVOptions.OnMissingIn[%q] is %v; use MissingFail, MissingDrop or MissingKeep", name, p)
		}
	}
	for name, k := range o.Kinds {
		if k != Auto && k != Numeric && k != Categorical {
			return fmt.Errorf("data: CSVOptions.Kinds[%q] is %v; use Auto, Numeric or Categorical", name, k)
		}
	}
	for _, name := range o.Ignore {
		if o.Label != "" && strings.TrimSpace(name) == strings.TrimSpace(o.Label) {
			words := o.Advise
			if words == nil {
				words = goWords
			}
			what := words(Fix{Setting: "Ignore"})
			if what == "" {
				what = "the list of columns to leave out"
			}
			return fmt.Errorf("data: %s lists the label column %q; a table needs its labels", what, name)
		}
	}
	return nil
}

// csvCol is the state of one column being read: the label or a feature.
type csvCol struct {
	name     string
	field    int // index in the record
	kind     Kind
	declared bool // kind set in CSVOptions.Kinds
	policy   MissingPolicy
	ownRule  bool // policy set in CSVOptions.OnMissingIn
	// The value and line that fixed an Auto column's kind, for messages.
	firstValue string
	firstLine  int

	num    []float64
	cat    []string
	miss   []bool
	values int // non-missing values kept

	intern map[string]string // one copy of each category

	// This row's value, until the row is kept or dropped.
	rowNum  float64
	rowCat  string
	rowMiss bool
}

// keep appends this row's value. Before an Auto column's kind is known
// every kept value was missing, so only miss grows; decide fills num or
// cat up to it.
func (c *csvCol) keep() {
	c.miss = append(c.miss, c.rowMiss)
	if !c.rowMiss {
		c.values++
	}
	switch c.kind {
	case Numeric:
		if c.rowMiss {
			c.rowNum = math.NaN()
		}
		c.num = append(c.num, c.rowNum)
	case Categorical:
		if c.rowMiss {
			c.rowCat = ""
		}
		c.cat = append(c.cat, c.rowCat)
	}
}

func (c *csvCol) decide(k Kind, v string, line int) {
	c.kind = k
	c.firstValue = strings.Clone(strings.TrimSpace(v))
	c.firstLine = line
	for range c.miss {
		if k == Numeric {
			c.num = append(c.num, math.NaN())
		} else {
			c.cat = append(c.cat, "")
		}
	}
}

// csvRead holds what error messages need.
type csvRead struct {
	source string
	cr     *csv.Reader
	names  []string
	words  func(Fix) string
}

func (rd *csvRead) fail(line, col int, field string, err error) *ParseError {
	return &ParseError{File: rd.source, Line: line, Column: col, Field: field, Err: err}
}

func (rd *csvRead) failAt(field int, name string, err error) *ParseError {
	line, col := rd.cr.FieldPos(field)
	return rd.fail(line, col, name, err)
}

// header checks the header against the options and sets up the columns
// to read, in file order.
func (rd *csvRead) header(header []string, o CSVOptions) (cols []*csvCol, label *csvCol, err error) {
	headerLine, _ := rd.cr.FieldPos(0)
	rd.names = make([]string, len(header))
	at := make(map[string]int, len(header))
	for i, h := range header {
		name := strings.Clone(strings.TrimSpace(h))
		if j, dup := at[name]; dup {
			return nil, nil, rd.failAt(i, name, fmt.Errorf("%w: %q is field %d and field %d; rename one of them", ErrDuplicateHeader, name, j+1, i+1))
		}
		at[name] = i
		rd.names[i] = name
	}
	unknown := func(name, where string) error {
		named := ""
		if w := rd.words(Fix{Setting: where}); w != "" {
			named = " (named in " + w + ")"
		}
		return rd.fail(headerLine, 0, name, fmt.Errorf("%w%s; the header has %s", ErrNoLabel, named, rd.list()))
	}
	labelName := strings.TrimSpace(o.Label)
	if labelName == "" {
		return nil, nil, rd.fail(headerLine, 0, "", fmt.Errorf("%w: no label column is named; %s", ErrNoLabel, rd.either("set %s to the label column, one of "+rd.list(), "name the label column, one of "+rd.list(), Fix{Setting: "Label"})))
	}
	if _, ok := at[labelName]; !ok {
		return nil, nil, unknown(labelName, "Label")
	}
	ignored := map[string]bool{}
	for _, name := range o.Ignore {
		name = strings.TrimSpace(name)
		if _, ok := at[name]; !ok {
			return nil, nil, unknown(name, "Ignore")
		}
		ignored[name] = true
	}
	kinds := map[string]Kind{}
	for name, k := range o.Kinds {
		name = strings.TrimSpace(name)
		if _, ok := at[name]; !ok {
			return nil, nil, unknown(name, "Kinds")
		}
		kinds[name] = k
	}
	policies := map[string]MissingPolicy{}
	for name, p := range o.OnMissingIn {
		name = strings.TrimSpace(name)
		if _, ok := at[name]; !ok {
			return nil, nil, unknown(name, "OnMissingIn")
		}
		policies[name] = p
	}
	for i, name := range rd.names {
		if ignored[name] {
			continue
		}
		c := &csvCol{name: name, field: i, policy: o.OnMissing, kind: kinds[name]}
		if p, ok := policies[name]; ok {
			c.policy, c.ownRule = p, true
		}
		c.declared = c.kind != Auto
		if name == labelName {
			c.kind, c.declared = Categorical, true
			if c.policy == MissingKeep {
				c.policy = MissingFail
			}
			label = c
		}
		if c.kind != Numeric {
			c.intern = map[string]string{}
		}
		cols = append(cols, c)
	}
	return cols, label, nil
}

// list names the header's columns for messages, shortened if long.
func (rd *csvRead) list() string {
	const most = 20
	var b strings.Builder
	for i, n := range rd.names {
		if i == most {
			fmt.Fprintf(&b, " and %d more", len(rd.names)-most)
			break
		}
		if i > 0 {
			b.WriteString(", ")
		}
		b.WriteString(strconv.Quote(n))
	}
	return b.String()
}

// parse reads a non-missing value into c's row value, fixing an Auto
// column's kind on its first value.
func (rd *csvRead) parse(c *csvCol, v string) error {
	if c.kind == Auto {
		_, err := prep.ParseNumber(v)
		line, _ := rd.cr.FieldPos(c.field)
		if err == nil || errors.Is(err, ErrInfinite) {
			c.decide(Numeric, v, line)
		} else {
			c.decide(Categorical, v, line)
		}
	}
	if c.kind == Categorical {
		s := strings.TrimSpace(v)
		if k, ok := c.intern[s]; ok {
			s = k
		} else {
			s = strings.Clone(s)
			c.intern[s] = s
		}
		c.rowCat = s
		return nil
	}
	x, err := prep.ParseNumber(v)
	value := strings.TrimSpace(v)
	switch {
	case errors.Is(err, ErrInfinite):
		return rd.failAt(c.field, c.name, fmt.Errorf("%w %q (written as Inf or beyond ±%.4g); %s", ErrInfinite, value, math.MaxFloat64,
			rd.either("replace it, or list it in %s to read it as missing", "replace it", Fix{Setting: "Missing", Value: value})))
	case err != nil:
		why := fmt.Sprintf("the column was read as numeric from its first value %q on line %d", c.firstValue, c.firstLine)
		if c.declared {
			why = rd.either("the column is declared numeric by %s", "the column is declared numeric", Fix{Setting: "Kinds", Column: c.name, Value: "Numeric"})
		}
		var advice []string
		if w := rd.words(Fix{Setting: "Kinds", Column: c.name, Value: "Categorical"}); w != "" {
			advice = append(advice, "if the column holds categories, set "+w)
		}
		if w := rd.words(Fix{Setting: "Missing", Value: value}); w != "" {
			advice = append(advice, fmt.Sprintf("if %q marks a missing value, add it to %s", value, w))
		}
		if len(advice) == 0 {
			advice = append(advice, "fix the value")
		}
		advice[0] = strings.ToUpper(advice[0][:1]) + advice[0][1:]
		return rd.failAt(c.field, c.name, fmt.Errorf("%w: %q; %s. %s", ErrNotNumber, value, why, strings.Join(advice, "; ")))
	}
	c.rowNum = x
	return nil
}

func (rd *csvRead) missing(c, label *csvCol, v string) error {
	what := strconv.Quote(strings.TrimSpace(v))
	if strings.TrimSpace(v) == "" {
		what = "(empty cell)"
	}
	if c == label {
		return rd.failAt(c.field, c.name, fmt.Errorf("%w %s in the label column; every kept row needs its label: %s", ErrMissing, what,
			rd.either("fix the row, or drop such rows with %s", "fix the row", Fix{Setting: "OnMissingIn", Column: c.name, Value: "MissingDrop"})))
	}
	setting, column := "OnMissing", ""
	because := ""
	if c.ownRule {
		setting, column = "OnMissingIn", c.name
		if w := rd.words(Fix{Setting: setting, Column: column, Value: "MissingFail"}); w != "" {
			because = ", refused by " + w
		}
	}
	return rd.failAt(c.field, c.name, fmt.Errorf("%w %s%s; drop or impute missing values: %s", ErrMissing, what, because, rd.dropOrKeep(setting, column)))
}

// dropOrKeep advises dropping the rows with missing values or keeping
// them for imputation.
func (rd *csvRead) dropOrKeep(setting, column string) string {
	drop := rd.words(Fix{Setting: setting, Column: column, Value: "MissingDrop"})
	keep := rd.words(Fix{Setting: setting, Column: column, Value: "MissingKeep"})
	var s string
	switch {
	case drop != "" && keep != "":
		s = fmt.Sprintf("drop such rows with %s, or keep them for the pipeline to impute with %s", drop, keep)
	case drop != "":
		s = "drop such rows with " + drop + ", or fill the cells in"
	case keep != "":
		s = "keep such rows for the pipeline to impute with " + keep + ", or fill the cells in"
	default:
		s = "fill the cells in"
	}
	if column == "" {
		if one := rd.words(Fix{Setting: "OnMissingIn"}); one != "" {
			s += " (" + one + " sets this for one column)"
		}
	}
	return s
}

func (rd *csvRead) ragged(rec []string, want int) error {
	if len(rec) > want {
		return rd.failAt(want, "", fmt.Errorf("%w: the row has %d fields, the header %d; look for an unquoted separator inside a value (quote the value) or a stray separator at the end", ErrRagged, len(rec), want))
	}
	line, _ := rd.cr.FieldPos(0)
	return rd.fail(line, 0, "", fmt.Errorf("%w: the row has %d fields, the header %d; add the missing fields (empty if the values are missing)", ErrRagged, len(rec), want))
}

// readErr wraps a syntax error of encoding/csv, keeping its position, and
// turns a problem the scanner found into a *ParseError.
func (rd *csvRead) readErr(err error) error {
	var ie *inputError
	if errors.As(err, &ie) {
		name, cause := "", ie.err
		switch {
		case ie.field < 0:
		case ie.header:
			cause = fmt.Errorf("field %d of the header: %w", ie.field+1, ie.err)
		case ie.field < len(rd.names):
			name = rd.names[ie.field]
		default:
			cause = fmt.Errorf("field %d, beyond the header's %d: %w", ie.field+1, len(rd.names), ie.err)
		}
		return rd.fail(ie.line, ie.col, name, cause)
	}
	var pe *csv.ParseError
	if !errors.As(err, &pe) {
		return fmt.Errorf("data: reading %s: %w", rd.source, err)
	}
	hint := "fix the file's quoting"
	switch {
	case errors.Is(pe.Err, csv.ErrQuote):
		hint = `a quoted field must end with a quote followed by a separator or the end of the line, and a quote inside it is written twice ("")`
	case errors.Is(pe.Err, csv.ErrBareQuote):
		hint = `a quote inside an unquoted field is not allowed: quote the whole field and write the inner quote twice ("")`
	}
	return rd.fail(pe.Line, pe.Column, "", &csvSyntaxError{pe: pe, hint: hint})
}

// csvSyntaxError is encoding/csv's error with advice; it unwraps to the
// *csv.ParseError, and through it to csv.ErrQuote and the like.
type csvSyntaxError struct {
	pe   *csv.ParseError
	hint string
}

func (e *csvSyntaxError) Error() string { return "CSV syntax: " + e.pe.Err.Error() + "; " + e.hint }
func (e *csvSyntaxError) Unwrap() error { return e.pe }
