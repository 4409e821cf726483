package data_test

import (
	"bytes"
	"compress/gzip"
	"encoding/binary"
	"errors"
	"fmt"
	"runtime"
	"strconv"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/data"
)

// encodeIDX writes an IDX stream as the format defines it (the MNIST
// distribution's description, from memory): 0x00 0x00, the type code, the
// number of dimensions, each dimension as a big-endian uint32, then the
// payload. It is written here, apart from the reader, so that the tests
// check the reader against the format and not against itself.
func encodeIDX(typ byte, dims []uint32, payload []byte) []byte {
	b := []byte{0, 0, typ, byte(len(dims))}
	for _, d := range dims {
		b = binary.BigEndian.AppendUint32(b, d)
	}
	return append(b, payload...)
}

func gzipBytes(t testing.TB, b []byte) []byte {
	t.Helper()
	var buf bytes.Buffer
	w := gzip.NewWriter(&buf)
	if _, err := w.Write(b); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// idxErrorCase is a malformed stream, the sentinel it must give and text
// its message must hold. The offsets are counted by hand from the layout
// in encodeIDX: magic 4 bytes, then 4 per dimension, then the payload.
type idxErrorCase struct {
	name  string
	in    []byte
	cause error
	msg   []string
}

func idxErrorCases() []idxErrorCase {
	return []idxErrorCase{
		{"empty", nil, data.ErrTruncated, []string{"byte 0", "magic"}},
		{"short magic", []byte{0, 0, 8}, data.ErrTruncated, []string{"byte 3", "magic"}},
		{"nonzero first bytes", append([]byte{0x01, 0x00}, encodeIDX(8, []uint32{1}, []byte{7})[2:]...), data.ErrIDXHeader, []string{"byte 0", "0x01 0x00"}},
		{"text file", []byte("hello, world\n"), data.ErrIDXHeader, []string{"byte 0", "0x68 0x65"}},
		{"float type", encodeIDX(0x0D, []uint32{1}, []byte{0, 0, 0, 0}), data.ErrIDXType, []string{"byte 2", "0x0d", "32-bit float", "only 0x08"}},
		{"int32 type", encodeIDX(0x0C, []uint32{1}, []byte{0, 0, 0, 0}), data.ErrIDXType, []string{"byte 2", "0x0c", "32-bit integer"}},
		{"unknown type", encodeIDX(0x05, []uint32{1}, []byte{0}), data.ErrIDXHeader, []string{"byte 2", "0x05 is not an IDX element type"}},
		{"no dims", encodeIDX(8, nil, nil), data.ErrIDXHeader, []string{"byte 3", "0 dimensions"}},
		{"five dims", encodeIDX(8, []uint32{1, 1, 1, 1, 1}, []byte{0}), data.ErrIDXHeader, []string{"byte 3", "5 dimensions", "1 to 4"}},
		{"short dims", encodeIDX(8, []uint32{3, 28, 28}, nil)[:10], data.ErrTruncated, []string{"byte 10", "3 dimension sizes"}},
		{"product overflows", encodeIDX(8, []uint32{0xFFFFFFFF, 0xFFFFFFFF, 0xFFFFFFFF}, nil), data.ErrIDXTooLarge, []string{"byte 4", "4294967295×4294967295×4294967295"}},
		{"above the cap", encodeIDX(8, []uint32{1 << 16, 1<<15 + 1}, nil), data.ErrIDXTooLarge, []string{"byte 4", "65536×32769"}},
		{"short payload", encodeIDX(8, []uint32{2, 5}, []byte{1, 2, 3, 4, 5, 6, 7}), data.ErrTruncated, []string{"byte 19", "10-byte payload", "2×5"}},
		{"no payload", encodeIDX(8, []uint32{60000, 28, 28}, nil), data.ErrTruncated, []string{"byte 16", "47040000-byte payload", "60000×28×28"}},
		{"trailing byte", encodeIDX(8, []uint32{2}, []byte{1, 2, 3}), data.ErrTrailing, []string{"byte 10", "2-byte payload"}},
		{"two files", append(encodeIDX(8, []uint32{1}, []byte{4}), encodeIDX(8, []uint32{1}, []byte{4})...), data.ErrTrailing, []string{"byte 9"}},
	}
}

// TestReadIDX reads a small array raw and gzipped and compares every byte.
func TestReadIDX(t *testing.T) {
	payload := []byte{0, 1, 2, 3, 4, 5, 250, 251, 252, 253, 254, 255}
	raw := encodeIDX(8, []uint32{2, 3, 2}, payload)
	for name, in := range map[string][]byte{"raw": raw, "gzip": gzipBytes(t, raw)} {
		t.Run(name, func(t *testing.T) {
			a, err := data.ReadIDX(bytes.NewReader(in), "small.idx")
			if err != nil {
				t.Fatal(err)
			}
			if fmt.Sprint(a.Dims) != "[2 3 2]" || !bytes.Equal(a.Data, payload) || a.Source != "small.idx" {
				t.Errorf("got dims %v data %v source %q, want [2 3 2] %v small.idx", a.Dims, a.Data, a.Source, payload)
			}
		})
	}
}

// TestReadIDXEmptyDim: a dimension of size 0 declares an empty array,
// which is a well-formed file; another dimension beyond the cap is still
// refused, since every size must fit the limits on its own.
func TestReadIDXEmptyDim(t *testing.T) {
	a, err := data.ReadIDX(bytes.NewReader(encodeIDX(8, []uint32{0, 28, 28}, nil)), "empty.idx")
	if err != nil {
		t.Fatal(err)
	}
	if len(a.Data) != 0 || fmt.Sprint(a.Dims) != "[0 28 28]" {
		t.Errorf("dims %v, %d bytes; want [0 28 28] and none", a.Dims, len(a.Data))
	}
	_, err = data.ReadIDX(bytes.NewReader(encodeIDX(8, []uint32{0, 0xFFFFFFFF}, nil)), "empty.idx")
	checkIDXError(t, "empty.idx", err, data.ErrIDXTooLarge, "0×4294967295")
}

// TestReadIDXLarge crosses the reader's internal chunk size (64 KiB) and
// its doublings with a payload of 300,000 bytes, raw and gzipped.
func TestReadIDXLarge(t *testing.T) {
	payload := make([]byte, 300_000)
	for i := range payload {
		payload[i] = byte(i * 7)
	}
	raw := encodeIDX(8, []uint32{300, 1000}, payload)
	for name, in := range map[string][]byte{"raw": raw, "gzip": gzipBytes(t, raw)} {
		a, err := data.ReadIDX(bytes.NewReader(in), name)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if !bytes.Equal(a.Data, payload) {
			t.Errorf("%s: payload differs", name)
		}
	}
	// One byte short, and one byte over, at that size.
	for _, c := range []struct {
		in    []byte
		cause error
		msg   string
	}{
		{raw[:len(raw)-1], data.ErrTruncated, "byte 300011"},
		{append(raw[:len(raw):len(raw)], 9), data.ErrTrailing, "byte 300012"},
	} {
		_, err := data.ReadIDX(bytes.NewReader(c.in), "big.idx")
		checkIDXError(t, "big.idx", err, c.cause, c.msg)
	}
}

// TestReadIDXErrors checks every malformed-header and payload path, raw
// and gzipped: offsets are in the decompressed stream, so both give the
// same message.
func TestReadIDXErrors(t *testing.T) {
	for _, c := range idxErrorCases() {
		for _, z := range []bool{false, true} {
			in, name := c.in, c.name+"/raw"
			if z {
				in, name = gzipBytes(t, c.in), c.name+"/gzip"
			}
			t.Run(name, func(t *testing.T) {
				_, err := data.ReadIDX(bytes.NewReader(in), "bad.idx")
				checkIDXError(t, "bad.idx", err, c.cause, c.msg...)
			})
		}
	}
}

// checkIDXError asserts a *ParseError for file, with cause, no line or
// column (IDX is binary), and msg in its text.
func checkIDXError(t *testing.T, file string, err error, cause error, msg ...string) {
	t.Helper()
	var pe *data.ParseError
	if !errors.As(err, &pe) {
		t.Fatalf("error %v (%T), want *data.ParseError", err, err)
	}
	if pe.File != file || pe.Line != 0 || pe.Column != 0 {
		t.Errorf("ParseError file %q line %d column %d, want %q 0 0", pe.File, pe.Line, pe.Column, file)
	}
	if !errors.Is(err, cause) {
		t.Errorf("error %q, want cause %q", err, cause)
	}
	text := err.Error()
	if !strings.HasPrefix(text, file+": ") {
		t.Errorf("error %q does not start with the file name", text)
	}
	for _, m := range msg {
		if !strings.Contains(text, m) {
			t.Errorf("error %q lacks %q", text, m)
		}
	}
}

// TestReadIDXGzipFaults damages the gzip layer: a flipped byte in the
// compressed data or the checksum is ErrCompressed; a cut stream is
// ErrTruncated.
func TestReadIDXGzipFaults(t *testing.T) {
	raw := encodeIDX(8, []uint32{4, 4}, []byte("sixteen bytes!!!"))
	good := gzipBytes(t, raw)
	// A gzip stream ends with CRC-32 then length, 4 bytes each (RFC 1952).
	badCRC := bytes.Clone(good)
	badCRC[len(badCRC)-8] ^= 0xFF
	checkIDXError(t, "z", readIDX(badCRC), data.ErrCompressed, "byte 28", "checksum")

	cut := good[:len(good)-6]
	checkIDXError(t, "z", readIDX(cut), data.ErrTruncated)

	// Method byte (offset 2) must be 8, deflate (RFC 1952).
	badHeader := bytes.Clone(good)
	badHeader[2] = 7
	checkIDXError(t, "z", readIDX(badHeader), data.ErrCompressed, "byte 0", "gzip header")

	// Block type 3 is reserved in deflate (RFC 1951): set both type bits
	// of the first block header, which follows the 10-byte gzip header.
	badBlock := bytes.Clone(good)
	badBlock[10] |= 0x06
	checkIDXError(t, "z", readIDX(badBlock), data.ErrCompressed)

	// Junk after a gzip member is read as a next member's header.
	junk := append(bytes.Clone(good), "junk after the stream"...)
	checkIDXError(t, "z", readIDX(junk), data.ErrCompressed)

	// Two gzip members are one stream (RFC 1952 §2.2): the second adds
	// bytes after the payload.
	two := append(bytes.Clone(good), gzipBytes(t, []byte{1})...)
	checkIDXError(t, "z", readIDX(two), data.ErrTrailing, "byte 28")
}

func readIDX(in []byte) error {
	_, err := data.ReadIDX(bytes.NewReader(in), "z")
	return err
}

// TestReadIDXReaderError: a failing reader's own error is kept, inside a
// ParseError that says where.
func TestReadIDXReaderError(t *testing.T) {
	disk := errors.New("disk on fire")
	head := encodeIDX(8, []uint32{3}, []byte{1})
	_, err := data.ReadIDX(readerThenError(head, disk), "f")
	var pe *data.ParseError
	if !errors.As(err, &pe) || !errors.Is(err, disk) || !strings.Contains(err.Error(), "byte 9") {
		t.Errorf("error %v, want a ParseError at byte 9 wrapping %q", err, disk)
	}
}

// readerThenError returns b, then err.
func readerThenError(b []byte, err error) *errReader { return &errReader{b: b, err: err} }

type errReader struct {
	b   []byte
	err error
}

func (r *errReader) Read(p []byte) (int, error) {
	if len(r.b) == 0 {
		return 0, r.err
	}
	n := copy(p, r.b)
	r.b = r.b[n:]
	return n, nil
}

// TestReadIDXLyingHeader: a header declaring an array at the 2 GiB cap,
// followed by 100 bytes, must fail as truncated having allocated about
// what arrived, not what was declared. The bound, 1 MiB, covers the
// reader's first 64 KiB chunk, its bufio buffer and the gzip decoder's
// tables and 32 KiB window, with room to spare; the declared size is
// 2048 times larger.
func TestReadIDXLyingHeader(t *testing.T) {
	if strconv.IntSize < 64 {
		t.Skip("the cap is lower on 32-bit platforms")
	}
	raw := encodeIDX(8, []uint32{1 << 16, 1 << 15}, make([]byte, 100)) // 2^31 bytes declared
	for name, in := range map[string][]byte{"raw": raw, "gzip": gzipBytes(t, raw)} {
		var before, after runtime.MemStats
		runtime.ReadMemStats(&before)
		_, err := data.ReadIDX(bytes.NewReader(in), "liar.idx")
		runtime.ReadMemStats(&after)
		checkIDXError(t, "liar.idx", err, data.ErrTruncated, "byte 112", "2147483648-byte payload")
		if got := after.TotalAlloc - before.TotalAlloc; got > 1<<20 {
			t.Errorf("%s: allocated %d bytes for a 100-byte payload", name, got)
		}
	}
}

// TestIDXSet builds sets from a small image/label pair: pixel scaling,
// one-hot and ±1 targets, both float types.
func TestIDXSet(t *testing.T) {
	// Three 2×2 images; labels 2, 0, 1.
	images := &data.IDX{Dims: []int{3, 2, 2}, Data: []byte{0, 51, 102, 255, 255, 0, 0, 0, 1, 2, 3, 4}, Source: "img"}
	labels := &data.IDX{Dims: []int{3}, Data: []byte{2, 0, 1}, Source: "lab"}

	s, err := data.IDXSet[float64](images, labels, 3, true)
	if err != nil {
		t.Fatal(err)
	}
	if s.Rows != 3 || s.Features != 4 || s.Outputs != 3 || fmt.Sprint(s.Classes) != "[0 1 2]" {
		t.Fatalf("rows %d features %d outputs %d classes %v, want 3 4 3 [0 1 2]", s.Rows, s.Features, s.Outputs, s.Classes)
	}
	// v/255 with IEEE division is the double nearest v/255: 51/255 is
	// the double nearest 1/5, which is what the literal 0.2 denotes.
	wantX := []float64{0, 0.2, 0.4, 1, 1, 0, 0, 0, 1.0 / 255, 2.0 / 255, 3.0 / 255, 4.0 / 255}
	if fmt.Sprint(s.X) != fmt.Sprint(wantX) {
		t.Errorf("X = %v, want %v", s.X, wantX)
	}
	wantY := []float64{0, 0, 1, 1, 0, 0, 0, 1, 0}
	if fmt.Sprint(s.Y) != fmt.Sprint(wantY) {
		t.Errorf("Y = %v, want %v", s.Y, wantY)
	}
	if err := s.Validate(); err != nil {
		t.Error(err)
	}
	for r, want := range []int{2, 0, 1} {
		if s.Class(r) != want {
			t.Errorf("row %d class %d, want %d", r, s.Class(r), want)
		}
	}

	// Unscaled float32: byte values kept.
	s32, err := data.IDXSet[float32](images, labels, 3, false)
	if err != nil {
		t.Fatal(err)
	}
	if fmt.Sprint(s32.X) != "[0 51 102 255 255 0 0 0 1 2 3 4]" {
		t.Errorf("unscaled X = %v", s32.X)
	}

	// Two classes: one ±1 column, label 0 is −1 (Set's convention).
	bin := &data.IDX{Dims: []int{3}, Data: []byte{1, 0, 1}, Source: "bin"}
	s2, err := data.IDXSet[float64](images, bin, 2, true)
	if err != nil {
		t.Fatal(err)
	}
	if s2.Outputs != 1 || fmt.Sprint(s2.Y) != "[1 -1 1]" || s2.Class(1) != 0 || s2.Class(2) != 1 {
		t.Errorf("two classes: outputs %d Y %v", s2.Outputs, s2.Y)
	}
}

// TestIDXSetErrors: every mismatch is refused, with the sentinel and
// where.
func TestIDXSetErrors(t *testing.T) {
	images := &data.IDX{Dims: []int{3, 2}, Data: make([]byte, 6), Source: "img"}
	cases := []struct {
		name    string
		labels  *data.IDX
		images  *data.IDX
		classes int
		cause   error // nil: a plain error
		msg     []string
	}{
		{"count", &data.IDX{Dims: []int{2}, Data: []byte{0, 1}, Source: "lab"}, images, 3, data.ErrIDXShape, []string{"lab:", "2 labels for the 3 images of img"}},
		{"label too big", &data.IDX{Dims: []int{3}, Data: []byte{0, 3, 1}, Source: "lab"}, images, 3, data.ErrIDXLabel, []string{"lab:", "byte 9", "item 1 has label 3", "3 classes"}},
		{"label 2 of 2", &data.IDX{Dims: []int{3}, Data: []byte{0, 1, 2}, Source: "lab"}, images, 2, data.ErrIDXLabel, []string{"byte 10", "item 2 has label 2"}},
		{"2-D labels", &data.IDX{Dims: []int{3, 1}, Data: []byte{0, 1, 2}, Source: "lab"}, images, 3, data.ErrIDXShape, []string{"2 dimensions, want 1"}},
		{"inconsistent", &data.IDX{Dims: []int{3}, Data: []byte{0, 1}, Source: "lab"}, images, 3, data.ErrIDXShape, []string{"need 3 bytes, Data holds 2"}},
		{"no rows", &data.IDX{Dims: []int{0}, Source: "lab"}, &data.IDX{Dims: []int{0, 4}, Source: "img"}, 3, data.ErrEmpty, []string{"img:"}},
		{"empty images", &data.IDX{Dims: []int{3}, Data: []byte{0, 1, 2}, Source: "lab"}, &data.IDX{Dims: []int{3, 0}, Source: "img"}, 3, data.ErrIDXShape, []string{"zero size"}},
		{"one class", &data.IDX{Dims: []int{3}, Data: []byte{0, 0, 0}, Source: "lab"}, images, 1, nil, []string{"1 classes", "at least 2"}},
		{"nil", nil, images, 3, nil, []string{"both"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s, err := data.IDXSet[float64](c.images, c.labels, c.classes, true)
			if err == nil {
				t.Fatalf("no error; set %+v", s)
			}
			var pe *data.ParseError
			if c.cause != nil && (!errors.Is(err, c.cause) || !errors.As(err, &pe)) {
				t.Errorf("error %q, want a ParseError with %q", err, c.cause)
			}
			for _, m := range c.msg {
				if !strings.Contains(err.Error(), m) {
					t.Errorf("error %q lacks %q", err, m)
				}
			}
		})
	}
}

// ExampleReadIDX reads a gzipped label file and a raw image file of two
// 2×2 images and turns them into a training set.
func ExampleReadIDX() {
	// Two 2×2 images, in the layout of the MNIST family's image files.
	imageFile := []byte{0, 0, 0x08, 3, 0, 0, 0, 2, 0, 0, 0, 2, 0, 0, 0, 2,
		0, 255, 255, 0,
		255, 255, 0, 0}
	var labelFile bytes.Buffer
	z := gzip.NewWriter(&labelFile)
	z.Write([]byte{0, 0, 0x08, 1, 0, 0, 0, 2, 1, 0}) // labels 1, 0
	z.Close()

	images, err := data.ReadIDX(bytes.NewReader(imageFile), "images")
	if err != nil {
		fmt.Println(err)
		return
	}
	labels, err := data.ReadIDX(&labelFile, "labels.gz")
	if err != nil {
		fmt.Println(err)
		return
	}
	set, err := data.IDXSet[float32](images, labels, 2, true)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("dims", images.Dims, "rows", set.Rows, "features", set.Features)
	fmt.Println("first image", set.X[:4], "target", set.Y[0])

	// A file that claims to hold float32 values is refused.
	_, err = data.ReadIDX(bytes.NewReader([]byte{0, 0, 0x0D, 1, 0, 0, 0, 1, 0, 0, 0, 0}), "floats.idx")
	fmt.Println(err)
	// Output:
	// dims [2 2 2] rows 2 features 4
	// first image [0 1 1 0] target 1
	// floats.idx: byte 2: unsupported IDX element type: element type 0x0d (32-bit float); only 0x08 (unsigned byte) is supported
}
