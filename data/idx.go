package data

import (
	"bufio"
	"compress/flate"
	"compress/gzip"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
)

// IDX is one array read from an IDX file, the format of the MNIST family of
// image datasets: a small big-endian header giving the element type and the
// size of each dimension, then the elements in row-major order. Only
// unsigned bytes are supported, which is what image and label files hold.
//
// For an image file Dims is {N, rows, cols}; for a label file it is {N}.
// Data holds the product of Dims bytes, the last dimension varying fastest.
type IDX struct {
	Dims   []int
	Data   []byte
	Source string // file name, for errors
}

// Limits of ReadIDX. They are checked against the header before any
// payload is read, so a damaged or hostile header cannot make the reader
// allocate more than it is allowed to.
const (
	// MaxIDXDims is the largest number of dimensions accepted. Image files
	// have 3 and label files 1; 4 leaves room for colour images.
	MaxIDXDims = 4
	// MaxIDXBytes caps the payload a header may declare, and each of its
	// dimensions (2 GiB, well above the 47 MB of the largest file of the
	// family). On 32-bit platforms the cap is lowered to the largest int.
	MaxIDXBytes = 1 << 31
)

// idxChunk is the first buffer size when reading a payload. The buffer
// doubles as data arrives, so a truncated file with a huge declared size
// fails having allocated about twice what it really held, not what it
// declared.
const idxChunk = 1 << 16

// idxUint8 is the type code of unsigned bytes, the one element type read.
const idxUint8 = 0x08

// idxTypeNames are the element types the IDX format defines.
var idxTypeNames = map[byte]string{
	0x08: "unsigned byte",
	0x09: "signed byte",
	0x0B: "16-bit integer",
	0x0C: "32-bit integer",
	0x0D: "32-bit float",
	0x0E: "64-bit float",
}

// Sentinel causes of the errors of ReadIDX and IDXSet, carried by a
// *ParseError whose message gives the byte offset of the problem (in the
// decompressed stream, for a gzip file).
var (
	ErrIDXHeader   = errors.New("not a valid IDX header")
	ErrIDXType     = errors.New("unsupported IDX element type")
	ErrIDXTooLarge = errors.New("IDX array too large")
	ErrTruncated   = errors.New("file ends before the data its header declares")
	ErrTrailing    = errors.New("bytes after the end of the data the header declares")
	ErrCompressed  = errors.New("corrupt gzip stream")
	ErrIDXShape    = errors.New("image and label arrays do not match")
	ErrIDXLabel    = errors.New("label out of range")
)

// ReadIDXFile opens and reads one IDX file, gzip-compressed or not; see
// ReadIDX.
func ReadIDXFile(path string) (*IDX, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return ReadIDX(f, path)
}

// ReadIDX reads one IDX array of unsigned bytes from r. The stream may be
// gzip-compressed, as the files are distributed: a gzip stream is
// recognised by its first two bytes (0x1f 0x8b), which can never begin a
// raw IDX file, whose first two bytes are zero. source names the input in
// errors.
//
// Every error is a *ParseError naming source and the byte offset. Its
// cause is one of ErrIDXHeader, ErrIDXType, ErrIDXTooLarge, ErrTruncated,
// ErrTrailing and ErrCompressed, or the error of r itself. The whole
// stream must be the one array: bytes after it are an error, so that a
// file of the wrong kind or a concatenation is not read as if it were
// good.
func ReadIDX(r io.Reader, source string) (*IDX, error) {
	br := bufio.NewReader(r)
	var in io.Reader = br
	if magic, _ := br.Peek(2); len(magic) == 2 && magic[0] == 0x1f && magic[1] == 0x8b {
		zr, err := gzip.NewReader(br)
		if err != nil {
			return nil, idxReadError(source, 0, "gzip header", err)
		}
		defer zr.Close()
		in = zr
	}

	// Magic number: two zero bytes, the type code, the number of
	// dimensions.
	var head [4]byte
	if n, err := io.ReadFull(in, head[:]); err != nil {
		return nil, idxReadError(source, int64(n), "the 4-byte magic number", err)
	}
	if head[0] != 0 || head[1] != 0 {
		return nil, idxError(source, 0, ErrIDXHeader, "the first two bytes are 0x%02x 0x%02x, want 0x00 0x00", head[0], head[1])
	}
	if head[2] != idxUint8 {
		if name, ok := idxTypeNames[head[2]]; ok {
			return nil, idxError(source, 2, ErrIDXType, "element type 0x%02x (%s); only 0x%02x (%s) is supported", head[2], name, idxUint8, idxTypeNames[idxUint8])
		}
		return nil, idxError(source, 2, ErrIDXHeader, "0x%02x is not an IDX element type code", head[2])
	}
	nd := int(head[3])
	if nd < 1 || nd > MaxIDXDims {
		return nil, idxError(source, 3, ErrIDXHeader, "%d dimensions; want 1 to %d", nd, MaxIDXDims)
	}

	// Dimensions, then the payload size they imply, checked against the
	// cap before anything is allocated for it.
	raw := make([]byte, 4*nd)
	if n, err := io.ReadFull(in, raw); err != nil {
		return nil, idxReadError(source, 4+int64(n), fmt.Sprintf("the %d dimension sizes", nd), err)
	}
	dims := make([]int, nd)
	var total uint64 = 1
	limit := uint64(MaxIDXBytes)
	if uint64(math.MaxInt) < limit {
		limit = uint64(math.MaxInt)
	}
	tooLarge := false
	for i := range dims {
		d := uint64(binary.BigEndian.Uint32(raw[4*i:]))
		if d > limit {
			tooLarge = true
		}
		dims[i] = int(min(d, limit)) // clamped only when tooLarge, and then unused
		if d == 0 {
			total = 0
		}
	}
	if total != 0 {
		for _, d := range dims {
			if tooLarge || total > limit/uint64(d) {
				tooLarge = true
				break
			}
			total *= uint64(d)
		}
	}
	if tooLarge {
		return nil, idxError(source, 4, ErrIDXTooLarge, "dimensions %s declare more than the %d-byte limit", dimsString(raw), limit)
	}
	headerLen := int64(4 + 4*nd)

	// Payload, read in growing chunks so that memory follows the data that
	// really arrives.
	size := int(total)
	buf := make([]byte, min(size, idxChunk))
	got := 0
	for {
		n, err := io.ReadFull(in, buf[got:])
		got += n
		if err != nil {
			return nil, idxReadError(source, headerLen+int64(got), fmt.Sprintf("the %d-byte payload declared by dimensions %s", size, dimsString(raw)), err)
		}
		if got == size {
			break
		}
		next := make([]byte, min(size, 2*len(buf)))
		copy(next, buf)
		buf = next
	}

	// The stream must end here. For gzip, reading to the end also checks
	// the stream's checksum.
	var one [1]byte
	n, err := io.ReadFull(in, one[:])
	if n > 0 {
		return nil, idxError(source, headerLen+int64(size), ErrTrailing, "data continues after the %d-byte payload declared by dimensions %s", size, dimsString(raw))
	}
	if err != io.EOF {
		return nil, idxReadError(source, headerLen+int64(size), "the end of the stream", err)
	}
	return &IDX{Dims: dims, Data: buf, Source: source}, nil
}

// dimsString formats the raw dimension sizes as 60000×28×28.
func dimsString(raw []byte) string {
	s := ""
	for i := 0; i+4 <= len(raw); i += 4 {
		if i > 0 {
			s += "×"
		}
		s += strconv.FormatUint(uint64(binary.BigEndian.Uint32(raw[i:])), 10)
	}
	return s
}

func idxError(source string, off int64, cause error, format string, args ...any) error {
	return &ParseError{File: source, Err: fmt.Errorf("byte %d: %w: %s", off, cause, fmt.Sprintf(format, args...))}
}

// idxReadError classifies a failed read at byte off while reading what:
// an early end is ErrTruncated, a fault in the gzip layer ErrCompressed,
// anything else the reader's own error.
func idxReadError(source string, off int64, what string, err error) error {
	var corrupt flate.CorruptInputError
	switch {
	case errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF):
		return idxError(source, off, ErrTruncated, "reading %s", what)
	case errors.Is(err, gzip.ErrHeader) || errors.Is(err, gzip.ErrChecksum) || errors.As(err, &corrupt):
		return &ParseError{File: source, Err: fmt.Errorf("byte %d: %w: reading %s: %w", off, ErrCompressed, what, err)}
	}
	return &ParseError{File: source, Err: fmt.Errorf("byte %d: reading %s: %w", off, what, err)}
}

// IDXSet builds a training set from an image array and its label array,
// as the MNIST family ships them: images {N, …} give N rows of the product
// of the other dimensions' features; labels {N} give each row's class, a
// number below classes.
//
// With scale, pixels are divided by 255 so that features lie in [0, 1];
// without it they keep their byte values 0 to 255. Targets use the
// square-loss encodings of Set: one ±1 column when classes is 2 (label 0
// is −1, label 1 is +1), one-hot rows otherwise. Classes are named by
// their numbers, "0", "1", ….
//
// Mismatched arrays give a *ParseError with ErrIDXShape, a label not below
// classes one with ErrIDXLabel and its byte offset in the label file.
func IDXSet[T Float](images, labels *IDX, classes int, scale bool) (*Set[T], error) {
	if classes < 2 {
		return nil, fmt.Errorf("data: IDXSet with %d classes; a classifier needs at least 2", classes)
	}
	rows, features, err := idxPair(images, labels)
	if err != nil {
		return nil, err
	}
	outputs := classes
	if classes == 2 {
		outputs = 1
	}
	labelStart := 4 + 4*len(labels.Dims)
	y := make([]T, rows*outputs)
	for i, c := range labels.Data {
		if int(c) >= classes {
			return nil, &ParseError{File: labels.Source, Err: fmt.Errorf("byte %d: %w: item %d has label %d, not below %d classes", labelStart+i, ErrIDXLabel, i, c, classes)}
		}
		switch {
		case outputs == 1 && c == 1:
			y[i] = 1
		case outputs == 1:
			y[i] = -1
		default:
			y[i*outputs+int(c)] = 1
		}
	}
	x := make([]T, len(images.Data))
	if scale {
		for i, v := range images.Data {
			x[i] = T(v) / 255
		}
	} else {
		for i, v := range images.Data {
			x[i] = T(v)
		}
	}
	names := make([]string, classes)
	for i := range names {
		names[i] = strconv.Itoa(i)
	}
	return &Set[T]{X: x, Y: y, Rows: rows, Features: features, Outputs: outputs, Classes: names}, nil
}

// idxPair checks that images and labels belong together: one label per
// image, at least one image, images of non-zero size.
func idxPair(images, labels *IDX) (rows, features int, err error) {
	if images == nil || labels == nil {
		return 0, 0, errors.New("data: images and labels need both an image and a label array")
	}
	if err := images.check(); err != nil {
		return 0, 0, err
	}
	if err := labels.check(); err != nil {
		return 0, 0, err
	}
	if len(labels.Dims) != 1 {
		return 0, 0, &ParseError{File: labels.Source, Err: fmt.Errorf("%w: labels have %d dimensions, want 1", ErrIDXShape, len(labels.Dims))}
	}
	rows = images.Dims[0]
	if labels.Dims[0] != rows {
		return 0, 0, &ParseError{File: labels.Source, Err: fmt.Errorf("%w: %d labels for the %d images of %s", ErrIDXShape, labels.Dims[0], rows, images.Source)}
	}
	if rows == 0 {
		return 0, 0, &ParseError{File: images.Source, Err: ErrEmpty}
	}
	features = len(images.Data) / rows
	if features == 0 {
		return 0, 0, &ParseError{File: images.Source, Err: fmt.Errorf("%w: images of zero size", ErrIDXShape)}
	}
	return rows, features, nil
}

// check verifies that an IDX built by hand is consistent: Data holds the
// product of Dims bytes.
func (a *IDX) check() error {
	if len(a.Dims) < 1 {
		return &ParseError{File: a.Source, Err: fmt.Errorf("%w: no dimensions", ErrIDXShape)}
	}
	n := 1
	for _, d := range a.Dims {
		if d < 0 || (d > 0 && n > math.MaxInt/d) {
			return &ParseError{File: a.Source, Err: fmt.Errorf("%w: dimensions %v", ErrIDXShape, a.Dims)}
		}
		n *= d
	}
	if n != len(a.Data) {
		return &ParseError{File: a.Source, Err: fmt.Errorf("%w: dimensions %v need %d bytes, Data holds %d", ErrIDXShape, a.Dims, n, len(a.Data))}
	}
	return nil
}

// IDXTable turns an images/labels pair into a Table, so that images go
// through the same preprocessing as a CSV file's columns: one numeric
// column per pixel, named p0, p1, … in row-major order, holding the byte
// divided by 255 (so a pixel column of a CSV file written the same way
// gives the same table), and the labels as their numbers, "0", "1", ….
// Lines are the items' positions, from 1. The errors are IDXSet's.
func IDXTable(images, labels *IDX) (*Table, error) {
	rows, width, err := idxPair(images, labels)
	if err != nil {
		return nil, err
	}
	t := &Table{Source: images.Source, Label: "label", Rows: rows, Labels: make([]string, rows), Lines: make([]int, rows),
		Columns: make([]Column, width)}
	for j := range t.Columns {
		c := &t.Columns[j]
		c.Name, c.Kind, c.Num = "p"+strconv.Itoa(j), Numeric, make([]float64, rows)
		for r := range rows {
			c.Num[r] = float64(images.Data[r*width+j]) / 255
		}
	}
	for r, l := range labels.Data {
		t.Labels[r] = strconv.Itoa(int(l))
		t.Lines[r] = r + 1
	}
	return t, nil
}
