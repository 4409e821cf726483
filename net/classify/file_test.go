package classify_test

import (
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// validFile returns the bytes of a small saved model.
func validFile(t testing.TB) []byte {
	t.Helper()
	n, err := net.NewBuilder[float64](3).ConstantFeature("one").Dense("h", 4).ReLU("r").Readout("out", 2).Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := n.Init(net.InitSettings{Seed: 1}); err != nil {
		t.Fatal(err)
	}
	var b bytes.Buffer
	if err := modelfile.Write(&b, &modelfile.Model[float64]{Network: n, Classes: []string{"a", "b"}}); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

// reseal rewrites the header of a model file and fixes its length field,
// padding and checksum, so that a test reaches the checks behind the
// checksum.
func reseal(b []byte, edit func(h string) string) []byte {
	hl := int(binary.LittleEndian.Uint32(b[12:]))
	data := b[(16+hl+7)/8*8 : len(b)-32]
	h := edit(string(b[16 : 16+hl]))
	var out bytes.Buffer
	out.Write(b[:12])
	binary.Write(&out, binary.LittleEndian, uint32(len(h)))
	out.WriteString(h)
	for out.Len()%8 != 0 {
		out.WriteByte(0)
	}
	out.Write(data)
	s := sha256.Sum256(out.Bytes())
	out.Write(s[:])
	return out.Bytes()
}

// TestReadRefuses checks each refusal that docs/model-file.md asks of a
// reader ("Validation on reading"), with the sentinel expected, and that
// the training library's reader refuses the same file: the two readers
// agree on what a valid file is.
func TestReadRefuses(t *testing.T) {
	good := validFile(t)
	if _, err := classify.Read(good, "good"); err != nil {
		t.Fatalf("valid file: %v", err)
	}
	flip := func(at int) []byte { b := bytes.Clone(good); b[at] ^= 1; return b }
	// The first weight is the first 8 bytes of the data region.
	hl := int(binary.LittleEndian.Uint32(good[12:]))
	d := (16 + hl + 7) / 8 * 8
	nanWeight := bytes.Clone(good)
	binary.LittleEndian.PutUint64(nanWeight[d:], math.Float64bits(math.NaN()))
	s := sha256.Sum256(nanWeight[:len(nanWeight)-32])
	copy(nanWeight[len(nanWeight)-32:], s[:])
	bigHeader := bytes.Clone(good)
	binary.LittleEndian.PutUint32(bigHeader[12:], 1<<30)
	for _, tc := range []struct {
		name string
		b    []byte
		want error
	}{
		{"empty", nil, classify.ErrTruncated},
		{"magic", flip(0), classify.ErrMagic},
		{"version", flip(8), classify.ErrVersion},
		{"header too long", bigHeader, classify.ErrHeader},
		{"truncated", good[:len(good)-9], classify.ErrTruncated},
		{"checksum", flip(len(good) - 1), classify.ErrChecksum},
		{"data bit", flip(d + 3), classify.ErrChecksum},
		{"NaN weight", nanWeight, classify.ErrWeight},
		{"wrong shape", reseal(good, func(h string) string { return strings.Replace(h, `"units":4`, `"units":5`, 1) }), classify.ErrShape},
		{"missing weight", reseal(good, func(h string) string { return strings.Replace(h, `"h.W"`, `"h.X"`, 1) }), classify.ErrShape},
		{"overlap", reseal(good, func(h string) string { return strings.Replace(h, `"at":128`, `"at":0`, 1) }), classify.ErrTruncated},
		{"unknown kind", reseal(good, func(h string) string { return strings.Replace(h, `"kind":"relu"`, `"kind":"gelu"`, 1) }), classify.ErrShape},
		{"unknown field", reseal(good, func(h string) string { return strings.Replace(h, `{"format"`, `{"colour":1,"format"`, 1) }), classify.ErrHeader},
		{"dtype", reseal(good, func(h string) string {
			return strings.Replace(h, `"dtype":"float64","inputs"`, `"dtype":"float16","inputs"`, 1)
		}), classify.ErrHeader},
	} {
		_, err := classify.Read(tc.b, tc.name)
		var fe *classify.FileError
		if !errors.As(err, &fe) || !errors.Is(err, tc.want) {
			t.Errorf("%s: got %v; want a *FileError wrapping %v", tc.name, err, tc.want)
		}
		if _, err := modelfile.Read[float64](tc.b, tc.name); err == nil {
			t.Errorf("%s: the training library's reader accepts the file classify refuses", tc.name)
		}
	}
	if !strings.Contains(string(good), `"at":128`) {
		t.Fatal("the overlap case assumes the second tensor at offset 128; the file layout changed")
	}
}

// FuzzRead feeds mutated model files to Read: it must never panic, and a
// file it accepts must also be accepted by the training library's reader.
func FuzzRead(f *testing.F) {
	f.Add(validFile(f))
	f.Fuzz(func(t *testing.T, b []byte) {
		if _, err := classify.Read(b, "fuzz"); err == nil {
			if _, err := modelfile.Read[float64](b, "fuzz"); err != nil {
				t.Fatalf("classify accepts a file the training library refuses: %v", err)
			}
		}
	})
}

// TestLoadMissingFile: Load reports the path.
func TestLoadMissingFile(t *testing.T) {
	_, err := classify.Load(filepath.Join(t.TempDir(), "none.model"))
	if !errors.Is(err, os.ErrNotExist) {
		t.Fatalf("got %v; want os.ErrNotExist", err)
	}
}
