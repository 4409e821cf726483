package container

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"testing"
)

// tableOnly decodes just the tensor table, as a reader's decode would.
func tableOnly(raw []byte, version uint32) ([]Tensor, error) {
	var h struct {
		Tensors []Tensor `json:"arrays"`
	}
	if err := json.Unmarshal(raw, &h); err != nil {
		return nil, err
	}
	return h.Tensors, nil
}

// handBuilt lays out a file byte by byte from the table in
// docs/model-file.md ("Layout"), independently of Assemble: magic, uint32
// version 2, uint32 H, H header bytes, zeros to a multiple of 8, the data,
// then the SHA-256 of everything before.
func handBuilt(header string, data []byte) []byte {
	b := []byte("RHOMBMF\n")
	b = binary.LittleEndian.AppendUint32(b, 2)
	b = binary.LittleEndian.AppendUint32(b, uint32(len(header)))
	b = append(b, header...)
	for len(b)%8 != 0 {
		b = append(b, 0)
	}
	b = append(b, data...)
	sum := sha256.Sum256(b)
	return append(b, sum[:]...)
}

// A float32 tensor of shape [3] is 12 bytes, padded to 16; a float64 of
// shape [1] at offset 16 is 8 more: 24 bytes of data.
const twoTensors = `{"arrays":[{"name":"a","role":"weight","type":"float32","dims":[3],"at":0},{"name":"b","role":"param","type":"float64","dims":[1],"at":16}]}`

func TestAssembleMatchesLayout(t *testing.T) {
	data := make([]byte, 24)
	for i := range data {
		data[i] = byte(i + 1)
	}
	want := handBuilt(twoTensors, data)
	got := Assemble([]byte(twoTensors), data)
	if string(got) != string(want) {
		t.Fatalf("Assemble differs from the documented layout:\n got %x\nwant %x", got, want)
	}
	f, err := Parse(got, tableOnly)
	if err != nil {
		t.Fatal(err)
	}
	// D = 16+H rounded up to a multiple of 8 (docs/model-file.md).
	h := len(twoTensors)
	if wantD := int64((16 + h + 7) / 8 * 8); f.DataStart != wantD {
		t.Errorf("DataStart %d, want %d", f.DataStart, wantD)
	}
	if string(f.Header) != twoTensors || string(f.Data) != string(data) {
		t.Errorf("Header or Data do not round-trip")
	}
	if f.Sum != sha256.Sum256(got[:len(got)-32]) {
		t.Errorf("Sum is not the SHA-256 of the bytes before it")
	}
	if len(f.Tensors) != 2 || f.ByName["b"] != &f.Tensors[1] || f.ByName["a"].Role != "weight" {
		t.Errorf("tensor table %+v, index %v", f.Tensors, f.ByName)
	}
}

func TestParseErrors(t *testing.T) {
	data := make([]byte, 24)
	good := handBuilt(twoTensors, data)
	withTable := func(table string, data []byte) []byte {
		return handBuilt(`{"arrays":[`+table+`]}`, data)
	}
	patch := func(at int, v uint32) []byte {
		b := append([]byte(nil), good...)
		binary.LittleEndian.PutUint32(b[at:], v)
		return b
	}
	flipped := append([]byte(nil), good...)
	flipped[len(flipped)-40] ^= 1
	tn := func(name, dtype, shape string, off int) string {
		return fmt.Sprintf(`{"name":%q,"role":"weight","type":%q,"dims":%s,"at":%d}`, name, dtype, shape, off)
	}
	// Each offset is where docs/model-file.md puts the faulty field.
	for _, c := range []struct {
		name   string
		b      []byte
		err    error
		offset int64
		inData bool // offset counts from D, the start of the tensor data
	}{
		{"shorter than prefix and checksum", good[:47], ErrTruncated, 47, false},
		{"magic", append([]byte("RHOMBMX\n"), good[8:]...), ErrMagic, 0, false},
		{"version 3", patch(8, 3), ErrVersion, 8, false},
		{"header over 64 MiB", patch(12, 64<<20+1), ErrHeader, 12, false},
		{"header past the end", patch(12, uint32(len(good))), ErrTruncated, 12, false},
		{"header not JSON", handBuilt(`{"arrays":`, data), ErrHeader, 16, false},
		{"unknown dtype", withTable(tn("a", "int8", "[1]", 0), make([]byte, 8)), ErrHeader, 16, false},
		{"name twice", withTable(tn("a", "int32", "[1]", 0)+","+tn("a", "int32", "[1]", 8), make([]byte, 16)), ErrHeader, 16, false},
		{"negative dimension", withTable(tn("a", "int32", "[-1]", 0), make([]byte, 8)), ErrTruncated, 16, false},
		{"shape larger than the data", withTable(tn("a", "float64", "[4294967296,4294967296]", 0), make([]byte, 8)), ErrTruncated, 16, false},
		{"misaligned offset", withTable(tn("a", "int32", "[1]", 4), make([]byte, 8)), ErrTruncated, 4, true},
		{"gap at the end", withTable(tn("a", "int32", "[1]", 0), make([]byte, 16)), ErrTruncated, 8, true},
		{"overlap", withTable(tn("a", "float64", "[2]", 0)+","+tn("b", "int32", "[1]", 8), make([]byte, 16)), ErrHeader, 8, true},
		{"checksum", flipped, ErrChecksum, int64(len(good) - 32), false},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := Parse(c.b, tableOnly)
			var ce *Error
			if !errors.As(err, &ce) || !errors.Is(err, c.err) {
				t.Fatalf("err %v, want an *Error wrapping %v", err, c.err)
			}
			want := c.offset
			if c.inData {
				// D = 16+H rounded up to a multiple of 8, H at byte 12.
				want += (16 + int64(binary.LittleEndian.Uint32(c.b[12:])) + 7) / 8 * 8
			}
			if ce.Offset != want {
				t.Errorf("offset %d, want %d (%v)", ce.Offset, want, err)
			}
		})
	}
}
