package schema_test

import (
	"errors"
	"fmt"

	"github.com/rhomb/rhomb/net/schema"
)

// Parse checks a whole model file — layout, checksum, header, graph,
// arrays — before anything is built from it, and says what is wrong and
// where with one error type. Here, a one-layer model whose weight array
// is declared one column too wide.
func ExampleParse() {
	h := `{"format":"rhomb-model","library":"example","dtype":"float64","inputs":2,` +
		`"graph":[{"name":"out","kind":"readout","units":1}],` +
		`"arrays":[{"name":"out.W","role":"weight","type":"float64","dims":[1,2],"at":0}]}`
	file := schema.Assemble([]byte(h), make([]byte, 16)) // two float64 zeros
	f, err := schema.Parse(file, "ok.model")
	fmt.Println(err, f.Outputs, f.Trainable[0].Name)

	bad := `{"format":"rhomb-model","library":"example","dtype":"float64","inputs":1,` +
		`"graph":[{"name":"out","kind":"readout","units":1}],` +
		`"arrays":[{"name":"out.W","role":"weight","type":"float64","dims":[1,2],"at":0}]}`
	_, err = schema.Parse(schema.Assemble([]byte(bad), make([]byte, 16)), "bad.model")
	var fe *schema.Error
	fmt.Println(errors.As(err, &fe), errors.Is(err, schema.ErrShape))
	fmt.Println(err)
	// Output:
	// <nil> 1 out.W
	// true true
	// bad.model at byte 16: tensors do not fit the network: tensor "out.W": role weight, float64 of shape [1 2]; want weight, float64 of shape [1 1]
}
