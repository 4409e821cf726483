package classify_test

import (
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"encoding/json"
	"math"
	"testing"

	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// polyModel saves a one-node polynomial network (input → poly → readout)
// and returns it with classify's reading of it.
func polyModel(t *testing.T, degree int, lo, hi float64, fit net.Fit) (*net.Network[float64], *classify.Model) {
	t.Helper()
	n, err := net.NewBuilder[float64](3).Dense("h", 5).PolyReLU("p", degree, lo, hi, fit).Readout("out", 2).Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := n.Init(net.InitSettings{Seed: uint64(degree)}); err != nil {
		t.Fatal(err)
	}
	return n, saveLoad(t, &modelfile.Model[float64]{Network: n})
}

// polyModelRefit is polyModel for a file written before model files
// stored the fitted coefficients: they are removed from the header, so
// classify must refit.
func polyModelRefit(t *testing.T, degree int, lo, hi float64, fit net.Fit) (*net.Network[float64], *classify.Model) {
	t.Helper()
	n, _ := polyModel(t, degree, lo, hi, fit)
	var buf bytes.Buffer
	if err := modelfile.Write(&buf, &modelfile.Model[float64]{Network: n}); err != nil {
		t.Fatal(err)
	}
	c, err := classify.Read(withoutCoefficients(t, buf.Bytes()), "refit.model")
	if err != nil {
		t.Fatal(err)
	}
	if got := classify.PolyCoefficients(c, "p"); len(got) != degree+1 {
		t.Fatalf("refitted %d coefficients, want %d", len(got), degree+1)
	}
	return n, c
}

// withoutCoefficients rewrites a model file (docs/model-file.md) with the
// graph's "coefficients" fields taken out: a new header, the same tensor
// data after it, and a new checksum.
func withoutCoefficients(t *testing.T, b []byte) []byte {
	t.Helper()
	hl := int(binary.LittleEndian.Uint32(b[12:]))
	var h map[string]any
	if err := json.Unmarshal(b[16:16+hl], &h); err != nil {
		t.Fatal(err)
	}
	removed := 0
	for _, node := range h["graph"].([]any) {
		if _, ok := node.(map[string]any)["coefficients"]; ok {
			delete(node.(map[string]any), "coefficients")
			removed++
		}
	}
	if removed == 0 {
		t.Fatal("the file stores no coefficients to remove")
	}
	nh, err := json.Marshal(h)
	if err != nil {
		t.Fatal(err)
	}
	var out bytes.Buffer
	out.Write(b[:12])
	binary.Write(&out, binary.LittleEndian, uint32(len(nh)))
	out.Write(nh)
	for out.Len()%8 != 0 {
		out.WriteByte(0)
	}
	out.Write(b[(16+hl+7)/8*8 : len(b)-32])
	sum := sha256.Sum256(out.Bytes())
	out.Write(sum[:])
	return out.Bytes()
}

// TestPolyStoredCoefficients: a current model file stores the training
// library's coefficients, and classify uses them bit for bit, for both
// fits.
func TestPolyStoredCoefficients(t *testing.T) {
	for _, fit := range []net.Fit{net.FitLeastSquares, net.FitInterpolation} {
		n, c := polyModel(t, 7, -2, 5, fit)
		want := n.Node("p").(*net.PolyReLU[float64]).Coefficients()
		got := classify.PolyCoefficients(c, "p")
		for k := range want {
			if math.Float64bits(got[k]) != math.Float64bits(want[k]) {
				t.Fatalf("%v: coefficient %d: %v read, %v trained", fit, k, got[k], want[k])
			}
		}
	}
}

// TestPolyInterpolationSameCoefficients: the interpolation fit is a plain
// loop in both libraries, so the coefficients must be equal bit for bit;
// the reference is net.PolyReLU.Coefficients.
func TestPolyInterpolationSameCoefficients(t *testing.T) {
	bitsChecked(t, "poly")
	for _, d := range []int{1, 2, 5, 16, 64} {
		n, c := polyModelRefit(t, d, -3, 5, net.FitInterpolation)
		want := n.Node("p").(*net.PolyReLU[float64]).Coefficients()
		got := classify.PolyCoefficients(c, "p")
		for k := range want {
			if math.Float64bits(got[k]) != math.Float64bits(want[k]) {
				t.Fatalf("degree %d: c_%d = %v, training %v", d, k, got[k], want[k])
			}
		}
	}
}

// TestPolyLeastSquaresCoefficients: the least-squares fit is one code
// (internal/arith, checked there against gonum's Householder QR), so
// classify's coefficients are the training library's bit for bit.
func TestPolyLeastSquaresCoefficients(t *testing.T) {
	for _, tc := range []struct {
		d      int
		lo, hi float64
	}{{1, -1, 1}, {4, -3, 3}, {6, -4, 4}, {7, -2, 5}, {20, -1, 1}, {64, -6, 6}} {
		n, c := polyModelRefit(t, tc.d, tc.lo, tc.hi, net.FitLeastSquares)
		want := n.Node("p").(*net.PolyReLU[float64]).Coefficients()
		got := classify.PolyCoefficients(c, "p")
		for k := range want {
			if math.Float64bits(got[k]) != math.Float64bits(want[k]) {
				t.Fatalf("degree %d on [%v, %v]: c_%d = %v, training %v", tc.d, tc.lo, tc.hi, k, got[k], want[k])
			}
		}
	}
}

// TestPolyLeastSquaresSameBits: classify's evaluation of a least-squares
// poly-relu model is bit for bit the training forward pass.
func TestPolyLeastSquaresSameBits(t *testing.T) {
	bitsChecked(t, "poly")
	split := demoSplit(t)
	for _, binary := range []bool{false, true} {
		set := split.Train
		if binary {
			set = binarySet(set)
		}
		m := build(t, kindCase{"poly-ls", "per-layer", true, binary}, set)
		c := saveLoad(t, m)
		sameBits(t, c, set.X, set.Rows, m.Network.Forward(set.X, set.Rows))
	}
}
