package onnx_test

import (
	"fmt"
	"os"
	"path/filepath"

	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim/modelfile"
	"github.com/rhomb/rhomb/optim/modelfile/onnx"
)

// Export a classifier with its preprocessing folded in. The data are
// invented pump readings: a temperature rise (numeric) and a site
// (categorical). The ONNX model then takes the raw temperature rise in its
// "numeric" input and the site's one-hot block in its "onehot" input, and
// answers with "scores" and "class". In a program the model would come
// from modelfile.Load.
func Example() {
	cols := []prep.Column{
		{Name: "temp_rise", Kind: prep.Numeric, Num: []float64{4, 6, 7, 8, 30}},
		{Name: "site", Kind: prep.Categorical, Cat: []string{"north-yard", "east", "east", "north-yard", "east"}},
	}
	p, err := prep.Fit(cols, nil, prep.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	n, err := net.NewBuilder[float32](p.Width()).
		ConstantFeature("one").
		Dense("hidden", 8).ReLU("relu").
		Readout("readout", 2).
		Build()
	if err != nil {
		fmt.Println(err)
		return
	}
	_ = n.Init(net.InitSettings{Seed: 1}) // in a program: trained weights
	m := &modelfile.Model[float32]{Network: n, Pipeline: p, Classes: []string{"normal", "overheating"}}

	dir, _ := os.MkdirTemp("", "onnx-example")
	defer os.RemoveAll(dir)
	if err := onnx.Save(filepath.Join(dir, "pump.onnx"), m, onnx.Options{}); err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("saved pump.onnx: ONNX IR version %d, opset %d\n", onnx.IRVersion, onnx.Opset)
	fmt.Println("inputs:", onnx.InputNumeric, p.Inputs()[:1], "and", onnx.InputOneHot, p.FeatureNames()[1:])

	// What cannot be expressed is an error that says where: here a
	// float64 weight beyond float32's range.
	n64, _ := net.NewBuilder[float64](2).Dense("hidden", 2).ReLU("relu").Readout("readout", 2).Build()
	n64.Dense()[1].W.Value[1] = 1e39
	_, err = onnx.Marshal(&modelfile.Model[float64]{Network: n64}, onnx.Options{})
	fmt.Println(err)
	// Output:
	// saved pump.onnx: ONNX IR version 8, opset 17
	// inputs: numeric [temp_rise] and onehot [site=east site=north-yard]
	// onnx: node 2 "readout" (readout): weight [0, 1]: does not export to ONNX: the value 1e+39 is not a finite float32
}
