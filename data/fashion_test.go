package data_test

import (
	"compress/gzip"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"io"
	"os"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/opendata"
)

// The Fashion-MNIST checks below use the facts in REFERENCES.md
// (Fashion-MNIST row): images magic 0x00000803 with dims N,28,28, labels
// magic 0x00000801; 60,000 training and 10,000 test items; 10 classes
// with exactly 6,000 / 1,000 each; the first training labels 9,0,0,3;
// and the leading hex digits of the SHA-256 of each decompressed file.

var fashionFiles = []struct {
	file  string
	magic uint32
	dims  []int
	sha   string // leading hex digits of the decompressed file's SHA-256
}{
	{opendata.FashionTrainImage, 0x00000803, []int{60000, 28, 28}, "c59f468a"},
	{opendata.FashionTrainLabel, 0x00000801, []int{60000}, "bad3541b"},
	{opendata.FashionTestImage, 0x00000803, []int{10000, 28, 28}, "5b4141f0"},
	{opendata.FashionTestLabel, 0x00000801, []int{10000}, "0402a96d"},
}

// TestFashionFiles checks each file twice: the decompressed stream itself
// (magic number and SHA-256, computed here with compress/gzip, apart from
// ReadIDX), and what ReadIDX returns (dims, and the same SHA-256 over its
// header and data written back out, so that not one byte is lost or
// changed).
func TestFashionFiles(t *testing.T) {
	for _, c := range fashionFiles {
		name := strings.TrimPrefix(c.file, "fashion-mnist/")
		t.Run(name, func(t *testing.T) {
			path := opendata.File(t, c.file)

			f, err := os.Open(path)
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			zr, err := gzip.NewReader(f)
			if err != nil {
				t.Fatal(err)
			}
			var head [4]byte
			if _, err := io.ReadFull(zr, head[:]); err != nil {
				t.Fatal(err)
			}
			if m := binary.BigEndian.Uint32(head[:]); m != c.magic {
				t.Errorf("magic %#08x, want %#08x", m, c.magic)
			}
			h := sha256.New()
			h.Write(head[:])
			if _, err := io.Copy(h, zr); err != nil {
				t.Fatal(err)
			}
			if sum := hex.EncodeToString(h.Sum(nil)); !strings.HasPrefix(sum, c.sha) {
				t.Errorf("SHA-256 of the decompressed file %s, want %s…", sum, c.sha)
			}

			a, err := data.ReadIDXFile(path)
			if err != nil {
				t.Fatal(err)
			}
			if !equalInts(a.Dims, c.dims) {
				t.Fatalf("dims %v, want %v", a.Dims, c.dims)
			}
			dims := make([]uint32, len(a.Dims))
			for i, d := range a.Dims {
				dims[i] = uint32(d)
			}
			h.Reset()
			h.Write(encodeIDX(8, dims, nil))
			h.Write(a.Data)
			if sum := hex.EncodeToString(h.Sum(nil)); !strings.HasPrefix(sum, c.sha) {
				t.Errorf("SHA-256 of what ReadIDX read %s, want %s…", sum, c.sha)
			}
		})
	}
}

// TestFashionLabels: 10 classes with exactly 6,000 training and 1,000
// test items each, and the training set starts 9, 0, 0, 3 (so it is not
// sorted by label).
func TestFashionLabels(t *testing.T) {
	train, err := data.ReadIDXFile(opendata.File(t, opendata.FashionTrainLabel))
	if err != nil {
		t.Fatal(err)
	}
	test, err := data.ReadIDXFile(opendata.File(t, opendata.FashionTestLabel))
	if err != nil {
		t.Fatal(err)
	}
	if got := train.Data[:4]; !equalInts([]int{int(got[0]), int(got[1]), int(got[2]), int(got[3])}, []int{9, 0, 0, 3}) {
		t.Errorf("first training labels %v, want [9 0 0 3]", got)
	}
	for _, c := range []struct {
		labels *data.IDX
		each   int
	}{{train, 6000}, {test, 1000}} {
		var count [256]int
		for _, l := range c.labels.Data {
			count[l]++
		}
		for k, n := range count {
			want := 0
			if k < 10 {
				want = c.each
			}
			if n != want {
				t.Errorf("%s: %d items of label %d, want %d", c.labels.Source, n, k, want)
			}
		}
	}
}

// TestFashionSet turns the test files into a Set: 10,000 rows of 784
// features in [0, 1], one-hot targets with 1,000 rows per class, and the
// first row's class equal to the first label.
func TestFashionSet(t *testing.T) {
	images, err := data.ReadIDXFile(opendata.File(t, opendata.FashionTestImage))
	if err != nil {
		t.Fatal(err)
	}
	labels, err := data.ReadIDXFile(opendata.File(t, opendata.FashionTestLabel))
	if err != nil {
		t.Fatal(err)
	}
	s, err := data.IDXSet[float32](images, labels, 10, true)
	if err != nil {
		t.Fatal(err)
	}
	if s.Rows != 10000 || s.Features != 28*28 || s.Outputs != 10 {
		t.Fatalf("rows %d features %d outputs %d, want 10000 784 10", s.Rows, s.Features, s.Outputs)
	}
	if err := s.Validate(); err != nil {
		t.Fatal(err)
	}
	lo, hi := s.X[0], s.X[0]
	for _, v := range s.X {
		lo, hi = min(lo, v), max(hi, v)
	}
	if lo < 0 || hi > 1 {
		t.Errorf("pixels span [%v, %v], want within [0, 1]", lo, hi)
	}
	var count [10]int
	for r := range s.Rows {
		count[s.Class(r)]++
		if r < 100 && s.Class(r) != int(labels.Data[r]) {
			t.Errorf("row %d class %d, label %d", r, s.Class(r), labels.Data[r])
		}
	}
	if count != [10]int{1000, 1000, 1000, 1000, 1000, 1000, 1000, 1000, 1000, 1000} {
		t.Errorf("rows per class %v, want 1000 each", count)
	}
	// Training on the wrong class count is caught: labels go up to 9.
	if _, err := data.IDXSet[float32](images, labels, 9, true); err == nil {
		t.Error("9 classes accepted for labels up to 9")
	}
}

func equalInts(a, b []int) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// TestFashionTable reads the 10,000 Fashion-MNIST test images as a Table:
// 784 pixel columns, 1,000 rows of each class (REFERENCES.md), and every
// cell equal, bit for bit, to the value IDXSet gives the same pixel when
// it scales to [0, 1] (both divide the byte by 255 in float64).
func TestFashionTable(t *testing.T) {
	img, err := data.ReadIDXFile(opendata.File(t, opendata.FashionTestImage))
	if err != nil {
		t.Fatal(err)
	}
	lab, err := data.ReadIDXFile(opendata.File(t, opendata.FashionTestLabel))
	if err != nil {
		t.Fatal(err)
	}
	tab, err := data.IDXTable(img, lab)
	if err != nil {
		t.Fatal(err)
	}
	if tab.Rows != 10000 || len(tab.Columns) != 784 || tab.Columns[783].Name != "p783" {
		t.Fatalf("%d rows, %d columns (last %q); want 10000, 784, p783", tab.Rows, len(tab.Columns), tab.Columns[len(tab.Columns)-1].Name)
	}
	count := map[string]int{}
	for _, l := range tab.Labels {
		count[l]++
	}
	for _, c := range tab.Classes() {
		if count[c] != 1000 {
			t.Errorf("class %s has %d rows, want 1000", c, count[c])
		}
	}
	set, err := data.IDXSet[float64](img, lab, 10, true)
	if err != nil {
		t.Fatal(err)
	}
	for r := range tab.Rows {
		for j := range tab.Columns {
			if got, want := tab.Columns[j].Num[r], set.X[r*784+j]; got != want {
				t.Fatalf("row %d pixel %d: table %v, IDXSet %v", r, j, got, want)
			}
		}
		if tab.Labels[r] != set.Classes[set.Class(r)] {
			t.Fatalf("row %d: label %q, IDXSet class %q", r, tab.Labels[r], set.Classes[set.Class(r)])
		}
	}
}
