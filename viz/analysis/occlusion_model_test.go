package analysis

// Small ONNX models built by the tests with modelio/onnxbuild (ONNX IR
// version 8, opset 13), every weight given, so that every expected value can
// be worked out by hand from the weights.

import (
	"path/filepath"
	"testing"

	"fovea/modelio"
	"fovea/modelio/infer"
	"fovea/modelio/onnxbuild"
	"fovea/modelio/onnxpb"
	"fovea/modelio/testkit"
)

// graphBuilder names the nodes of an onnxbuild.Builder graph and declares
// inputs and outputs with the symbolic batch "N", the way these tests
// write their small models.
type graphBuilder struct {
	b *onnxbuild.Builder
}

func newGraph(name string) *graphBuilder {
	b := onnxbuild.New(13, onnxbuild.Zeros)
	b.Graph.Name = name
	b.Model.ProducerName = "fovea viz tests"
	return &graphBuilder{b: b}
}

// batchDims is dims with the first (batch) dimension the symbolic "N".
func batchDims(dims []int64) []any {
	out := []any{"N"}
	for _, d := range dims[1:] {
		out = append(out, d)
	}
	return out
}

// input declares a float graph input whose first dimension is the
// symbolic batch "N" (dims[0] is ignored).
func (g *graphBuilder) input(name string, dims ...int64) {
	g.b.Input(name, onnxbuild.Float, batchDims(dims)...)
}

func (g *graphBuilder) output(name string, dims ...int64) { g.b.Output(name, batchDims(dims)...) }

func (g *graphBuilder) init(name string, data []float32, dims ...int64) { g.b.Init(name, dims, data) }

func (g *graphBuilder) node(op, name string, in, out []string, attrs ...*onnxpb.AttributeProto) {
	g.b.Node(op, in, out, attrs...).Name = name
}

var (
	attrInts  = onnxbuild.Ints
	attrFloat = onnxbuild.FloatAttr
	attrInt   = onnxbuild.Int
)

// model serialises the graph as a model, writes it into a temporary folder
// and opens it with modelio, as the app would.
func (g *graphBuilder) model(t testing.TB) *modelio.Model {
	t.Helper()
	path := filepath.Join(t.TempDir(), g.b.Graph.Name+".onnx")
	if err := g.b.Write(path); err != nil {
		t.Fatal(err)
	}
	m, err := modelio.Open(path)
	if err != nil {
		t.Fatalf("opening the test model: %v", err)
	}
	return m
}

func newSession(t testing.TB, m *modelio.Model, opt infer.Options) *infer.Session {
	t.Helper()
	testkit.NeedRuntime(t)
	s, err := infer.NewSession(m, opt)
	if err != nil {
		t.Fatalf("session for the test model: %v", err)
	}
	t.Cleanup(func() { s.Close() })
	return s
}
