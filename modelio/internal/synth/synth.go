// Package synth writes synthetic ONNX image classifiers with random weights
// of realistic shapes and scale, for the benchmarks: a VGG-style stack of
// convolutions (of any depth and width: the demo's proportions, or VGG-16),
// and the 18-layer residual network.
//
// The weights are never held in memory as a whole: [Net.WriteTo] streams
// the protobuf encoding of the model, generating each initializer's values
// while it writes them, so that the VGG-16 file of about 553 MB is written
// with a buffer of one megabyte. The bytes are exactly those
// proto.MarshalOptions{Deterministic: true} would produce for the same model
// (synth_test.go checks it), so any ONNX reader accepts them.
//
// # Weights
//
// Weights are drawn from a uniform distribution scaled as He et al. 2015
// ("Delving Deep into Rectifiers") recommend for ReLU networks: the bound is
// sqrt(6 / fan_in), so activations keep roughly the same magnitude from layer
// to layer instead of growing to infinity or vanishing into subnormal
// numbers, which would change the speed of the arithmetic being measured.
// Biases are small, batch normalisation starts near the identity. Every
// initializer has its own seeded generator: a model is the same bytes every
// time it is written.
//
// # Layout
//
// The input is named "image", float32, NCHW [N][3][H][W] with a symbolic
// batch "N"; the output is "logits" [N][classes] (no softmax). Node names
// are the names of their outputs ("conv3", "relu3", ...).
package synth

import (
	"bufio"
	"encoding/binary"
	"fmt"
	"io"
	"math"
	"math/rand/v2"

	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	"fovea/modelio/onnxpb"

	"fovea/modelio/atomicfile"
)

// Net is a model being described: its graph without weight values, and for
// each initializer how to generate them.
type Net struct {
	Model *onnxpb.ModelProto
	Graph *onnxpb.GraphProto
	// Params counts the trainable values the way PyTorch does: convolution
	// and fully connected weights and biases, batch normalisation's scale and
	// shift (not its running mean and variance, which are buffers).
	Params int64
	// Values counts every float32 value of the initializers (the weights
	// part of the file is 4 × Values bytes).
	Values int64

	fills []fill // one per Graph.Initializer, in the same order
	count map[string]int
}

// fill says how to generate one initializer's values.
type fill struct {
	n      int64   // number of values
	bound  float32 // uniform in [-bound, bound) around centre
	centre float32
}

// New starts a network named name whose input is a 3-channel side×side
// image.
func New(name string, side int) *Net {
	g := &onnxpb.GraphProto{
		Name:  name,
		Input: []*onnxpb.ValueInfoProto{valueInfo("image", "N", 3, int64(side), int64(side))},
	}
	return &Net{
		Model: &onnxpb.ModelProto{
			IrVersion:       8,
			ProducerName:    "fovea-synth",
			ProducerVersion: "1",
			OpsetImport:     []*onnxpb.OperatorSetIdProto{{Domain: "", Version: 13}},
			Graph:           g,
		},
		Graph: g,
		count: map[string]int{},
	}
}

// valueInfo declares a float32 tensor; dims are int64 or string (symbolic).
func valueInfo(name string, dims ...any) *onnxpb.ValueInfoProto {
	sh := &onnxpb.TensorShapeProto{}
	for _, d := range dims {
		dim := &onnxpb.TensorShapeProto_Dimension{}
		switch v := d.(type) {
		case int64:
			dim.Value = &onnxpb.TensorShapeProto_Dimension_DimValue{DimValue: v}
		case int:
			dim.Value = &onnxpb.TensorShapeProto_Dimension_DimValue{DimValue: int64(v)}
		case string:
			dim.Value = &onnxpb.TensorShapeProto_Dimension_DimParam{DimParam: v}
		default:
			panic(fmt.Sprintf("synth: dimension %v of type %T", d, d))
		}
		sh.Dim = append(sh.Dim, dim)
	}
	return &onnxpb.ValueInfoProto{Name: name, Type: &onnxpb.TypeProto{Value: &onnxpb.TypeProto_TensorType{
		TensorType: &onnxpb.TypeProto_Tensor{ElemType: int32(onnxpb.TensorProto_FLOAT), Shape: sh}}}}
}

func (n *Net) name(prefix string) string {
	n.count[prefix]++
	return fmt.Sprintf("%s%d", prefix, n.count[prefix])
}

// weight declares a float32 initializer whose values are uniform in
// [centre-bound, centre+bound); trainable says whether it counts in Params.
func (n *Net) weight(name string, dims []int64, bound, centre float32, trainable bool) string {
	c := int64(1)
	for _, d := range dims {
		c *= d
	}
	n.Graph.Initializer = append(n.Graph.Initializer, &onnxpb.TensorProto{
		Name: name, Dims: dims, DataType: int32(onnxpb.TensorProto_FLOAT)})
	n.fills = append(n.fills, fill{n: c, bound: bound, centre: centre})
	n.Values += c
	if trainable {
		n.Params += c
	}
	return name
}

func (n *Net) node(op, out string, in []string, attrs ...*onnxpb.AttributeProto) string {
	n.Graph.Node = append(n.Graph.Node, &onnxpb.NodeProto{OpType: op, Name: out, Input: in, Output: []string{out}, Attribute: attrs})
	return out
}

func ints(name string, v ...int64) *onnxpb.AttributeProto {
	return &onnxpb.AttributeProto{Name: name, Type: onnxpb.AttributeProto_INTS, Ints: v}
}

func intAttr(name string, v int64) *onnxpb.AttributeProto {
	return &onnxpb.AttributeProto{Name: name, Type: onnxpb.AttributeProto_INT, I: v}
}

// heBound is the He-uniform bound sqrt(6 / fan_in).
func heBound(fanIn int) float32 { return float32(math.Sqrt(6 / float64(fanIn))) }

// Conv adds a k×k convolution from in to out channels with the given stride
// and padding on every side; without bias when bias is false (it is then
// followed by batch normalisation).
func (n *Net) Conv(x string, in, out, k, stride, pad int, bias bool) string {
	name := n.name("conv")
	fan := in * k * k
	inputs := []string{x, n.weight(name+"_w", []int64{int64(out), int64(in), int64(k), int64(k)}, heBound(fan), 0, true)}
	if bias {
		inputs = append(inputs, n.weight(name+"_b", []int64{int64(out)}, 0.05, 0, true))
	}
	p := int64(pad)
	return n.node("Conv", name, inputs, ints("kernel_shape", int64(k), int64(k)),
		ints("strides", int64(stride), int64(stride)), ints("pads", p, p, p, p))
}

// BatchNorm adds an inference-mode batch normalisation over c channels:
// scale near 1, shift near 0, running mean near 0, running variance near 1.
func (n *Net) BatchNorm(x string, c int) string {
	name := n.name("bn")
	d := []int64{int64(c)}
	in := []string{x,
		n.weight(name+"_scale", d, 0.1, 1, true),
		n.weight(name+"_shift", d, 0.05, 0, true),
		n.weight(name+"_mean", d, 0.05, 0, false),
		n.weight(name+"_var", d, 0.1, 1, false),
	}
	return n.node("BatchNormalization", name, in,
		&onnxpb.AttributeProto{Name: "epsilon", Type: onnxpb.AttributeProto_FLOAT, F: 1e-5})
}

// Relu adds a ReLU.
func (n *Net) Relu(x string) string { return n.node("Relu", n.name("relu"), []string{x}) }

// MaxPool adds k×k max pooling with the given stride and padding.
func (n *Net) MaxPool(x string, k, stride, pad int) string {
	p := int64(pad)
	return n.node("MaxPool", n.name("pool"), []string{x}, ints("kernel_shape", int64(k), int64(k)),
		ints("strides", int64(stride), int64(stride)), ints("pads", p, p, p, p))
}

// Add adds an element-wise sum (the residual connection).
func (n *Net) Add(x, y string) string { return n.node("Add", n.name("add"), []string{x, y}) }

// GlobalAveragePool adds a global average pooling.
func (n *Net) GlobalAveragePool(x string) string {
	return n.node("GlobalAveragePool", n.name("gap"), []string{x})
}

// Flatten adds a Flatten with axis 1.
func (n *Net) Flatten(x string) string {
	return n.node("Flatten", n.name("flatten"), []string{x}, intAttr("axis", 1))
}

// Gemm adds a fully connected layer in → out with bias, weights stored
// [out][in] (transB = 1, as PyTorch exports nn.Linear).
func (n *Net) Gemm(x string, in, out int) string {
	name := n.name("fc")
	w := n.weight(name+"_w", []int64{int64(out), int64(in)}, heBound(in), 0, true)
	b := n.weight(name+"_b", []int64{int64(out)}, 0.05, 0, true)
	return n.node("Gemm", name, []string{x, w, b}, intAttr("transB", 1))
}

// Output renames the tensor x to "logits" (the last node's output) and
// declares it as the graph's output with classes scores per image.
func (n *Net) Output(x string, classes int) {
	last := n.Graph.Node[len(n.Graph.Node)-1]
	if last.Output[0] != x {
		panic(fmt.Sprintf("synth: Output(%q) but the last node writes %q", x, last.Output[0]))
	}
	last.Output[0] = "logits"
	n.Graph.Output = []*onnxpb.ValueInfoProto{valueInfo("logits", "N", int64(classes))}
}

// Block is one stage of a VGG-style stack: convolutions of Width filters of
// side K (stride 1, padding K/2, each followed by ReLU), then 2×2 max
// pooling with stride 2.
type Block struct {
	Convs, Width, K int
}

// VGG builds a VGG-style stack on a side×side RGB input: the blocks, then
// Flatten and fully connected layers of the given widths (each followed by
// ReLU) and a last one to classes. The spatial side halves at every block,
// so it must divide by 2^len(blocks).
func VGG(name string, side int, blocks []Block, hidden []int, classes int) *Net {
	if side%(1<<len(blocks)) != 0 {
		panic(fmt.Sprintf("synth: VGG: side %d does not divide by 2^%d", side, len(blocks)))
	}
	n := New(name, side)
	x, c := "image", 3
	for _, b := range blocks {
		for range b.Convs {
			x = n.Relu(n.Conv(x, c, b.Width, b.K, 1, b.K/2, true))
			c = b.Width
		}
		x = n.MaxPool(x, 2, 2, 0)
		side /= 2
	}
	x = n.Flatten(x)
	in := c * side * side
	for _, h := range hidden {
		x = n.Relu(n.Gemm(x, in, h))
		in = h
	}
	n.Output(n.Gemm(x, in, classes), classes)
	return n
}

// VGG16 is configuration D of Simonyan & Zisserman, "Very Deep
// Convolutional Networks for Large-Scale Image Recognition" (ICLR 2015):
// thirteen 3×3 convolutions in blocks of 64-64, 128-128, 256×3, 512×3,
// 512×3, each block followed by 2×2 max pooling, then fully connected
// 4096-4096-classes, on a 224×224 input. With 1000 classes it has about
// 138 million parameters (Table 2), 553 MB at float32: the large model of
// the opening benchmark.
func VGG16(classes int) *Net {
	return VGG("vgg16", 224, []Block{{2, 64, 3}, {2, 128, 3}, {3, 256, 3}, {3, 512, 3}, {3, 512, 3}},
		[]int{4096, 4096}, classes)
}

// Parts is a stand-in of the demo classifier (assets/make_demo.py,
// PartsNet) for when assets/demo/parts.onnx is not there: a 64×64 input,
// a first convolution of 12 filters 7×7 with stride 2 and padding 3 and a
// ReLU (no pooling: the stride halves the side), then convolutions of 24,
// 32 and 32 filters 3×3, each followed by ReLU and 2×2 max pooling, then
// fully connected 512 → 64 → 7.
func Parts() *Net {
	n := New("parts", 64)
	x := n.Relu(n.Conv("image", 3, 12, 7, 2, 3, true))
	c := 12
	for _, w := range []int{24, 32, 32} {
		x = n.MaxPool(n.Relu(n.Conv(x, c, w, 3, 1, 1, true)), 2, 2, 0)
		c = w
	}
	x = n.Flatten(x)
	x = n.Relu(n.Gemm(x, c*4*4, 64))
	n.Output(n.Gemm(x, 64, 7), 7)
	return n
}

// ResNet18 is the 18-layer residual network of He, Zhang, Ren & Sun, "Deep
// Residual Learning for Image Recognition" (CVPR 2016), Table 1, laid out as
// in the common PyTorch definition (torchvision): a 7×7/2 convolution with
// 64 filters, 3×3/2 max pooling, four stages of two basic blocks (two 3×3
// convolutions) with 64, 128, 256 and 512 filters, the first block of
// stages 2–4 with stride 2 and a 1×1/2 projection on its shortcut; every
// convolution without bias and followed by batch normalisation; global
// average pooling and one fully connected layer, on a 224×224 input. He et
// al. give 11.7 million parameters for 1000 classes.
func ResNet18(classes int) *Net {
	n := New("resnet18", 224)
	x := n.Relu(n.BatchNorm(n.Conv("image", 3, 64, 7, 2, 3, false), 64))
	x = n.MaxPool(x, 3, 2, 1)
	in := 64
	for stage, c := range []int{64, 128, 256, 512} {
		for blk := range 2 {
			stride := 1
			if stage > 0 && blk == 0 {
				stride = 2
			}
			y := n.Relu(n.BatchNorm(n.Conv(x, in, c, 3, stride, 1, false), c))
			y = n.BatchNorm(n.Conv(y, c, c, 3, 1, 1, false), c)
			short := x
			if stride != 1 || in != c {
				short = n.BatchNorm(n.Conv(x, in, c, 1, stride, 0, false), c)
			}
			x = n.Relu(n.Add(y, short))
			in = c
		}
	}
	x = n.Flatten(n.GlobalAveragePool(x))
	n.Output(n.Gemm(x, 512, classes), classes)
	return n
}

// Protobuf field numbers (onnx.proto3) the streaming writer emits itself.
const (
	fieldModelGraph       = 7
	fieldGraphInitializer = 5
	fieldTensorRawData    = 9
)

// WriteTo writes the model's protobuf encoding to w, generating the weights
// on the way; it returns the number of bytes written. Fields come in field
// number order, as a deterministic proto.Marshal writes them.
func (n *Net) WriteTo(w io.Writer) (int64, error) {
	mo := proto.MarshalOptions{Deterministic: true}
	m, g := n.Model, n.Graph
	// ModelProto: fields 1-6, the graph (7), then 8 and above.
	head, err := mo.Marshal(&onnxpb.ModelProto{IrVersion: m.IrVersion, ProducerName: m.ProducerName,
		ProducerVersion: m.ProducerVersion, Domain: m.Domain, ModelVersion: m.ModelVersion, DocString: m.DocString})
	if err != nil {
		return 0, err
	}
	tail, err := mo.Marshal(&onnxpb.ModelProto{OpsetImport: m.OpsetImport, MetadataProps: m.MetadataProps,
		TrainingInfo: m.TrainingInfo, Functions: m.Functions})
	if err != nil {
		return 0, err
	}
	// GraphProto: node (1) and name (2), the initializers (5), then the rest.
	ghead, err := mo.Marshal(&onnxpb.GraphProto{Node: g.Node, Name: g.Name})
	if err != nil {
		return 0, err
	}
	gtail, err := mo.Marshal(&onnxpb.GraphProto{SparseInitializer: g.SparseInitializer, DocString: g.DocString,
		Input: g.Input, Output: g.Output, ValueInfo: g.ValueInfo, QuantizationAnnotation: g.QuantizationAnnotation})
	if err != nil {
		return 0, err
	}
	type entry struct {
		head      []byte // the TensorProto's fields before raw_data
		tensorLen int    // the whole TensorProto's length
	}
	entries := make([]entry, len(g.Initializer))
	graphLen := len(ghead) + len(gtail)
	for i, t := range g.Initializer {
		if len(t.RawData) != 0 || i >= len(n.fills) {
			panic(fmt.Sprintf("synth: initializer %q was not added by the builder", t.Name))
		}
		h, err := mo.Marshal(t)
		if err != nil {
			return 0, err
		}
		raw := 4 * int(n.fills[i].n)
		tl := len(h) + protowire.SizeTag(fieldTensorRawData) + protowire.SizeBytes(raw)
		entries[i] = entry{h, tl}
		graphLen += protowire.SizeTag(fieldGraphInitializer) + protowire.SizeBytes(tl)
	}

	bw := bufio.NewWriterSize(w, 1<<20)
	var written int64
	put := func(b []byte) {
		k, _ := bw.Write(b) // a write error sticks in bw and is returned by Flush
		written += int64(k)
	}
	var scratch []byte
	putLen := func(field protowire.Number, l int) {
		scratch = protowire.AppendTag(scratch[:0], field, protowire.BytesType)
		scratch = protowire.AppendVarint(scratch, uint64(l))
		put(scratch)
	}
	put(head)
	putLen(fieldModelGraph, graphLen)
	put(ghead)
	buf := make([]byte, 1<<20)
	for i, e := range entries {
		putLen(fieldGraphInitializer, e.tensorLen)
		put(e.head)
		f := n.fills[i]
		putLen(fieldTensorRawData, 4*int(f.n))
		rng := rand.New(rand.NewPCG(uint64(i)+1, 0x5eed))
		for left := f.n; left > 0; {
			k := min(left, int64(len(buf)/4))
			for j := range k {
				v := f.centre + f.bound*(2*rng.Float32()-1)
				binary.LittleEndian.PutUint32(buf[4*j:], math.Float32bits(v))
			}
			put(buf[:4*k])
			left -= k
		}
	}
	put(gtail)
	put(tail)
	return written, bw.Flush()
}

// WriteFile writes the model to path atomically (atomicfile.Write).
func (n *Net) WriteFile(path string) error {
	err := atomicfile.Write(path, 0o644, func(w io.Writer) error {
		_, err := n.WriteTo(w)
		return err
	})
	if err != nil {
		return fmt.Errorf("synth: %w", err)
	}
	return nil
}
