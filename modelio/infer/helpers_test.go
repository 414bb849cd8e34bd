package infer

import (
	"math/rand/v2"
	"os"
	"path/filepath"
	"sync"
	"testing"

	"google.golang.org/protobuf/proto"

	"fovea/modelio"
	"fovea/modelio/onnxbuild"
	"fovea/modelio/onnxpb"
)

var (
	ortOnce sync.Once
	ortErr  error
)

// needORT loads the real ONNX Runtime library for the test. A missing or
// unusable library fails the test with the reason and the fetch command: a
// skipped runtime test must not count as passing.
func needORT(t testing.TB) {
	t.Helper()
	ortOnce.Do(func() {
		p, err := FindLibrary("")
		if err != nil {
			ortErr = err
			return
		}
		ortErr = Init(p)
	})
	if ortErr != nil {
		t.Fatalf("ONNX Runtime is needed for this test and is not usable: %v", ortErr)
	}
}

// ---- building small ONNX models: short names for modelio/onnxbuild ----

var (
	f32     = onnxbuild.FloatTensor
	ints    = onnxbuild.Ints
	intAttr = onnxbuild.Int
)

// i64 is a one-dimensional int64 tensor.
func i64(name string, data ...int64) *onnxpb.TensorProto {
	return onnxbuild.Int64Tensor(name, []int64{int64(len(data))}, data)
}

// vi declares a tensor; dims are int (fixed), string (symbolic) or nil
// (unknown).
func vi(name string, elem onnxpb.TensorProto_DataType, dims ...any) *onnxpb.ValueInfoProto {
	for i, d := range dims {
		if d == nil {
			dims[i] = -1 // onnxbuild: a negative size leaves the dimension without a value
		}
	}
	return onnxbuild.ValueInfo(name, int32(elem), dims...)
}

// node is a node with a name of its own (onnxbuild.Builder.Node names a
// node after its first output).
func node(op, name string, in, out []string, attrs ...*onnxpb.AttributeProto) *onnxpb.NodeProto {
	return &onnxpb.NodeProto{OpType: op, Name: name, Input: in, Output: out, Attribute: attrs}
}

func modelBytes(t testing.TB, g *onnxpb.GraphProto, opset int64, meta map[string]string) []byte {
	t.Helper()
	m := &onnxpb.ModelProto{
		IrVersion:    8,
		ProducerName: "fovea infer tests",
		OpsetImport:  []*onnxpb.OperatorSetIdProto{{Domain: "", Version: opset}},
		Graph:        g,
	}
	for k, v := range meta {
		m.MetadataProps = append(m.MetadataProps, &onnxpb.StringStringEntryProto{Key: k, Value: v})
	}
	b, err := proto.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// writeModel writes the model into a fresh folder and opens it with modelio.
func writeModel(t testing.TB, name string, b []byte) *modelio.Model {
	t.Helper()
	p := filepath.Join(t.TempDir(), name)
	if err := os.WriteFile(p, b, 0o644); err != nil {
		t.Fatal(err)
	}
	m, err := modelio.Open(p)
	if err != nil {
		t.Fatalf("modelio.Open(%s): %v", name, err)
	}
	return m
}

// randn returns n pseudo-random values in [-scale, scale) from a fixed seed.
func randn(seed uint64, n int, scale float32) []float32 {
	r := rand.New(rand.NewPCG(seed, 0x5eed))
	v := make([]float32, n)
	for i := range v {
		v[i] = (2*r.Float32() - 1) * scale
	}
	return v
}

// tinyCNN is a small image classifier in the usual shape: two Conv+Relu
// stages with max and average pooling, Flatten and a fully connected layer
// to 5 classes. Input "image" [batch,3,16,16] NCHW; batch is symbolic "N"
// unless fixed > 0. With softmax the output is probabilities, else logits.
func tinyCNN(fixed int, softmax bool) *onnxpb.GraphProto {
	var batch any = "N"
	if fixed > 0 {
		batch = fixed
	}
	g := &onnxpb.GraphProto{
		Name:  "tiny",
		Input: []*onnxpb.ValueInfoProto{vi("image", onnxpb.TensorProto_FLOAT, batch, 3, 16, 16)},
		Initializer: []*onnxpb.TensorProto{
			f32("w1", []int64{8, 3, 3, 3}, randn(1, 8*3*9, 0.4)),
			f32("b1", []int64{8}, randn(2, 8, 0.1)),
			f32("w2", []int64{16, 8, 3, 3}, randn(3, 16*8*9, 0.2)),
			f32("b2", []int64{16}, randn(4, 16, 0.1)),
			f32("wf", []int64{5, 16 * 4 * 4}, randn(5, 5*256, 0.1)),
			f32("bf", []int64{5}, randn(6, 5, 0.1)),
		},
		Node: []*onnxpb.NodeProto{
			node("Conv", "conv1", []string{"image", "w1", "b1"}, []string{"c1"}, ints("pads", 1, 1, 1, 1), ints("kernel_shape", 3, 3)),
			node("Relu", "relu1", []string{"c1"}, []string{"r1"}),
			node("MaxPool", "pool1", []string{"r1"}, []string{"p1"}, ints("kernel_shape", 2, 2), ints("strides", 2, 2)),
			node("Conv", "conv2", []string{"p1", "w2", "b2"}, []string{"c2"}, ints("pads", 1, 1, 1, 1), ints("kernel_shape", 3, 3)),
			node("Relu", "relu2", []string{"c2"}, []string{"r2"}),
			node("AveragePool", "pool2", []string{"r2"}, []string{"p2"}, ints("kernel_shape", 2, 2), ints("strides", 2, 2)),
			node("Flatten", "flat", []string{"p2"}, []string{"f"}, intAttr("axis", 1)),
			node("Gemm", "fc", []string{"f", "wf", "bf"}, []string{"logits"}, intAttr("transB", 1)),
		},
		Output: []*onnxpb.ValueInfoProto{vi("logits", onnxpb.TensorProto_FLOAT, batch, 5)},
	}
	if softmax {
		g.Node = append(g.Node, node("Softmax", "prob", []string{"logits"}, []string{"probs"}, intAttr("axis", 1)))
		g.Output = []*onnxpb.ValueInfoProto{vi("probs", onnxpb.TensorProto_FLOAT, batch, 5)}
	}
	return g
}

// tinyOutputs are the intermediate tensors of tinyCNN.
var tinyOutputs = []string{"c1", "r1", "p1", "c2", "r2", "p2", "f"}

func openTiny(t testing.TB, fixed int, softmax bool) *modelio.Model {
	t.Helper()
	return writeModel(t, "tiny.onnx", modelBytes(t, tinyCNN(fixed, softmax), 13, nil))
}

func newSession(t testing.TB, m *modelio.Model, opt Options) *Session {
	t.Helper()
	needORT(t)
	s, err := NewSession(m, opt)
	if err != nil {
		t.Fatalf("NewSession(%s): %v", m.Name, err)
	}
	t.Cleanup(func() { s.Close() })
	return s
}
