package modelfile_test

import (
	"fmt"
	"os"
	"path/filepath"

	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// Save a small network and load it back: the file holds the graph, the
// weights and the class names, and the loaded network computes the same
// outputs bit for bit.
func Example() {
	n, err := net.NewBuilder[float64](2).ConstantFeature("one").Dense("h", 3).ReLU("r").Readout("out", 2).Build()
	if err != nil {
		fmt.Println(err)
		return
	}
	if err := n.Init(net.InitSettings{Seed: 1, Rho0: 1}); err != nil {
		fmt.Println(err)
		return
	}
	dir, _ := os.MkdirTemp("", "modelfile")
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, "tiny.model")
	if err := modelfile.Save(path, &modelfile.Model[float64]{Network: n, Classes: []string{"calm", "gusty"}}); err != nil {
		fmt.Println(err)
		return
	}
	m, err := modelfile.Load[float64](path)
	if err != nil {
		fmt.Println(err)
		return
	}
	x := []float64{0.5, -1}
	a := append([]float64(nil), n.Forward(x, 1)...)
	b := m.Network.Forward(x, 1)
	fmt.Println(m.Classes, len(m.Network.Params()), "weight tensors, same outputs:", a[0] == b[0] && a[1] == b[1])
	// Output: [calm gusty] 2 weight tensors, same outputs: true
}
