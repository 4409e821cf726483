package data

import (
	"errors"
	"fmt"
	"io"
	"unicode/utf8"
)

// The limits on one record that ReadCSV enforces unless told otherwise;
// see CSVOptions.MaxFields and CSVOptions.MaxRecordBytes.
//
// A hundred thousand fields is wider than a table this library trains on
// is likely to be (an image of 224×224 pixels has 50,176), and 8 MiB holds
// a hundred thousand values of 80 bytes each. Within them the reader holds, for the
// record being read, at most three copies of its text (encoding/csv keeps
// the line, the fields' bytes and one string of them) and 40 bytes a field
// (an index, a position and a string header), besides the table.
const (
	DefaultMaxFields      = 100_000
	DefaultMaxRecordBytes = 8 << 20
)

// Causes of the problems in the raw input that ReadCSV reports besides
// those of the table's contents.
var (
	// ErrNotUTF8: the input is not UTF-8 text.
	ErrNotUTF8 = errors.New("not UTF-8 text")
	// ErrLineEnds: the lines end in a carriage return alone.
	ErrLineEnds = errors.New("lines end in CR only")
	// ErrTooLarge: a record holds more fields or bytes than the limits
	// allow (CSVOptions.MaxFields, CSVOptions.MaxRecordBytes).
	ErrTooLarge = errors.New("row too large")
)

// inputError is a problem the scanner finds in the raw input, with where
// it is; ReadCSV turns it into a *ParseError.
type inputError struct {
	line, col int // col 0: the whole line
	field     int // 0-based field of the record; -1: none
	header    bool
	err       error
}

func (e *inputError) Error() string { return e.err.Error() }

// scanner hands its source on to encoding/csv unchanged, less a UTF-8
// byte-order mark at the start, and checks on the way what encoding/csv
// does not: that the text is UTF-8, that the lines do not end in a bare
// CR, and that no record holds more than maxFields fields or maxBytes
// bytes. It follows the records' structure (quotes, separators, line
// breaks, as RFC 4180 and encoding/csv define them) closely enough to
// count fields and lines; where the quoting is wrong, encoding/csv
// reaches the spot first and reports it.
//
// On a problem the scanner hands on every byte before it, then the error,
// so that the records before it are read and checked as usual, and the
// first problem in the file is the one reported. Its memory is fixed: it
// keeps no record, only counts.
type scanner struct {
	src       io.Reader
	comma     rune
	maxFields int
	maxBytes  int
	name      func(Fix) string // words the advice; see CSVOptions.Advise

	buf  []byte // read from src, not yet handed on: buf[r:w]
	r, w int
	eof  bool  // src has ended
	err  error // src's error
	bad  *inputError
	// begun: the start of the input has been checked for a byte-order
	// mark.
	begun bool

	line, col int // of the next byte, from 1
	state     int
	content   bool // the record has begun (blank lines are no records)
	fields    int  // fields begun in the record
	bytes     int  // bytes of the record so far
	recLine   int  // the line the record starts on
	records   int  // records completed
	sawLF     bool // a line break outside quotes has been seen
	// special marks the bytes that need a look: all but ASCII other than
	// the separator, the quote and the line breaks.
	special [256]bool
}

// States of a record's structure.
const (
	atFieldStart = iota
	inUnquoted
	inQuoted
	quoteInQuoted // after a quote in a quoted field: its end, or the first of ""
)

func newScanner(src io.Reader, comma rune, maxFields, maxBytes int, name func(Fix) string) *scanner {
	s := &scanner{src: src, comma: comma, maxFields: maxFields, maxBytes: maxBytes, name: name,
		buf: make([]byte, 64<<10), line: 1, col: 1}
	for c := utf8.RuneSelf; c < 256; c++ {
		s.special[c] = true
	}
	s.special['"'], s.special['\n'], s.special['\r'] = true, true, true
	if comma < utf8.RuneSelf {
		s.special[comma] = true
	}
	return s
}

// done reports that nothing more will come from src.
func (s *scanner) done() bool { return s.eof || s.err != nil }

// fill reads more from src after buf[r:w].
func (s *scanner) fill() {
	if s.r > 0 {
		s.w = copy(s.buf, s.buf[s.r:s.w])
		s.r = 0
	}
	// io.Reader allows (0, nil); give up after as many as bufio does.
	for range 100 {
		n, err := s.src.Read(s.buf[s.w:])
		s.w += n
		switch {
		case err == io.EOF:
			s.eof = true
			return
		case err != nil:
			s.err = err
			return
		case n > 0:
			return
		}
	}
	s.err = io.ErrNoProgress
}

// Read hands on checked bytes; p must hold a UTF-8 character whole
// (bufio, which encoding/csv reads through, asks for thousands of bytes).
func (s *scanner) Read(p []byte) (int, error) {
	if len(p) < utf8.UTFMax {
		return 0, io.ErrShortBuffer
	}
	for {
		if s.bad != nil {
			return 0, s.bad
		}
		if !s.begun {
			if s.w-s.r < 3 && !s.done() {
				s.fill()
				continue
			}
			s.begin()
			continue
		}
		n := s.scan(p)
		if n > 0 {
			return n, nil
		}
		if s.bad != nil {
			continue
		}
		if s.done() {
			if s.r < s.w {
				// Only a sequence the scanner must see whole can be left:
				// a UTF-8 character cut short.
				s.failHere(fmt.Errorf("%w: the file ends inside a UTF-8 character (byte 0x%02X starts one whose other bytes are missing): the file is cut short or is not UTF-8; %s", ErrNotUTF8, s.buf[s.r], convertAdvice))
				continue
			}
			if s.err != nil {
				return 0, s.err
			}
			return 0, io.EOF
		}
		s.fill()
	}
}

const convertAdvice = "convert the file to UTF-8, e.g. with iconv -f latin1 -t utf-8 FILE > NEW.csv (after -f, the encoding the file was written in: latin1, cp1252, …)"

// begin checks the start of the input for a byte-order mark.
func (s *scanner) begin() {
	s.begun = true
	b := s.buf[s.r:s.w]
	switch {
	case len(b) >= 3 && b[0] == 0xEF && b[1] == 0xBB && b[2] == 0xBF:
		s.r += 3 // UTF-8's byte-order mark is no part of the text
	case len(b) >= 2 && (b[0] == 0xFF && b[1] == 0xFE || b[0] == 0xFE && b[1] == 0xFF):
		s.bad = &inputError{line: 1, col: 1, field: -1, err: fmt.Errorf("%w: the file starts with a UTF-16 byte-order mark (bytes %X %X): it is UTF-16 text; convert it to UTF-8, e.g. with iconv -f utf-16 -t utf-8 FILE > NEW.csv", ErrNotUTF8, b[0], b[1])}
	}
}

// failHere records a problem at the next byte, in the field it belongs
// to.
func (s *scanner) failHere(err error) {
	s.bad = &inputError{line: s.line, col: s.col, field: max(s.fields-1, 0), header: s.records == 0, err: err}
}

// scan checks bytes of buf[r:w] and copies them into p until p is full,
// the buffer holds no more that can be decided on, or a problem is found.
func (s *scanner) scan(p []byte) int {
	n := 0
	for s.r < s.w {
		if s.content && s.state != quoteInQuoted {
			// Ordinary ASCII inside a record, the bulk of a file: copied
			// in one go, moving no state but the counts.
			j, end := s.r, min(s.w, s.r+len(p)-n, s.r+s.maxBytes-s.bytes)
			for j < end && !s.special[s.buf[j]] {
				j++
			}
			if k := j - s.r; k > 0 {
				copy(p[n:], s.buf[s.r:j])
				n, s.r, s.col, s.bytes = n+k, j, s.col+k, s.bytes+k
				if s.state == atFieldStart {
					s.state = inUnquoted
				}
				continue
			}
		}
		c := s.buf[s.r]
		rn, size := rune(c), 1
		if c >= utf8.RuneSelf {
			rest := s.buf[s.r:s.w]
			if !utf8.FullRune(rest) {
				// The rest of the character is still to come, or, if the
				// source has ended, Read reports it cut short.
				return n
			}
			if rn, size = utf8.DecodeRune(rest); rn == utf8.RuneError && size == 1 {
				s.failHere(fmt.Errorf("%w: byte 0x%02X is not UTF-8%s; %s", ErrNotUTF8, c, latin1(c), convertAdvice))
				return n
			}
		}
		if n+size > len(p) {
			return n
		}
		if c == '\r' && s.state != inQuoted && !s.sawLF {
			// A CR outside quotes before any LF: a CR LF, a CR that ends
			// the input (encoding/csv drops it), or a line end of their
			// own that encoding/csv would not see.
			if s.r+1 == s.w && !s.done() {
				return n
			}
			if s.r+1 < s.w && s.buf[s.r+1] != '\n' {
				s.failHere(fmt.Errorf("%w: this line ends in a carriage return (CR) alone, as classic Mac OS wrote text files, and a CSV line ends in LF or CR LF (RFC 4180), so the whole file would read as one line; convert the line endings, e.g. with tr '\\r' '\\n' < FILE > NEW.csv", ErrLineEnds))
				return n
			}
		}
		if !s.step(rn, size) {
			return n
		}
		n += copy(p[n:], s.buf[s.r:s.r+size])
		s.r += size
		if c == '\n' {
			s.line++
			s.col = 1
		} else {
			s.col += size
		}
	}
	return n
}

// latin1 says what byte c would be in Latin-1, a hint to the encoding the
// file was written in.
func latin1(c byte) string {
	if c < 0xA0 {
		return ""
	}
	return fmt.Sprintf(" (in Latin-1 it is %q)", string(rune(c)))
}

// step moves the record's structure on by one character; false: the
// character breaks a limit, and s.bad says how.
func (s *scanner) step(rn rune, size int) bool {
	if !s.content && rn != '\n' && rn != '\r' {
		s.content, s.recLine, s.fields, s.bytes = true, s.line, 1, 0
	}
	// The line break that ends the record is not counted.
	if s.content && (s.state == inQuoted || rn != '\n' && rn != '\r') {
		if s.bytes += size; s.bytes > s.maxBytes {
			s.bad = &inputError{line: s.recLine, field: -1, header: s.records == 0, err: fmt.Errorf("%w: the record starting on this line is longer than %d bytes, the most a row may hold; a row this long is no table row: look for a quote that is never closed, or a file that is not CSV%s", ErrTooLarge, s.maxBytes, s.raise("MaxRecordBytes", "a longer row"))}
			return false
		}
	}
	switch s.state {
	case atFieldStart, inUnquoted:
		switch {
		case rn == s.comma:
			return s.separator(size)
		case rn == '\n':
			s.endRecord()
		case rn == '"' && s.state == atFieldStart:
			s.state = inQuoted
		default:
			s.state = inUnquoted // a quote inside is encoding/csv's to report
		}
	case inQuoted:
		if rn == '"' {
			s.state = quoteInQuoted
		}
	case quoteInQuoted:
		switch rn {
		case '"':
			s.state = inQuoted
		case s.comma:
			return s.separator(size)
		case '\n':
			s.endRecord()
		case '\r': // of a CR LF
		default:
			s.state = inUnquoted // encoding/csv reports the stray quote
		}
	}
	return true
}

func (s *scanner) separator(size int) bool {
	if s.fields >= s.maxFields {
		s.bad = &inputError{line: s.line, col: s.col + size, field: -1, header: s.records == 0, err: fmt.Errorf("%w: the row has more than %d fields, the most a row may hold; a row this wide is no table row: check that the file is separated by the separator the reader expects, and look for a long run of separators%s", ErrTooLarge, s.maxFields, s.raise("MaxFields", "a wider table"))}
		return false
	}
	s.state = atFieldStart
	s.fields++
	return true
}

// raise words the advice to raise a limit, if the caller has a setting
// for it.
func (s *scanner) raise(setting, what string) string {
	if n := s.name(Fix{Setting: setting}); n != "" {
		return fmt.Sprintf(" (%s needs a larger %s)", what, n)
	}
	return ""
}

func (s *scanner) endRecord() {
	s.sawLF = true
	s.state = atFieldStart
	if s.content {
		s.records++
	}
	s.content, s.fields, s.bytes = false, 0, 0
}
