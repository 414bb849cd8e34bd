// Package onnxbuild builds small ONNX models in Go with the onnxpb types,
// for tests, benchmarks and examples: hand-sized graphs a person can check,
// hostile ones, graphs shaped the way other exporters write them, and
// synthetic networks the size of VGG-16 or ResNet-18. It is public (not
// under modelio/internal) so that every package's tests build their models
// with one builder instead of carrying copies.
//
// A Builder holds one ModelProto. Tensors are named by strings; the layer
// helpers (Conv, Relu, MaxPool, Gemm, ...) take the input tensor's name and
// return the output's, so a network reads top to bottom:
//
//	b := onnxbuild.New(13, onnxbuild.Random)
//	x := b.Input("image", onnxbuild.Float, "N", 3, 32, 32)
//	x = b.Relu(b.Conv(x, 3, 8, 3, 1, 1))
//	b.Output(b.Gemm(b.Flatten(b.GlobalAveragePool(x)), 8, 10))
//	err := b.Write("tiny.onnx")
//
// Weights are float32, NCHW/[M C kH kW] as ONNX wants them, and come in
// four kinds: Random (seeded, reproducible), Xorshift (seeded, smaller
// values), Zeros, or ArchitectureOnly (declared as graph inputs with shapes
// and no data).
package onnxbuild

import (
	"encoding/binary"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"

	"google.golang.org/protobuf/proto"

	"fovea/modelio/onnxpb"

	"fovea/modelio/atomicfile"
)

// Element types (onnx.proto TensorProto.DataType).
const (
	Float   int32 = 1
	Uint8   int32 = 2
	Int8    int32 = 3
	Int32   int32 = 6
	Int64   int32 = 7
	Float16 int32 = 10
	Double  int32 = 11
	BFloat  int32 = 16
)

// Weights says how helpers create weight tensors.
type Weights int

const (
	Random           Weights = iota // seeded uniform values in [-0.5, 0.5)
	Zeros                           // all zero (cheap, compresses well)
	ArchitectureOnly                // graph inputs with shapes and no data
	// Xorshift: values k/2000 - 0.25 in [-0.25, 0.25) with k = state mod
	// 1000 from a xorshift32 generator (Marsaglia 2003, shifts 13, 17, 5)
	// seeded with 2463534242. The command-line tests of package app were
	// written against these exact weights.
	Xorshift
)

// xorshiftSeed is the first state of the Xorshift weights.
const xorshiftSeed uint32 = 2463534242

// Builder assembles one model.
type Builder struct {
	Model   *onnxpb.ModelProto
	Graph   *onnxpb.GraphProto
	Weights Weights
	rng     *rand.Rand
	xs      uint32 // Xorshift state
	count   map[string]int
}

// New starts a model importing the default ONNX domain at opset (IR
// version 8, which every current runtime reads).
func New(opset int64, w Weights) *Builder {
	g := &onnxpb.GraphProto{Name: "graph"}
	return &Builder{
		Model: &onnxpb.ModelProto{
			IrVersion:    8,
			ProducerName: "onnxbuild",
			OpsetImport:  []*onnxpb.OperatorSetIdProto{{Domain: "", Version: opset}},
			Graph:        g,
		},
		Graph:   g,
		Weights: w,
		rng:     rand.New(rand.NewPCG(1, 2)),
		xs:      xorshiftSeed,
		count:   map[string]int{},
	}
}

// Name returns a fresh tensor or node name with the given prefix.
func (b *Builder) Name(prefix string) string {
	b.count[prefix]++
	return fmt.Sprintf("%s%d", prefix, b.count[prefix])
}

// Meta adds a metadata_props entry.
func (b *Builder) Meta(key, value string) {
	b.Model.MetadataProps = append(b.Model.MetadataProps, &onnxpb.StringStringEntryProto{Key: key, Value: value})
}

// ValueInfo makes a tensor ValueInfoProto; dims are int, int64 (negative =
// no value) or string (symbolic). Without dims the shape is left out.
func ValueInfo(name string, elem int32, dims ...any) *onnxpb.ValueInfoProto {
	tt := &onnxpb.TypeProto_Tensor{ElemType: elem}
	if dims != nil {
		tt.Shape = &onnxpb.TensorShapeProto{}
		for _, d := range dims {
			dim := &onnxpb.TensorShapeProto_Dimension{}
			switch v := d.(type) {
			case int:
				if v >= 0 {
					dim.Value = &onnxpb.TensorShapeProto_Dimension_DimValue{DimValue: int64(v)}
				}
			case int64:
				if v >= 0 {
					dim.Value = &onnxpb.TensorShapeProto_Dimension_DimValue{DimValue: v}
				}
			case string:
				dim.Value = &onnxpb.TensorShapeProto_Dimension_DimParam{DimParam: v}
			default:
				panic(fmt.Sprintf("onnxbuild: dimension %v of type %T", d, d))
			}
			tt.Shape.Dim = append(tt.Shape.Dim, dim)
		}
	}
	return &onnxpb.ValueInfoProto{Name: name, Type: &onnxpb.TypeProto{Value: &onnxpb.TypeProto_TensorType{TensorType: tt}}}
}

// Input declares a graph input and returns its name.
func (b *Builder) Input(name string, elem int32, dims ...any) string {
	b.Graph.Input = append(b.Graph.Input, ValueInfo(name, elem, dims...))
	return name
}

// Output declares a graph output (float32, shape left out unless dims are
// given).
func (b *Builder) Output(name string, dims ...any) {
	b.Graph.Output = append(b.Graph.Output, ValueInfo(name, Float, dims...))
}

// Node appends a node with the given inputs and outputs; its name is the
// first output's name.
func (b *Builder) Node(op string, inputs, outputs []string, attrs ...*onnxpb.AttributeProto) *onnxpb.NodeProto {
	n := &onnxpb.NodeProto{OpType: op, Input: inputs, Output: outputs, Attribute: attrs}
	if len(outputs) > 0 {
		n.Name = outputs[0]
	}
	b.Graph.Node = append(b.Graph.Node, n)
	return n
}

// Op appends a single-output node and returns the output's name (the op
// name in lower case with a counter).
func (b *Builder) Op(op string, inputs []string, attrs ...*onnxpb.AttributeProto) string {
	out := b.Name(strings.ToLower(op))
	b.Node(op, inputs, []string{out}, attrs...)
	return out
}

// Int, Ints, Float, Floats, String and TensorAttr make node attributes.
func Int(name string, v int64) *onnxpb.AttributeProto {
	return &onnxpb.AttributeProto{Name: name, Type: onnxpb.AttributeProto_INT, I: v}
}

func Ints(name string, v ...int64) *onnxpb.AttributeProto {
	return &onnxpb.AttributeProto{Name: name, Type: onnxpb.AttributeProto_INTS, Ints: v}
}

func FloatAttr(name string, v float32) *onnxpb.AttributeProto {
	return &onnxpb.AttributeProto{Name: name, Type: onnxpb.AttributeProto_FLOAT, F: v}
}

func Floats(name string, v ...float32) *onnxpb.AttributeProto {
	return &onnxpb.AttributeProto{Name: name, Type: onnxpb.AttributeProto_FLOATS, Floats: v}
}

func String(name, v string) *onnxpb.AttributeProto {
	return &onnxpb.AttributeProto{Name: name, Type: onnxpb.AttributeProto_STRING, S: []byte(v)}
}

func TensorAttr(name string, t *onnxpb.TensorProto) *onnxpb.AttributeProto {
	return &onnxpb.AttributeProto{Name: name, Type: onnxpb.AttributeProto_TENSOR, T: t}
}

// FloatTensor makes a float32 tensor with raw_data.
func FloatTensor(name string, dims []int64, data []float32) *onnxpb.TensorProto {
	raw := make([]byte, 4*len(data))
	for i, v := range data {
		binary.LittleEndian.PutUint32(raw[4*i:], math.Float32bits(v))
	}
	return &onnxpb.TensorProto{Name: name, Dims: dims, DataType: Float, RawData: raw}
}

// Int64Tensor makes an int64 tensor with raw_data (shapes, axes, pads).
func Int64Tensor(name string, dims []int64, data []int64) *onnxpb.TensorProto {
	raw := make([]byte, 8*len(data))
	for i, v := range data {
		binary.LittleEndian.PutUint64(raw[8*i:], uint64(v))
	}
	return &onnxpb.TensorProto{Name: name, Dims: dims, DataType: Int64, RawData: raw}
}

// Init adds a float32 initializer with the given values.
func (b *Builder) Init(name string, dims []int64, data []float32) string {
	b.Graph.Initializer = append(b.Graph.Initializer, FloatTensor(name, dims, data))
	return name
}

// InitTensor adds any tensor as an initializer.
func (b *Builder) InitTensor(t *onnxpb.TensorProto) string {
	b.Graph.Initializer = append(b.Graph.Initializer, t)
	return t.GetName()
}

// Ints64 adds a 1-D int64 initializer.
func (b *Builder) Ints64(name string, v ...int64) string {
	b.Graph.Initializer = append(b.Graph.Initializer, Int64Tensor(name, []int64{int64(len(v))}, v))
	return name
}

// Weight adds a weight tensor of the given dims according to b.Weights.
func (b *Builder) Weight(name string, dims ...int64) string {
	if b.Weights == ArchitectureOnly {
		ds := make([]any, len(dims))
		for i, d := range dims {
			ds[i] = d
		}
		return b.Input(name, Float, ds...)
	}
	n := int64(1)
	for _, d := range dims {
		n *= d
	}
	raw := make([]byte, 4*n)
	switch b.Weights {
	case Random:
		for i := int64(0); i < n; i++ {
			binary.LittleEndian.PutUint32(raw[4*i:], math.Float32bits(b.rng.Float32()-0.5))
		}
	case Xorshift:
		for i := int64(0); i < n; i++ {
			b.xs ^= b.xs << 13
			b.xs ^= b.xs >> 17
			b.xs ^= b.xs << 5
			binary.LittleEndian.PutUint32(raw[4*i:], math.Float32bits(float32(b.xs%1000)/2000-0.25))
		}
	}
	b.Graph.Initializer = append(b.Graph.Initializer, &onnxpb.TensorProto{Name: name, Dims: dims, DataType: Float, RawData: raw})
	return name
}

// ConvSpec describes a convolution for ConvWith; zero values mean stride 1,
// no padding, dilation 1, one group, with bias.
type ConvSpec struct {
	In, Out, K  int
	Stride, Pad int
	Dilation    int
	Group       int
	NoBias      bool
	AutoPad     string
	KH, KW      int // non-square kernels (override K)
	StrideH     int // non-square strides (override Stride for height)
	StrideW     int
	WeightName  string // default: <node>_w
}

// Conv adds a k×k convolution from in to out channels with bias.
func (b *Builder) Conv(x string, in, out, k, stride, pad int) string {
	return b.ConvWith(x, ConvSpec{In: in, Out: out, K: k, Stride: stride, Pad: pad})
}

// ConvWith adds a convolution described by s.
func (b *Builder) ConvWith(x string, s ConvSpec) string {
	name := b.Name("conv")
	kh, kw := s.K, s.K
	if s.KH > 0 {
		kh, kw = s.KH, s.KW
	}
	g := max(s.Group, 1)
	sh, sw := max(s.Stride, 1), max(s.Stride, 1)
	if s.StrideH > 0 {
		sh, sw = s.StrideH, s.StrideW
	}
	wname := s.WeightName
	if wname == "" {
		wname = name + "_w"
	}
	inputs := []string{x, b.Weight(wname, int64(s.Out), int64(s.In/g), int64(kh), int64(kw))}
	if !s.NoBias {
		inputs = append(inputs, b.Weight(name+"_b", int64(s.Out)))
	}
	attrs := []*onnxpb.AttributeProto{Ints("kernel_shape", int64(kh), int64(kw)), Ints("strides", int64(sh), int64(sw))}
	if s.AutoPad != "" {
		attrs = append(attrs, String("auto_pad", s.AutoPad))
	} else {
		p := int64(s.Pad)
		attrs = append(attrs, Ints("pads", p, p, p, p))
	}
	if s.Dilation > 1 {
		attrs = append(attrs, Ints("dilations", int64(s.Dilation), int64(s.Dilation)))
	}
	if g > 1 {
		attrs = append(attrs, Int("group", int64(g)))
	}
	b.Node("Conv", inputs, []string{name}, attrs...)
	return name
}

// Relu adds a Relu.
func (b *Builder) Relu(x string) string { return b.Op("Relu", []string{x}) }

// MaxPool adds a k×k max pooling.
func (b *Builder) MaxPool(x string, k, stride, pad int) string {
	p := int64(pad)
	return b.Op("MaxPool", []string{x}, Ints("kernel_shape", int64(k), int64(k)),
		Ints("strides", int64(stride), int64(stride)), Ints("pads", p, p, p, p))
}

// AveragePool adds a k×k average pooling.
func (b *Builder) AveragePool(x string, k, stride, pad int) string {
	p := int64(pad)
	return b.Op("AveragePool", []string{x}, Ints("kernel_shape", int64(k), int64(k)),
		Ints("strides", int64(stride), int64(stride)), Ints("pads", p, p, p, p))
}

// GlobalAveragePool adds a global average pooling.
func (b *Builder) GlobalAveragePool(x string) string {
	return b.Op("GlobalAveragePool", []string{x})
}

// BatchNorm adds a BatchNormalization over c channels (scale, bias, mean,
// variance as weights; variance is set to 1 for Random and Zeros weights).
func (b *Builder) BatchNorm(x string, c int) string {
	name := b.Name("bn")
	in := []string{x}
	for _, part := range []string{"scale", "bias", "mean", "var"} {
		wn := name + "_" + part
		if part == "var" && b.Weights != ArchitectureOnly {
			ones := make([]float32, c)
			for i := range ones {
				ones[i] = 1
			}
			in = append(in, b.Init(wn, []int64{int64(c)}, ones))
			continue
		}
		in = append(in, b.Weight(wn, int64(c)))
	}
	b.Node("BatchNormalization", in, []string{name}, FloatAttr("epsilon", 1e-5))
	return name
}

// Add adds an elementwise Add.
func (b *Builder) Add(x, y string) string { return b.Op("Add", []string{x, y}) }

// Flatten adds a Flatten with axis 1.
func (b *Builder) Flatten(x string) string { return b.Op("Flatten", []string{x}, Int("axis", 1)) }

// Gemm adds a fully connected layer in → out (weights stored [out, in],
// transB = 1, as PyTorch exports Linear).
func (b *Builder) Gemm(x string, in, out int) string {
	name := b.Name("fc")
	w := b.Weight(name+"_w", int64(out), int64(in))
	bias := b.Weight(name+"_b", int64(out))
	b.Node("Gemm", []string{x, w, bias}, []string{name}, Int("transB", 1))
	return name
}

// Softmax adds a Softmax over axis 1.
func (b *Builder) Softmax(x string) string { return b.Op("Softmax", []string{x}, Int("axis", 1)) }

// Bytes serialises the model (deterministically).
func (b *Builder) Bytes() ([]byte, error) {
	return proto.MarshalOptions{Deterministic: true}.Marshal(b.Model)
}

// Write serialises the model to path atomically (temporary file in the same
// folder, then rename).
func (b *Builder) Write(path string) error {
	data, err := b.Bytes()
	if err != nil {
		return err
	}
	return WriteFile(path, data)
}

// WriteFile writes data to path atomically (atomicfile.WriteBytes).
func WriteFile(path string, data []byte) error {
	return atomicfile.WriteBytes(path, data, 0o644)
}
