package net_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"reflect"
	"testing"

	"github.com/rhomb/rhomb/net"
)

// TestSpecRoundTrip: a network rebuilt from its description, with its
// weights copied, computes the same bits.
func TestSpecRoundTrip(t *testing.T) {
	n, err := net.NewBuilder[float64](5).ConstantFeature("one").
		Dense("h1", 7).SmoothReLU("s1", 3).
		Dense("h2", 6).PolyReLU("p2", 6, -3, 3, net.FitInterpolation).
		Dense("h3", 4).ReLU("r3").
		Readout("out", 3).Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := n.Init(net.InitSettings{Seed: 2}); err != nil {
		t.Fatal(err)
	}
	spec, err := n.Spec()
	if err != nil {
		t.Fatal(err)
	}
	m, err := net.FromSpec[float64](5, spec)
	if err != nil {
		t.Fatal(err)
	}
	spec2, _ := m.Spec()
	if !reflect.DeepEqual(spec, spec2) {
		t.Fatalf("specs differ:\n%+v\n%+v", spec, spec2)
	}
	for i, p := range n.Params() {
		copy(m.Params()[i].Value, p.Value)
	}
	rng := rand.New(rand.NewPCG(1, 2))
	x := make([]float64, 4*5)
	for i := range x {
		x[i] = rng.NormFloat64()
	}
	a := append([]float64(nil), n.Forward(x, 4)...)
	b := m.Forward(x, 4)
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			t.Fatalf("output %d: %v rebuilt, %v original", i, b[i], a[i])
		}
	}
}

func TestFromSpecErrors(t *testing.T) {
	_, err := net.FromSpec[float32](3, []net.NodeSpec{{Name: "x", Kind: "mystery"}, {Name: "out", Kind: "readout", Units: 1}})
	var be *net.BuildError
	if !errors.As(err, &be) || be.Node != "x" || be.Index != 0 {
		t.Errorf("unknown kind: %v", err)
	}
	_, err = net.FromSpec[float32](3, []net.NodeSpec{{Name: "p", Kind: "poly-relu", Degree: 3, Lo: -1, Hi: 1, Fit: "spline"}, {Name: "out", Kind: "readout", Units: 1}})
	if !errors.As(err, &be) || be.Node != "p" {
		t.Errorf("unknown fit: %v", err)
	}
}
