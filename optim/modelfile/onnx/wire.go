package onnx

import (
	"encoding/binary"
	"math"

	"google.golang.org/protobuf/encoding/protowire"
)

// The ONNX file is a protocol-buffer message (onnx.ModelProto). rhomb
// writes it field by field with protowire instead of generated types: the
// handful of messages below are all an exported network needs, and
// hand-written encoding keeps the package free of generated code.
//
// The field numbers are those of onnx/onnx.proto in the ONNX repository
// (written from memory, then checked against a stored copy of that file).
// Field numbers never change between ONNX releases: the format is
// protobuf, and a renumbered field would break every existing model file.

// Versions the exported model declares.
const (
	// IRVersion is the ONNX intermediate-representation version written
	// into ModelProto.ir_version: 8, the IR of ONNX releases 1.10 to 1.12
	// (from memory; onnx.proto's Version enum names it IR_VERSION_2021_7_30).
	IRVersion = 8
	// Opset is the version of the default ("ai.onnx") operator set the
	// graph's nodes bind to: 17, the opset of ONNX 1.12, which pairs with
	// IR version 8 (from memory). Every operator used here has a definition
	// at or below 17 (see doc.go for each one's version).
	Opset = 17
)

// ModelProto (onnx.proto: message ModelProto).
const (
	modelIRVersion       protowire.Number = 1  // int64 ir_version
	modelProducerName    protowire.Number = 2  // string producer_name
	modelProducerVersion protowire.Number = 3  // string producer_version
	modelGraph           protowire.Number = 7  // GraphProto graph
	modelOpsetImport     protowire.Number = 8  // repeated OperatorSetIdProto opset_import
	modelMetadataProps   protowire.Number = 14 // repeated StringStringEntryProto metadata_props
)

// OperatorSetIdProto (onnx.proto: message OperatorSetIdProto).
const (
	opsetDomain  protowire.Number = 1 // string domain; "" is the default ai.onnx set
	opsetVersion protowire.Number = 2 // int64 version
)

// StringStringEntryProto (onnx.proto: message StringStringEntryProto).
const (
	entryKey   protowire.Number = 1 // string key
	entryValue protowire.Number = 2 // string value
)

// GraphProto (onnx.proto: message GraphProto).
const (
	graphNode        protowire.Number = 1  // repeated NodeProto node, in topological order
	graphName        protowire.Number = 2  // string name
	graphInitializer protowire.Number = 5  // repeated TensorProto initializer
	graphDocString   protowire.Number = 10 // string doc_string
	graphInput       protowire.Number = 11 // repeated ValueInfoProto input
	graphOutput      protowire.Number = 12 // repeated ValueInfoProto output
)

// NodeProto (onnx.proto: message NodeProto).
const (
	nodeInput     protowire.Number = 1 // repeated string input
	nodeOutput    protowire.Number = 2 // repeated string output
	nodeName      protowire.Number = 3 // string name
	nodeOpType    protowire.Number = 4 // string op_type
	nodeAttribute protowire.Number = 5 // repeated AttributeProto attribute
)

// AttributeProto (onnx.proto: message AttributeProto) and its
// AttributeType enum; integer attributes, and one float (the ε of
// BatchNormalization).
const (
	attrName protowire.Number = 1  // string name
	attrF    protowire.Number = 2  // float f (fixed32 on the wire)
	attrI    protowire.Number = 3  // int64 i
	attrType protowire.Number = 20 // AttributeType type

	attrTypeFloat = 1 // AttributeType FLOAT
	attrTypeInt   = 2 // AttributeType INT
)

// TensorProto (onnx.proto: message TensorProto) and its DataType enum.
const (
	tensorDims     protowire.Number = 1 // repeated int64 dims
	tensorDataType protowire.Number = 2 // int32 data_type
	tensorName     protowire.Number = 8 // string name
	tensorRawData  protowire.Number = 9 // bytes raw_data: fixed width, little-endian

	dataTypeFloat = 1 // DataType FLOAT: IEEE 754 binary32
	dataTypeInt64 = 7 // DataType INT64
)

// ValueInfoProto, TypeProto, TypeProto.Tensor, TensorShapeProto and
// TensorShapeProto.Dimension (onnx.proto).
const (
	valueName      protowire.Number = 1 // ValueInfoProto: string name
	valueType      protowire.Number = 2 // ValueInfoProto: TypeProto type
	valueDocString protowire.Number = 3 // ValueInfoProto: string doc_string

	typeTensor protowire.Number = 1 // TypeProto: Tensor tensor_type (oneof value)

	tensorTypeElem  protowire.Number = 1 // TypeProto.Tensor: int32 elem_type
	tensorTypeShape protowire.Number = 2 // TypeProto.Tensor: TensorShapeProto shape

	shapeDim protowire.Number = 1 // TensorShapeProto: repeated Dimension dim

	dimValue protowire.Number = 1 // Dimension: int64 dim_value (oneof value)
	dimParam protowire.Number = 2 // Dimension: string dim_param (oneof value)
)

// msg is one encoded protobuf message under construction. Fields are
// appended in the order written; protobuf readers accept any order, and a
// fixed order makes the bytes deterministic.
type msg []byte

func (m *msg) varint(f protowire.Number, v int64) {
	*m = protowire.AppendTag(*m, f, protowire.VarintType)
	*m = protowire.AppendVarint(*m, uint64(v)) // int64 fields: two's complement, 10 bytes when negative
}

func (m *msg) str(f protowire.Number, s string) {
	*m = protowire.AppendTag(*m, f, protowire.BytesType)
	*m = protowire.AppendString(*m, s)
}

func (m *msg) bytes(f protowire.Number, b []byte) {
	*m = protowire.AppendTag(*m, f, protowire.BytesType)
	*m = protowire.AppendBytes(*m, b)
}

func (m *msg) sub(f protowire.Number, b msg) { m.bytes(f, b) }

func tensorF32(name string, dims []int64, v []float32) msg {
	raw := make([]byte, 4*len(v))
	for i, x := range v {
		binary.LittleEndian.PutUint32(raw[4*i:], math.Float32bits(x))
	}
	return tensorRaw(name, dataTypeFloat, dims, raw)
}

// tensorI64 encodes an INT64 TensorProto with its values in raw_data.
func tensorI64(name string, dims []int64, v []int64) msg {
	raw := make([]byte, 8*len(v))
	for i, x := range v {
		binary.LittleEndian.PutUint64(raw[8*i:], uint64(x))
	}
	return tensorRaw(name, dataTypeInt64, dims, raw)
}

func tensorRaw(name string, dtype int64, dims []int64, raw []byte) msg {
	var t msg
	for _, d := range dims {
		t.varint(tensorDims, d) // unpacked; proto2 readers accept both forms
	}
	t.varint(tensorDataType, dtype)
	if name != "" {
		t.str(tensorName, name)
	}
	t.bytes(tensorRawData, raw)
	return t
}

// attribute encoders: one AttributeProto each, with its type set, as IR
// version 2 and later require.
func attrInt(name string, v int64) msg {
	var a msg
	a.str(attrName, name)
	a.varint(attrType, attrTypeInt)
	a.varint(attrI, v)
	return a
}

func attrFloat(name string, v float32) msg {
	var a msg
	a.str(attrName, name)
	a.varint(attrType, attrTypeFloat)
	a = protowire.AppendTag(a, attrF, protowire.Fixed32Type)
	a = protowire.AppendFixed32(a, math.Float32bits(v))
	return a
}

// valueInfo encodes a ValueInfoProto for a tensor of element type elem;
// a dimension below 0 is written as the symbolic dimension "N" (the batch).
func valueInfo(name string, elem int64, dims []int64, doc string) msg {
	var shape msg
	for _, d := range dims {
		var dim msg
		if d < 0 {
			dim.str(dimParam, "N")
		} else {
			dim.varint(dimValue, d)
		}
		shape.sub(shapeDim, dim)
	}
	var tt msg
	tt.varint(tensorTypeElem, elem)
	tt.sub(tensorTypeShape, shape)
	var typ msg
	typ.sub(typeTensor, tt)
	var v msg
	v.str(valueName, name)
	v.sub(valueType, typ)
	if doc != "" {
		v.str(valueDocString, doc)
	}
	return v
}
