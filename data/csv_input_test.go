package data_test

// Tests of what ReadCSV checks in the raw input before the table's
// contents: that it is UTF-8, how its lines end, and how large a record
// is. Each input is read whole and one byte at a time, so that a UTF-8
// character, a CR LF or a separator split between two reads is seen the
// same.

import (
	"bytes"
	"encoding/csv"
	"errors"
	"io"
	"runtime"
	"strings"
	"testing"
	"testing/iotest"
	"unicode/utf8"

	"github.com/rhomb/rhomb/data"
)

// readBoth reads in whole and byte by byte and fails the test unless both
// give the same error.
func readBoth(t *testing.T, in string, o data.CSVOptions) (*data.Table, error) {
	t.Helper()
	tab, err := data.ReadCSV(strings.NewReader(in), "in.csv", o)
	_, err1 := data.ReadCSV(iotest.OneByteReader(strings.NewReader(in)), "in.csv", o)
	if (err == nil) != (err1 == nil) || err != nil && err.Error() != err1.Error() {
		t.Errorf("read whole: %v\nread byte by byte: %v", err, err1)
	}
	return tab, err
}

// firstInvalid is the reference for where UTF-8 breaks: the line and
// byte column of the first byte that does not start a valid character by
// the standard library's decoder (an implementation of RFC 3629), or of
// a character cut short by the end.
func firstInvalid(in string) (line, col int) {
	line, col = 1, 1
	for i := 0; i < len(in); {
		r, size := utf8.DecodeRuneInString(in[i:])
		if r == utf8.RuneError && size == 1 {
			return line, col
		}
		if in[i] == '\n' {
			line, col = line+1, 1
		} else {
			col += size
		}
		i += size
	}
	return 0, 0
}

// TestReadCSVNotUTF8 is the defect report's case first: a city column
// written in Latin-1 (ISO 8859-1), where "ü" is the byte 0xFC and "ä"
// 0xE4. A model trained on it held category names that its own reader
// refused. Positions are counted by hand and checked against
// firstInvalid; the bytes that are not UTF-8 are those RFC 3629 §3 and
// §10 rule out.
func TestReadCSVNotUTF8(t *testing.T) {
	for _, c := range []struct {
		name      string
		in        string
		label     string // default "y"
		line, col int
		field     string
		hint      string
	}{
		// "1.5,M" is five bytes: ü is column 6.
		{"Latin-1 city", "reading,city,state\n1.5,M\xfcnster,on\n2.5,M\xe4rzhausen,off\n0.5,Berlin,on\n-1,Berlin,off\n", "state",
			2, 6, "city", `byte 0xFC is not UTF-8 (in Latin-1 it is "ü")`},
		// Every row before the bad one is read and checked first.
		{"Latin-1 on a later line", "reading,city,state\n0.5,Berlin,on\n2.5,M\xe4rzhausen,off\n", "state",
			3, 6, "city", "0xE4"},
		// C0 AF: "/" in two bytes, an overlong form (RFC 3629 §10).
		{"overlong", "a,y\nx,p\nx\xc0\xafy,q\n", "", 3, 2, "a", "0xC0"},
		// ED A0 80 would be U+D800, a surrogate, which UTF-8 excludes.
		{"surrogate", "a,y\nx,p\nz,\xed\xa0\x80\n", "", 3, 3, "y", "0xED"},
		// F4 90 80 80 would be U+110000, beyond Unicode.
		{"beyond U+10FFFF", "a,y\nx,p\n\xf4\x90\x80\x80,q\n", "", 3, 1, "a", "0xF4"},
		{"lone continuation byte", "a,y\nx,p\nu,q\x80\n", "", 3, 4, "y", "0x80"},
		// A character cut short at the end of the file.
		{"cut short", "a,y\nx,p\nu,\xe2\x82", "", 3, 3, "y", "ends inside a UTF-8 character"},
		// In a quoted value spanning lines, the position is in the file.
		{"quoted, second line", "a,y\n\"two\nl\xe9nes\",p\nx,q\n", "", 3, 2, "a", `"é"`},
		{"header", "a,st\xe4te\n1,p\n", "", 1, 5, "", "field 2 of the header"},
		{"beyond the header", "a,y\n1,p,\xff\n", "", 2, 5, "", "field 3, beyond the header's 2"},
	} {
		t.Run(c.name, func(t *testing.T) {
			if l, col := firstInvalid(c.in); l != c.line || col != c.col {
				t.Fatalf("the test is wrong: the first invalid byte is at %d:%d by the standard library's decoder", l, col)
			}
			if c.label == "" {
				c.label = "y"
			}
			_, err := readBoth(t, c.in, data.CSVOptions{Label: c.label})
			checkParseErrorAt(t, err, data.ErrNotUTF8, "in.csv", c.line, c.col, c.field)
			if err == nil {
				return
			}
			for _, p := range []string{c.hint, "convert the file to UTF-8", "iconv -f latin1 -t utf-8"} {
				if !strings.Contains(err.Error(), p) {
					t.Errorf("message %q lacks %q", err, p)
				}
			}
		})
	}

	// A UTF-16 file says so: its byte-order mark is FF FE (little-endian)
	// or FE FF (big-endian), by the Unicode standard's definition of the
	// mark (U+FEFF).
	for _, bom := range []string{"\xff\xfe", "\xfe\xff"} {
		in := bom + "a\x00,\x00y\x00\n\x00"
		_, err := readBoth(t, in, data.CSVOptions{Label: "y"})
		checkParseErrorAt(t, err, data.ErrNotUTF8, "in.csv", 1, 1, "")
		if err != nil && !strings.Contains(err.Error(), "iconv -f utf-16 -t utf-8") {
			t.Errorf("message %q does not say how to convert UTF-16", err)
		}
	}
}

// TestReadCSVUTF8 reads valid UTF-8 of one to four bytes a character,
// split between reads anywhere, and gets the text back as it was.
func TestReadCSVUTF8(t *testing.T) {
	// 𐍈 (U+10348) is four bytes, € three, ü two.
	in := "\uFEFFcity,note,state\nMünster,€ 5,on\nMärzhausen,𐍈,off\nBerlin,\"a \"\"quoted\"\" 𐍈\nline\",on\n"
	tab, err := readBoth(t, in, data.CSVOptions{Label: "state"})
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(tab.Column("city").Cat, "|"); got != "Münster|Märzhausen|Berlin" {
		t.Errorf("cities %q", got)
	}
	if got := strings.Join(tab.Column("note").Cat, "|"); got != "€ 5|𐍈|a \"quoted\" 𐍈\nline" {
		t.Errorf("notes %q", got)
	}
	// The reference: encoding/csv's own reading of the same text.
	recs, err := csv.NewReader(strings.NewReader(strings.TrimPrefix(in, "\uFEFF"))).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	for r, rec := range recs[1:] {
		if tab.Column("note").Cat[r] != rec[1] {
			t.Errorf("row %d: %q, encoding/csv reads %q", r, tab.Column("note").Cat[r], rec[1])
		}
	}
}

// TestReadCSVLineEnds: encoding/csv ends lines at LF or CR LF (RFC 4180
// writes CR LF), so a file whose lines end in a CR alone, as classic Mac
// OS wrote them, reads as one long line, and the header swallows every
// row. That is said plainly, at the first CR.
func TestReadCSVLineEnds(t *testing.T) {
	crOnly := "a,b,y\r1,2,p\r3,4,q\r"
	if recs, err := csv.NewReader(strings.NewReader(crOnly)).ReadAll(); err != nil || len(recs) != 1 {
		t.Fatalf("the reference changed: encoding/csv reads %d records (%v) from CR-only lines", len(recs), err)
	}
	// "a,b,y" is five bytes: the CR is column 6.
	_, err := readBoth(t, crOnly, data.CSVOptions{Label: "y"})
	checkParseErrorAt(t, err, data.ErrLineEnds, "in.csv", 1, 6, "")
	if err != nil && !strings.Contains(err.Error(), `tr '\r' '\n'`) {
		t.Errorf("message %q does not say how to convert the line ends", err)
	}

	// After a quoted field too.
	_, err = readBoth(t, "\"a\",\"y\"\r\"1\",\"p\"\r", data.CSVOptions{Label: "y"})
	checkParseErrorAt(t, err, data.ErrLineEnds, "in.csv", 1, 8, "")

	// CR LF, the RFC's own line end, and LF read the same; so does a
	// final CR (encoding/csv drops it), and a CR inside a value once
	// the lines have been seen to end in LF, which encoding/csv keeps.
	for _, in := range []string{
		"a,b,y\r\n1,2,p\r\n3,4,q\r\n",
		"a,b,y\n1,2,p\n3,4,q\n",
		"a,b,y\n1,2,p\n3,4,q\r",
		"a,b,y\r\n1,2,p\r\n3,4,q",
	} {
		tab, err := readBoth(t, in, data.CSVOptions{Label: "y"})
		if err != nil {
			t.Errorf("%q: %v", in, err)
			continue
		}
		if tab.Rows != 2 || tab.Labels[1] != "q" {
			t.Errorf("%q: %d rows, labels %q", in, tab.Rows, tab.Labels)
		}
	}
	tab, err := readBoth(t, "a,y\nu,p\nv\rw,q\n", data.CSVOptions{Label: "y"})
	if err != nil {
		t.Fatal(err)
	}
	if got := tab.Column("a").Cat[1]; got != "v\rw" {
		t.Errorf("a CR inside a value reads as %q; encoding/csv keeps it", got)
	}
}

// TestReadCSVLimits checks the limits on a record, at and beyond them.
// Positions are counted by hand.
func TestReadCSVLimits(t *testing.T) {
	three := data.CSVOptions{Label: "y", MaxFields: 3}
	if _, err := readBoth(t, "a,b,y\n1,2,p\n3,4,q\n", three); err != nil {
		t.Errorf("three fields with MaxFields 3: %v", err)
	}
	// Field 4 of line 3 starts at column 7, after "1,2,3,".
	_, err := readBoth(t, "a,b,y\n1,2,p\n1,2,3,4\n", three)
	checkParseErrorAt(t, err, data.ErrTooLarge, "in.csv", 3, 7, "")
	// A separator inside quotes separates nothing.
	if _, err := readBoth(t, "a,b,y\n1,\"2,3,4\",p\n3,4,q\n", three); err != nil {
		t.Errorf("quoted separators counted as fields: %v", err)
	}
	_, err = readBoth(t, "a,b,c,y\n1,2,3,p\n", three)
	checkParseErrorAt(t, err, data.ErrTooLarge, "in.csv", 1, 7, "")
	if err != nil && (!strings.Contains(err.Error(), "more than 3 fields") || !strings.Contains(err.Error(), "CSVOptions.MaxFields")) {
		t.Errorf("message %q does not name the limit", err)
	}

	// Five bytes a record, the line break not counted: "abc,y" with its
	// CR LF and "12,pq" fit; "123,pq" does not, nor does the quoted
	// record that starts on line 3 and holds seven bytes with the LF
	// inside its quotes.
	five := data.CSVOptions{Label: "y", MaxRecordBytes: 5}
	if _, err := readBoth(t, "abc,y\r\n12,pq\n3,q\n", five); err != nil {
		t.Errorf("records of five bytes with MaxRecordBytes 5: %v", err)
	}
	_, err = readBoth(t, "a,y\n12,p\n123,pq\n", five)
	checkParseErrorAt(t, err, data.ErrTooLarge, "in.csv", 3, 0, "")
	if err != nil && (!strings.Contains(err.Error(), "longer than 5 bytes") || !strings.Contains(err.Error(), "CSVOptions.MaxRecordBytes")) {
		t.Errorf("message %q does not name the limit", err)
	}
	_, err = readBoth(t, "a,y\n12,p\n\"1\n2\",q\n", five)
	checkParseErrorAt(t, err, data.ErrTooLarge, "in.csv", 3, 0, "")
}

// TestReadCSVHostileMemory reads files that are no tables and checks that
// the memory the reader allocates (TotalAlloc, all of it, garbage too)
// is bounded by its limits, not by the file: a 10 MB line of separators
// once took 1.0 GB.
//
// What the reader must hold is one record of at most DefaultMaxFields
// fields: encoding/csv keeps the line and the fields' bytes (each grown by
// append, which allocates up to five times the final size over its growth
// at Go's 1.25 growth factor for large slices), a field index (8 bytes)
// and a position (16 bytes) a field (also grown by append), then the
// fields' string and their string headers (16 bytes), each allocated
// once. For a line of separators, one byte a field:
// 5 × (1 + 1 + 8 + 16) + 1 + 16 = 147 bytes a field, 14.7 MB for 100,000.
// For one long field: the line and the bytes grown by append, and one
// string, 5 + 5 + 1 = 11 times the record limit at most, but append of the
// whole line to the bytes allocates once: 5 + 1 + 1 = 7 times.
// The allocator rounds a request up to its size class, by at most an
// eighth (runtime/sizeclasses.go), so each bound is taken 9/8 times.
// Fixed buffers (64 KiB for the scanner, 4 KiB for bufio) and the test's
// own allocations fit in 1 MiB. For these files, of 10 MB and 32 MiB,
// both bounds come to less than twice the input, which the test checks
// too.
func TestReadCSVHostileMemory(t *testing.T) {
	if testing.Short() {
		t.Skip("allocates some 100 MB")
	}
	commas := strings.Repeat(",", 10_000_000)
	const slack = 1 << 20
	fieldsBound := uint64(147*data.DefaultMaxFields*9/8 + slack)
	longBound := uint64(7*data.DefaultMaxRecordBytes*9/8 + slack)
	for _, c := range []struct {
		name  string
		in    []byte
		bound uint64
	}{
		{"row of separators", []byte("a,y\n1,p\n" + commas + "\n"), fieldsBound},
		{"header of separators", []byte(commas + "\n1,p\n"), fieldsBound},
		{"one long field", []byte("a,y\n1,p\n1," + strings.Repeat("x", 32<<20) + "\n"), longBound},
		{"a quote never closed", []byte("a,y\n1,p\n1,\"" + strings.Repeat("x\n", 16<<20) + "\n"), longBound},
	} {
		t.Run(c.name, func(t *testing.T) {
			var before, after runtime.MemStats
			runtime.GC()
			runtime.ReadMemStats(&before)
			_, err := data.ReadCSV(bytes.NewReader(c.in), "in.csv", data.CSVOptions{Label: "y"})
			runtime.ReadMemStats(&after)
			used := after.TotalAlloc - before.TotalAlloc
			t.Logf("input %.1f MB, allocated %.1f MB (%.2f× the input; bound %.1f MB)", float64(len(c.in))/1e6, float64(used)/1e6, float64(used)/float64(len(c.in)), float64(c.bound)/1e6)
			if !errors.Is(err, data.ErrTooLarge) {
				t.Errorf("error %v, want ErrTooLarge", err)
			}
			if used > c.bound || used > 2*uint64(len(c.in)) {
				t.Errorf("allocated %d bytes for %d of input, more than the %d the limits allow or twice the input", used, len(c.in), c.bound)
			}
		})
	}
}

// TestReadCSVAdvise: with Advise set, the messages word the advice as the
// caller's users set it and name no field of CSVOptions; advice the
// caller has no setting for is left out.
func TestReadCSVAdvise(t *testing.T) {
	flags := func(f data.Fix) string {
		switch f.Setting {
		case "Kinds":
			return "--kind " + f.Column + "=" + strings.ToLower(f.Value)
		case "Missing":
			return "--na"
		case "OnMissing", "OnMissingIn":
			return "--missing " + strings.TrimPrefix(f.Value, "Missing")
		case "Ignore":
			return strings.TrimSpace("--skip " + f.Column)
		case "Label":
			return "--label"
		}
		return ""
	}
	goNames := []string{"CSVOptions", "MissingDrop", "MissingKeep", "MissingFail", "Categorical", "OnMissing", "Kinds["}
	for _, c := range badCases {
		o := c.opt
		o.Advise = flags
		_, err := data.ReadCSV(strings.NewReader(c.in), "in.csv", o)
		if !errors.Is(err, c.cause) {
			t.Errorf("%s: %v, want %v", c.name, err, c.cause)
			continue
		}
		for _, g := range goNames {
			if strings.Contains(err.Error(), g) {
				t.Errorf("%s: message %q names %s", c.name, err, g)
			}
		}
	}
	_, err := data.ReadCSV(strings.NewReader("a,y\n1.5,p\nhigh,q\n"), "in.csv", data.CSVOptions{Label: "y", Advise: flags})
	if err == nil || !strings.Contains(err.Error(), "set --kind a=categorical") || !strings.Contains(err.Error(), "add it to --na") {
		t.Errorf("message %v does not give the caller's words", err)
	}
	_, err = data.ReadCSV(strings.NewReader("a,b,y\n1,2,3,p\n"), "in.csv", data.CSVOptions{Label: "y", MaxFields: 3, Advise: flags})
	if !errors.Is(err, data.ErrTooLarge) || strings.Contains(err.Error(), "MaxFields") || strings.Contains(err.Error(), "needs a larger") {
		t.Errorf("advice the caller has no setting for was given: %v", err)
	}
	// The label left out: the caller's word for the columns to skip.
	_, err = data.ReadCSV(strings.NewReader("a,y\n1,p\n"), "in.csv", data.CSVOptions{Label: "y", Ignore: []string{"y"}, Advise: flags})
	if err == nil || strings.Contains(err.Error(), "CSVOptions") {
		t.Errorf("label ignored: %v", err)
	}
}

// TestNewCSVReader: a program that reads rows itself gets the same checks
// and the same positions as ReadCSV, through encoding/csv's own Reader.
func TestNewCSVReader(t *testing.T) {
	in := "\uFEFFreading,city,state\n1.5,Berlin,on\n2.5,M\xe4rzhausen,off\n"
	r := data.NewCSVReader(strings.NewReader(in), data.CSVOptions{})
	header, err := r.Read()
	if err != nil || strings.Join(header, "|") != "reading|city|state" {
		t.Fatalf("header %q, %v", header, err)
	}
	if rec, err := r.Read(); err != nil || rec[1] != "Berlin" {
		t.Fatalf("row %q, %v", rec, err)
	}
	_, err = r.Read()
	checkParseErrorAt(t, data.CSVInputError(err, "in.csv", header, nil), data.ErrNotUTF8, "in.csv", 3, 6, "city")
	// Syntax errors of encoding/csv come out as ParseErrors too, and other
	// errors as they are.
	_, err = data.NewCSVReader(strings.NewReader("a,b\"c\n"), data.CSVOptions{}).Read()
	checkParseErrorAt(t, data.CSVInputError(err, "in.csv", nil, nil), csv.ErrBareQuote, "in.csv", 1, 4, "")
	if err := data.CSVInputError(io.ErrUnexpectedEOF, "in.csv", nil, nil); err != io.ErrUnexpectedEOF {
		t.Errorf("other error came back as %v", err)
	}
}
