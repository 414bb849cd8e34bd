package modelio

import (
	"fmt"
	"slices"

	"google.golang.org/protobuf/proto"

	"fovea/modelio/onnxpb"
)

// SubInput is one input of a sub-model: an existing tensor of the graph
// that the sub-model receives instead of computing it. Symbolic lists the
// per-image axes (0 = the first axis after the batch) whose size the
// sub-model leaves open, so that one session can run crops of any size;
// the batch is always open.
type SubInput struct {
	Name     string
	Symbolic []int
}

// SubModel cuts out of the model's own graph the nodes that compute outputs
// from inputs, and returns them as a model of their own: the same
// operators, attributes and weights (nothing is re-implemented), the
// given tensors as its float32 inputs, the named tensors as its outputs.
// Nodes that compute only from weights (constant folding) come along.
// It fails, naming the tensor, when the outputs also depend on a graph input
// that is not among inputs: the cut does not separate them.
//
// The original value_info is left out (the sub-model's own sizes may be
// open), and so are the declared output shapes. The result keeps the
// model's folder, so that external weight files are found.
func (m *Model) SubModel(inputs []SubInput, outputs []string) (*Model, error) {
	g := m.g
	isIn := map[string]bool{}
	for _, in := range inputs {
		if !g.has(in.Name) {
			return nil, m.errf(KindNotFound, "sub-model: no tensor named %q", in.Name)
		}
		isIn[in.Name] = true
	}
	need := map[int]bool{}
	usedInit := map[string]bool{}
	stack := slices.Clone(outputs)
	seen := map[string]bool{}
	for len(stack) > 0 {
		name := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		if name == "" || seen[name] || isIn[name] {
			continue
		}
		seen[name] = true
		if _, ok := g.inits[name]; ok {
			usedInit[name] = true
			continue
		}
		if _, ok := g.inputs[name]; ok {
			return nil, m.errf(KindUnsupported, "sub-model: its outputs depend on the model input %q, which is not one of its inputs", name)
		}
		p, ok := g.producer[name]
		if !ok {
			return nil, m.errf(KindNotFound, "sub-model: no tensor named %q", name)
		}
		if need[p] {
			continue
		}
		need[p] = true
		stack = append(stack, g.nodes[p].GetInput()...)
		// Sub-graphs (If, Loop) may read outer tensors; the cut does not
		// follow them.
		for _, a := range g.nodes[p].GetAttribute() {
			if a.GetG() != nil || len(a.GetGraphs()) > 0 {
				return nil, m.errf(KindUnsupported, "sub-model: node %q (%s) has a sub-graph", g.names[p], g.nodes[p].GetOpType())
			}
		}
	}
	gp := m.pb.GetGraph()
	ng := &onnxpb.GraphProto{Name: gp.GetName() + "_part"}
	for _, i := range g.order {
		if need[i] {
			ng.Node = append(ng.Node, g.nodes[i])
		}
	}
	for _, t := range gp.GetInitializer() {
		if usedInit[t.GetName()] {
			ng.Initializer = append(ng.Initializer, t)
		}
	}
	for _, in := range inputs {
		ti := g.info[in.Name]
		if ti == nil || !ti.static() {
			return nil, m.errf(KindUnsupported, "sub-model: the shape of %q is not known", in.Name)
		}
		shape := &onnxpb.TensorShapeProto{}
		for i, d := range ti.shape {
			dim := &onnxpb.TensorShapeProto_Dimension{}
			switch {
			case i == 0:
				dim.Value = &onnxpb.TensorShapeProto_Dimension_DimParam{DimParam: "batch"}
			case slices.Contains(in.Symbolic, i-1):
				dim.Value = &onnxpb.TensorShapeProto_Dimension_DimParam{DimParam: fmt.Sprintf("size%d", i)}
			default:
				dim.Value = &onnxpb.TensorShapeProto_Dimension_DimValue{DimValue: d.Size}
			}
			shape.Dim = append(shape.Dim, dim)
		}
		ng.Input = append(ng.Input, &onnxpb.ValueInfoProto{Name: in.Name, Type: &onnxpb.TypeProto{
			Value: &onnxpb.TypeProto_TensorType{TensorType: &onnxpb.TypeProto_Tensor{ElemType: dtFloat, Shape: shape}}}})
	}
	for _, out := range outputs {
		elem := int32(dtFloat)
		if t := g.info[out]; t != nil && t.elem != 0 {
			elem = t.elem
		}
		ng.Output = append(ng.Output, &onnxpb.ValueInfoProto{Name: out, Type: &onnxpb.TypeProto{
			Value: &onnxpb.TypeProto_TensorType{TensorType: &onnxpb.TypeProto_Tensor{ElemType: elem}}}})
	}
	pb := m.pb
	nm := &onnxpb.ModelProto{
		IrVersion:       pb.GetIrVersion(),
		OpsetImport:     pb.GetOpsetImport(),
		ProducerName:    pb.GetProducerName(),
		ProducerVersion: pb.GetProducerVersion(),
		Domain:          pb.GetDomain(),
		ModelVersion:    pb.GetModelVersion(),
		Graph:           ng,
		Functions:       pb.GetFunctions(),
	}
	b, err := proto.Marshal(nm)
	if err != nil {
		return nil, wrapErr(m.file, KindInvalid, err, "serialising a sub-model")
	}
	return decode(b, m.file+" (part)", m.dir)
}
