// Package container reads and writes the container layer of rhomb's model
// file (docs/model-file.md): the magic bytes and format version, the
// length-prefixed JSON header, the table of little-endian tensors that
// tiles the data region, and the SHA-256 checksum over everything.
//
// Two readers share it: optim/modelfile, on the training side, and
// net/classify, on the serving side. It lives here, once, so that the two
// cannot drift apart on what a well-formed file is. What the header means
// (the graph, the normalization, the pipeline, the checkpoint) is each
// reader's own business; this package only hands back the raw header JSON,
// the data region and a tensor table it has checked against the file's
// length.
//
// It imports only the standard library, because net/classify promises to
// link nothing else but data/prep.
package container

import (
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"sort"
)

// The file layout. All integers are little-endian.
//
//	offset  size  content
//	0       8     magic "RHOMBMF\n"
//	8       4     format version (uint32), currently 1
//	12      4     header length H (uint32)
//	16      H     header: UTF-8 JSON
//	16+H    p     zero padding to a multiple of 8
//	D       …     tensor data: each tensor at D + its offset, little-endian
//	end−32  32    SHA-256 of every byte before it
const (
	Magic   = "RHOMBMF\n"
	Version = 2
	// OldestVersion is the oldest format version Parse reads: version 1
	// named the header's array table "tensors", with "dtype", "shape" and
	// "offset" per entry; version 2 names them "arrays", "type", "dims"
	// and "at". The layout is otherwise the same.
	OldestVersion = 1
	PrefixLen     = 16 // magic, version and header length
	SumLen        = sha256.Size
	// Format is the header's "format" field in every model file.
	Format = "rhomb-model"
	// MaxHeader caps the header length a file may declare (64 MiB); the
	// header of a model with a 60,000-row checkpoint is far smaller,
	// because large arrays live in tensors.
	MaxHeader = 64 << 20
	// MaxTensors caps the number of tensors a file may declare, MaxNodes
	// the number of nodes in its graph.
	MaxTensors = 1 << 14
	MaxNodes   = 1 << 10
	// MaxFitCost caps Σ(d+1)² over the graph's poly-relu nodes: eight of
	// the largest degree, 64 (about 14 MiB of fitting work), so that a
	// hostile header cannot buy unbounded fitting work.
	MaxFitCost = 8 * 65 * 65
)

// Sentinel causes carried by *Error; the readers re-export them, so
// errors.Is finds them whichever package's name the caller uses.
var (
	ErrMagic     = errors.New("not a rhomb model file (bad magic bytes)")
	ErrVersion   = errors.New("unsupported model file format version")
	ErrTruncated = errors.New("file is truncated or its sizes do not fit it")
	ErrChecksum  = errors.New("checksum mismatch: the file is corrupted")
	ErrHeader    = errors.New("bad header")
)

// Error reports a container-level problem and where. The readers copy its
// fields into their own error types, which name the file.
type Error struct {
	Offset int64 // byte offset of the problem, or -1
	Err    error // one of the sentinels above
	What   string
}

func (e *Error) Error() string {
	msg := e.Err.Error()
	if e.Offset >= 0 {
		msg = fmt.Sprintf("at byte %d: %s", e.Offset, msg)
	}
	if e.What != "" {
		msg += ": " + e.What
	}
	return msg
}

func (e *Error) Unwrap() error { return e.Err }

func fail(off int64, err error, format string, args ...any) (*File, error) {
	return nil, &Error{Offset: off, Err: err, What: fmt.Sprintf(format, args...)}
}

// Tensor is one entry of the header's "tensors" table. Field names are
// part of the format.
type Tensor struct {
	Name   string `json:"name"`
	Role   string `json:"role"`
	DType  string `json:"type"` // "float32", "float64" or "int32"
	Shape  []int  `json:"dims"`
	Offset int64  `json:"at"` // from the start of the data region
}

// TensorV1 is an entry of a version-1 file's table, by its old field
// names; V2 converts it.
type TensorV1 struct {
	Name   string `json:"name"`
	Role   string `json:"role"`
	DType  string `json:"dtype"`
	Shape  []int  `json:"shape"`
	Offset int64  `json:"offset"`
}

// V2 is t as a version-2 entry.
func (t TensorV1) V2() Tensor {
	return Tensor{Name: t.Name, Role: t.Role, DType: t.DType, Shape: t.Shape, Offset: t.Offset}
}

// ElemSize is the size in bytes of one element of dtype d, or 0 for a
// dtype the format does not know.
func ElemSize(d string) int64 {
	switch d {
	case "float32", "int32":
		return 4
	case "float64":
		return 8
	}
	return 0
}

// File is a container that passed every check of Parse. Its slices alias
// the bytes given to Parse.
type File struct {
	Version   uint32 // the file's format version
	Header    []byte // the raw header JSON, H bytes
	Data      []byte // the tensor data region
	DataStart int64  // offset of Data in the file
	// Tensors is the table decode returned; ByName indexes it. Every
	// tensor's bytes lie within Data.
	Tensors []Tensor
	ByName  map[string]*Tensor
	Sum     [SumLen]byte // the file's SHA-256 checksum
}

// Parse checks the container layer of the model file b, in this order:
// its length, magic and version; the declared header length against the
// limit and the file; then it calls decode with the raw header JSON, so
// that the caller decodes the header into its own type before anything
// else is checked, and returns its tensor table. Then: room for tensor
// data; the tensor table (known dtypes, unique names, shapes that fit the
// data before anything is multiplied out, offsets aligned to 8, tensors
// that tile the data region exactly, without overlap); and last the
// checksum. The first problem is returned as an *Error. An error from
// decode that is not an *Error is reported as ErrHeader at the header's
// offset.
//
// Every size and offset is checked against len(b) before it is used, so a
// file that lies about its contents costs no more memory than its table.
func Parse(b []byte, decode func(header []byte, version uint32) ([]Tensor, error)) (*File, error) {
	if len(b) < PrefixLen+SumLen {
		return fail(int64(len(b)), ErrTruncated, "%d bytes is shorter than the smallest model file", len(b))
	}
	if string(b[:8]) != Magic {
		return fail(0, ErrMagic, "")
	}
	version := binary.LittleEndian.Uint32(b[8:])
	if version < OldestVersion || version > Version {
		return fail(8, ErrVersion, "version %d; this library reads versions %d to %d — use the rhomb release that wrote it", version, OldestVersion, Version)
	}
	hl := int64(binary.LittleEndian.Uint32(b[12:]))
	if hl > MaxHeader {
		return fail(12, ErrHeader, "header length %d exceeds the %d-byte limit", hl, MaxHeader)
	}
	if PrefixLen+hl+SumLen > int64(len(b)) {
		return fail(12, ErrTruncated, "header of %d bytes does not fit in %d bytes", hl, len(b))
	}
	f := &File{Header: b[PrefixLen : PrefixLen+hl], Version: version}
	tensors, err := decode(f.Header, version)
	if err != nil {
		var ce *Error
		if errors.As(err, &ce) {
			return nil, ce
		}
		return fail(PrefixLen, ErrHeader, "%v", err)
	}
	dataStart := (PrefixLen + hl + 7) / 8 * 8
	dataLen := int64(len(b)) - SumLen - dataStart
	if dataLen < 0 {
		return fail(PrefixLen+hl, ErrTruncated, "no room for tensor data")
	}

	// The tensor table: known types, sizes within the file, aligned,
	// tiling the data region without overlap.
	if len(tensors) > MaxTensors {
		return fail(PrefixLen, ErrHeader, "%d tensors exceed the limit of %d", len(tensors), MaxTensors)
	}
	type extent struct{ start, end int64 }
	extents := make([]extent, 0, len(tensors))
	byName := make(map[string]*Tensor, len(tensors))
	var end int64
	for i := range tensors {
		t := &tensors[i]
		size := ElemSize(t.DType)
		if size == 0 {
			return fail(PrefixLen, ErrHeader, "tensor %q: unknown dtype %q", t.Name, t.DType)
		}
		if byName[t.Name] != nil {
			return fail(PrefixLen, ErrHeader, "tensor %q appears twice", t.Name)
		}
		byName[t.Name] = t
		n := int64(1)
		for _, d := range t.Shape {
			if d < 0 || (d > 0 && n > dataLen/int64(d)) {
				return fail(PrefixLen, ErrTruncated, "tensor %q: shape %v does not fit in %d bytes of data", t.Name, t.Shape, dataLen)
			}
			n *= int64(d)
		}
		if t.Offset < 0 || t.Offset%8 != 0 || t.Offset > dataLen || n*size > dataLen-t.Offset {
			return fail(dataStart+max(t.Offset, 0), ErrTruncated, "tensor %q: %d bytes at offset %d do not fit in %d bytes of data (offsets are multiples of 8)", t.Name, n*size, t.Offset, dataLen)
		}
		extents = append(extents, extent{t.Offset, t.Offset + n*size})
		end = max(end, (t.Offset+n*size+7)/8*8)
	}
	if end != dataLen {
		return fail(dataStart+end, ErrTruncated, "tensor data is %d bytes, the tensors need %d", dataLen, end)
	}
	sort.Slice(extents, func(i, j int) bool { return extents[i].start < extents[j].start })
	for i := 1; i < len(extents); i++ {
		if extents[i].start < extents[i-1].end {
			return fail(dataStart+extents[i].start, ErrHeader, "tensors overlap")
		}
	}
	f.Sum = sha256.Sum256(b[:len(b)-SumLen])
	if !bytes.Equal(f.Sum[:], b[len(b)-SumLen:]) {
		return fail(int64(len(b)-SumLen), ErrChecksum, "")
	}
	f.Data = b[dataStart : dataStart+dataLen]
	f.DataStart = dataStart
	f.Tensors = tensors
	f.ByName = byName
	return f, nil
}

// DecodeHeader decodes the header JSON raw into v, a reader's own header
// type, refusing any field v does not have, and then checks that *format
// (v's "format" field) is Format. It is the first thing a decode callback
// of Parse does, so both readers refuse the same headers for the same
// reasons; its errors are reported by Parse as ErrHeader.
func DecodeHeader(raw []byte, v any, format *string) error {
	dec := json.NewDecoder(bytes.NewReader(raw))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		return err
	}
	if *format != Format {
		return fmt.Errorf("format %q, want %q", *format, Format)
	}
	return nil
}

// Assemble lays out a model file: the prefix, the header JSON, zero
// padding to a multiple of 8, the tensor data, and the checksum. data must
// already hold each tensor at its table offset, each padded to a multiple
// of 8, which is what Parse asks of a file.
func Assemble(header, data []byte) []byte {
	var out bytes.Buffer
	out.Grow(PrefixLen + len(header) + 7 + len(data) + SumLen)
	out.WriteString(Magic)
	binary.Write(&out, binary.LittleEndian, uint32(Version))
	binary.Write(&out, binary.LittleEndian, uint32(len(header)))
	out.Write(header)
	for out.Len()%8 != 0 {
		out.WriteByte(0)
	}
	out.Write(data)
	sum := sha256.Sum256(out.Bytes())
	out.Write(sum[:])
	return out.Bytes()
}
