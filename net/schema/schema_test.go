package schema_test

import (
	"crypto/sha256"
	"encoding/binary"
	"errors"
	"fmt"
	"runtime"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/net/schema"
)

// file assembles a model file whose header is the valid one-layer model
// below with extra top-level text spliced in before its closing brace
// (extra may be "" for the valid file itself). The weight tensor holds
// two float64 ones.
func file(graph, extra string) []byte {
	h := `{"format":"rhomb-model","library":"test","dtype":"float64","inputs":2,"graph":` + graph +
		`,"arrays":[{"name":"out.W","role":"weight","type":"float64","dims":[1,2],"at":0}]` + extra + `}`
	data := make([]byte, 16)
	data[6], data[7], data[14], data[15] = 0xf0, 0x3f, 0xf0, 0x3f // 1.0, 1.0 little-endian
	return schema.Assemble([]byte(h), data)
}

const oneLayer = `[{"name":"out","kind":"readout","units":1}]`

// allocs is what parsing b allocates in total, and the error.
func allocs(b []byte) (uint64, error) {
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	_, err := schema.Parse(b, "hostile.model")
	runtime.ReadMemStats(&after)
	return after.TotalAlloc - before.TotalAlloc, err
}

// TestParseValid: the small file above is a valid model file.
func TestParseValid(t *testing.T) {
	f, err := schema.Parse(file(oneLayer, ""), "ok.model")
	if err != nil {
		t.Fatal(err)
	}
	if f.Outputs != 1 || len(f.Trainable) != 1 || f.Trainable[0].Name != "out.W" {
		t.Fatalf("%+v", f)
	}
}

// TestHostileHeaders: headers within the 64 MiB limit that used to cost
// many times their size to decode (a 60 MiB string took 546 MB; 1.5
// million graph nodes 746 MB before the node limit refused them) are
// refused by the one-pass scan before anything is decoded, allocating
// almost nothing; each refusal names the limit.
func TestHostileHeaders(t *testing.T) {
	nodes := func(n int) string {
		var b strings.Builder
		b.WriteString("[")
		for i := range n {
			fmt.Fprintf(&b, `{"name":"r%d","kind":"relu"},`, i)
		}
		b.WriteString(`{"name":"out","kind":"readout","units":1}]`)
		return b.String()
	}
	metrics := func(n int) string {
		var b strings.Builder
		b.WriteString(`,"metrics":{`)
		for i := range n {
			if i > 0 {
				b.WriteByte(',')
			}
			fmt.Fprintf(&b, `"m%d":%d`, i, i)
		}
		b.WriteString("}")
		return b.String()
	}
	for _, tc := range []struct {
		name, graph, extra, says string
	}{
		{"60 MiB string", oneLayer, `,"label":"` + strings.Repeat("x", 60<<20) + `"`, "string of"},
		{"1.5 million nodes", nodes(1_500_000), "", "nodes"},
		{"a million small values", oneLayer, metrics(1 << 20), "values"},
		{"deep nesting", oneLayer, `,"training":` + strings.Repeat("[", 100) + strings.Repeat("]", 100), "nests"},
	} {
		b := file(tc.graph, tc.extra)
		got, err := allocs(b)
		if !errors.Is(err, schema.ErrHeader) || !strings.Contains(err.Error(), tc.says) {
			t.Errorf("%s: %v; want a header error saying %q", tc.name, err, tc.says)
			continue
		}
		// Refused before decoding: the error and its message, a few
		// hundred bytes; 64 KiB leaves room for the runtime's own.
		if got > 64<<10 {
			t.Errorf("%s (%d bytes): parsing allocated %d bytes before refusing it", tc.name, len(b), got)
		}
		t.Logf("%s: %d-byte file refused after %d bytes allocated", tc.name, len(b), got)
	}
}

// TestLimitsExact: a header at each limit passes the scan, one more is
// refused (the rule is the count, not an estimate).
func TestLimitsExact(t *testing.T) {
	at := strings.Repeat("y", schema.MaxString)
	if _, err := schema.Parse(file(oneLayer, `,"label":"`+at+`"`), "at.model"); err != nil {
		t.Errorf("a string of exactly MaxString bytes: %v", err)
	}
	if _, err := schema.Parse(file(oneLayer, `,"label":"`+at+`y"`), "over.model"); !errors.Is(err, schema.ErrHeader) {
		t.Errorf("a string one byte over MaxString: %v", err)
	}
	var g strings.Builder
	g.WriteString("[")
	for i := range schema.MaxNodes - 1 {
		fmt.Fprintf(&g, `{"name":"r%d","kind":"relu"},`, i)
	}
	g.WriteString(`{"name":"out","kind":"readout","units":1}]`)
	if _, err := schema.Parse(file(g.String(), ""), "nodes.model"); err != nil {
		t.Errorf("%d nodes: %v", schema.MaxNodes, err)
	}
	over := strings.Replace(g.String(), "[", `[{"name":"extra","kind":"relu"},`, 1)
	if _, err := schema.Parse(file(over, ""), "nodes.model"); !errors.Is(err, schema.ErrHeader) || !strings.Contains(err.Error(), "nodes") {
		t.Errorf("%d nodes: %v", schema.MaxNodes+1, err)
	}
}

// TestAcceptedHeaderCost: the costliest header the scan lets through —
// MaxValues−20 small numbers in the metrics record, which the decoder
// turns into a map, about 12 header bytes per entry — costs at most a
// stated multiple of its size in total allocation (peak memory is less:
// the map's old buckets are garbage as it grows). Measured at 16.4× (about
// 264 bytes per entry: key string, boxed number, interface, map slots
// through the map's growth, the decoder's scratch); the bound, 24× the
// file size plus 1 MiB, is a regression guard chosen after that
// measurement, not a derived figure. Headers a trainer writes hold a few
// thousand values, far below this.
func TestAcceptedHeaderCost(t *testing.T) {
	var b strings.Builder
	b.WriteString(`,"metrics":{`)
	for i := range schema.MaxValues - 20 {
		if i > 0 {
			b.WriteByte(',')
		}
		fmt.Fprintf(&b, `"m%d":%d`, i, i)
	}
	b.WriteString("}")
	f := file(oneLayer, b.String())
	got, err := allocs(f)
	if err != nil {
		t.Fatal(err)
	}
	bound := uint64(24*len(f) + 1<<20)
	t.Logf("a %d-byte file with %d values: %d bytes allocated (%.1f× its size; bound %d)", len(f), schema.MaxValues-20, got, float64(got)/float64(len(f)), bound)
	if got > bound {
		t.Fatalf("parsing allocated %d bytes, over the stated bound %d", got, bound)
	}
}

// TestVersion1Reads: a file of format version 1 — the array table named
// "tensors", its entries' fields "dtype", "shape" and "offset" — reads to
// the same model as the version-2 file; a version-1 header that uses the
// version-2 name is refused, and so is a version-2 header with the old.
func TestVersion1Reads(t *testing.T) {
	v2 := file(oneLayer, "")
	hl := binary.LittleEndian.Uint32(v2[12:])
	old := strings.NewReplacer(`"arrays"`, `"tensors"`, `"type":"float64","dims"`, `"dtype":"float64","shape"`, `"at":0`, `"offset":0`).Replace(string(v2[16 : 16+hl]))
	v1 := reassemble(old, v2, 1)
	a, err := schema.Parse(v2, "v2.model")
	if err != nil {
		t.Fatal(err)
	}
	b, err := schema.Parse(v1, "v1.model")
	if err != nil {
		t.Fatal(err)
	}
	if fmt.Sprint(a.Header.Tensors, a.Trainable, a.Widths) != fmt.Sprint(b.Header.Tensors, b.Trainable, b.Widths) {
		t.Fatalf("version 1 reads as %+v, version 2 as %+v", b.Header.Tensors, a.Header.Tensors)
	}
	if _, err := schema.Parse(reassemble(string(v2[16:16+hl]), v2, 1), "mixed.model"); !errors.Is(err, schema.ErrHeader) {
		t.Errorf("a version-1 file with the version-2 table: %v", err)
	}
	if _, err := schema.Parse(reassemble(old, v2, 2), "mixed.model"); !errors.Is(err, schema.ErrHeader) {
		t.Errorf("a version-2 file with the version-1 table: %v", err)
	}
}

// reassemble lays out a file with header h, the data region of like, and
// the given format version (docs/model-file.md, "Layout"), by hand.
func reassemble(h string, like []byte, version uint32) []byte {
	hl := binary.LittleEndian.Uint32(like[12:])
	data := like[(16+int(hl)+7)/8*8 : len(like)-32]
	b := []byte(schema.Magic)
	b = binary.LittleEndian.AppendUint32(b, version)
	b = binary.LittleEndian.AppendUint32(b, uint32(len(h)))
	b = append(b, h...)
	for len(b)%8 != 0 {
		b = append(b, 0)
	}
	b = append(b, data...)
	sum := sha256.Sum256(b)
	return append(b, sum[:]...)
}
