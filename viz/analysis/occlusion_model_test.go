package analysis

// Small ONNX models built by the tests, straight from the schema types
// (onnx.proto3, ONNX IR version 8, opset 13), so that every weight is known
// and every expected value can be worked out by hand from the weights.

import (
	"os"
	"path/filepath"
	"testing"

	"google.golang.org/protobuf/proto"

	"fovea/modelio"
	"fovea/modelio/infer"
	"fovea/modelio/onnxpb"
	"fovea/modelio/testkit"
)

// graphBuilder collects nodes and initializers of one graph.
type graphBuilder struct {
	g *onnxpb.GraphProto
}

func newGraph(name string) *graphBuilder {
	return &graphBuilder{g: &onnxpb.GraphProto{Name: name}}
}

func tensorType(dims []int64, batchParam string) *onnxpb.TypeProto {
	sh := &onnxpb.TensorShapeProto{}
	for i, d := range dims {
		if i == 0 && batchParam != "" {
			sh.Dim = append(sh.Dim, &onnxpb.TensorShapeProto_Dimension{Value: &onnxpb.TensorShapeProto_Dimension_DimParam{DimParam: batchParam}})
			continue
		}
		sh.Dim = append(sh.Dim, &onnxpb.TensorShapeProto_Dimension{Value: &onnxpb.TensorShapeProto_Dimension_DimValue{DimValue: d}})
	}
	return &onnxpb.TypeProto{Value: &onnxpb.TypeProto_TensorType{TensorType: &onnxpb.TypeProto_Tensor{
		ElemType: int32(onnxpb.TensorProto_FLOAT), Shape: sh}}}
}

// input declares a float graph input whose first dimension is the
// symbolic batch "N" (dims[0] is ignored).
func (b *graphBuilder) input(name string, dims ...int64) {
	b.g.Input = append(b.g.Input, &onnxpb.ValueInfoProto{Name: name, Type: tensorType(dims, "N")})
}

func (b *graphBuilder) output(name string, dims ...int64) {
	b.g.Output = append(b.g.Output, &onnxpb.ValueInfoProto{Name: name, Type: tensorType(dims, "N")})
}

func (b *graphBuilder) init(name string, data []float32, dims ...int64) {
	b.g.Initializer = append(b.g.Initializer, &onnxpb.TensorProto{Name: name, Dims: dims,
		DataType: int32(onnxpb.TensorProto_FLOAT), FloatData: data})
}

func (b *graphBuilder) node(op, name string, in, out []string, attrs ...*onnxpb.AttributeProto) {
	b.g.Node = append(b.g.Node, &onnxpb.NodeProto{OpType: op, Name: name, Input: in, Output: out, Attribute: attrs})
}

func attrInts(name string, v ...int64) *onnxpb.AttributeProto {
	return &onnxpb.AttributeProto{Name: name, Type: onnxpb.AttributeProto_INTS, Ints: v}
}

func attrFloat(name string, v float32) *onnxpb.AttributeProto {
	return &onnxpb.AttributeProto{Name: name, Type: onnxpb.AttributeProto_FLOAT, F: v}
}

func attrInt(name string, v int64) *onnxpb.AttributeProto {
	return &onnxpb.AttributeProto{Name: name, Type: onnxpb.AttributeProto_INT, I: v}
}

// model serialises the graph as a model, writes it into a temporary folder
// and opens it with modelio, as the app would.
func (b *graphBuilder) model(t testing.TB) *modelio.Model {
	t.Helper()
	mp := &onnxpb.ModelProto{IrVersion: 8, ProducerName: "fovea viz tests", Graph: b.g,
		OpsetImport: []*onnxpb.OperatorSetIdProto{{Domain: "", Version: 13}}}
	data, err := proto.Marshal(mp)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), b.g.Name+".onnx")
	if err := os.WriteFile(path, data, 0o644); err != nil {
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
