package container_test

import (
	"encoding/json"
	"errors"
	"fmt"

	"github.com/rhomb/rhomb/internal/container"
)

// A reader decodes the header into its own type inside Parse's callback,
// and gets back a checked tensor table and the data region.
func Example() {
	header := []byte(`{"format":"rhomb-model","arrays":[{"name":"w","role":"weight","type":"int32","dims":[2],"at":0}]}`)
	file := container.Assemble(header, []byte{1, 0, 0, 0, 2, 0, 0, 0})

	var h struct {
		Format  string             `json:"format"`
		Tensors []container.Tensor `json:"arrays"`
	}
	decode := func(raw []byte, version uint32) ([]container.Tensor, error) {
		if err := json.Unmarshal(raw, &h); err != nil {
			return nil, err
		}
		return h.Tensors, nil
	}
	f, err := container.Parse(file, decode)
	if err != nil {
		fmt.Println(err)
		return
	}
	w := f.ByName["w"]
	fmt.Println(h.Format, w.Shape, f.Data[w.Offset:w.Offset+8])

	// Corrupt the checksum; it sits after 16 bytes of prefix, the 104-byte
	// header (already a multiple of 8 from byte 16) and 8 bytes of data.
	file[len(file)-1] ^= 1
	_, err = container.Parse(file, decode)
	fmt.Println(errors.Is(err, container.ErrChecksum), err)
	// Output:
	// rhomb-model [2] [1 0 0 0 2 0 0 0]
	// true at byte 128: checksum mismatch: the file is corrupted
}
