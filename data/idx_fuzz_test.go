package data_test

import (
	"bytes"
	"compress/gzip"
	"errors"
	"io"
	"runtime"
	"testing"

	"github.com/rhomb/rhomb/data"
)

// FuzzReadIDX feeds arbitrary bytes to ReadIDX. It must never panic; it
// must either return an array that re-encodes to exactly the (decompressed)
// input, or a *ParseError carrying one of its sentinels; and it must never
// allocate much more than the input really holds, whatever the header
// declares.
func FuzzReadIDX(f *testing.F) {
	f.Add(encodeIDX(8, []uint32{2, 3, 2}, []byte{0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11}))
	f.Add(encodeIDX(8, []uint32{0, 28, 28}, nil))
	f.Add(encodeIDX(8, []uint32{1 << 16, 1 << 15}, make([]byte, 100)))
	for _, c := range idxErrorCases() {
		f.Add(c.in)
		f.Add(gzipBytes(f, c.in))
	}
	f.Add(gzipBytes(f, encodeIDX(8, []uint32{4}, []byte{9, 0, 0, 3})))

	sentinels := []error{data.ErrIDXHeader, data.ErrIDXType, data.ErrIDXTooLarge, data.ErrTruncated, data.ErrTrailing, data.ErrCompressed}
	f.Fuzz(func(t *testing.T, in []byte) {
		// What the reader will really see: the input, or for a gzip
		// stream the bytes it decompresses to (counted up to 64 MiB
		// without keeping them, before the measurement starts).
		plain := in
		if len(in) >= 2 && in[0] == 0x1f && in[1] == 0x8b {
			plain = nil
			if zr, err := gzip.NewReader(bytes.NewReader(in)); err == nil {
				var buf bytes.Buffer
				io.Copy(&buf, io.LimitReader(zr, 64<<20))
				plain = buf.Bytes()
			}
		}

		var before, after runtime.MemStats
		runtime.ReadMemStats(&before)
		a, err := data.ReadIDX(bytes.NewReader(in), "fuzz")
		runtime.ReadMemStats(&after)

		// The payload buffer starts at 64 KiB and doubles, so it costs
		// under 64 KiB + 2×(bytes that arrived); the bufio buffer, gzip
		// decoder and error text fit in the rest of 1 MiB (measured:
		// well under 100 KiB).
		if got, bound := after.TotalAlloc-before.TotalAlloc, uint64(1<<20+2*len(plain)); got > bound {
			t.Fatalf("allocated %d bytes reading %d input bytes (%d decompressed); bound %d", got, len(in), len(plain), bound)
		}

		if err != nil {
			var pe *data.ParseError
			if !errors.As(err, &pe) || pe.File != "fuzz" {
				t.Fatalf("error %v (%T), want a *data.ParseError for \"fuzz\"", err, err)
			}
			for _, s := range sentinels {
				if errors.Is(err, s) {
					return
				}
			}
			t.Fatalf("error %q carries none of the sentinels", err)
		}
		if len(a.Dims) < 1 || len(a.Dims) > data.MaxIDXDims {
			t.Fatalf("%d dimensions accepted", len(a.Dims))
		}
		dims := make([]uint32, len(a.Dims))
		for i, d := range a.Dims {
			dims[i] = uint32(d)
		}
		if re := encodeIDX(8, dims, a.Data); !bytes.Equal(re, plain) {
			t.Fatalf("accepted input does not re-encode to itself:\n in %x\nout %x", plain, re)
		}
	})
}
