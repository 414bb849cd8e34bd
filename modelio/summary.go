package modelio

import (
	"fmt"

	"fovea/modelio/onnxpb"
)

// Per-channel summaries computed inside the graph.
//
// A folder scan needs, for every image and channel of a map, its largest
// value, where that value first occurs, its smallest value and its sum.
// Returning the whole maps for Go to read costs more than reading them: the
// runtime copies every map into a graph output (18 MB per 224×224 image for
// the activations of a ResNet-18), and a map that is a graph output cannot
// stay in the runtime's blocked layout. Reductions added to the graph read
// each map where it is, on the runtime's threads, and return four numbers
// per channel.

// The columns of a summary output, [N][C][SummaryWidth] (or [N][C][1] for a
// Summary with MaxOnly).
const (
	SummaryMax   = iota // largest value (ReduceMax)
	SummaryMin          // smallest value (ReduceMin)
	SummarySum          // sum of the values in float32 (ReduceSum)
	SummaryArg          // flat position of the first largest value (ArgMax), as float32
	SummaryWidth        // number of columns
)

// Summary asks for the per-channel figures of one tensor of shape
// [N][C][spatial...]: all of them, or only the largest value.
type Summary struct {
	Tensor  string
	MaxOnly bool
}

// SummaryName is the name of the graph output that holds the summary of
// tensor.
func SummaryName(tensor string) string { return "fovea.summary:" + tensor }

// maxSummaryPositions bounds the positions per channel: ArgMax's result is
// returned as float32, exact up to 2^24.
const maxSummaryPositions = 1 << 24

// SummaryDims returns the per-image dimensions [C, spatial...] of tensor
// when its summary can be computed in the graph: a float32 tensor of rank 2
// or more whose dimensions after the batch are all statically known, in a
// model whose default-domain operator set has the operators it needs
// (version 7 or later). Otherwise the caller reads the whole tensor.
func (m *Model) SummaryDims(tensor string) ([]int64, bool) {
	o := m.opset()
	if o < 7 || m.g == nil {
		return nil, false
	}
	if _, ok := m.g.producer[tensor]; !ok {
		return nil, false
	}
	if _, clash := m.g.producer[SummaryName(tensor)]; clash {
		return nil, false
	}
	t := m.g.info[tensor]
	if t == nil || t.shape == nil || t.src != SourceStatic || len(t.shape) < 2 || (t.elem != 0 && t.elem != dtFloat) {
		return nil, false
	}
	dims := make([]int64, 0, len(t.shape)-1)
	positions := int64(1)
	for i, d := range t.shape[1:] {
		if !d.Known() || d.Size <= 0 {
			return nil, false
		}
		if i > 0 {
			positions *= d.Size
			if positions > maxSummaryPositions {
				return nil, false
			}
		}
		dims = append(dims, d.Size)
	}
	return dims, true
}

// summaryNodes appends to g the nodes and constants that compute the
// summaries, and returns the new nodes, initializers and output infos.
// Every summary must have passed SummaryDims.
func (m *Model) summaryNodes(sums []Summary) ([]*onnxpb.NodeProto, []*onnxpb.TensorProto, []*onnxpb.ValueInfoProto, error) {
	o := m.opset()
	const (
		flatName = "fovea.summary.flat"
		axesName = "fovea.summary.axes"
	)
	for _, n := range []string{flatName, axesName} {
		if _, clash := m.g.producer[n]; clash || m.g.inits[n] != nil {
			return nil, nil, nil, m.errf(KindInvalid, "the model already has a tensor named %q", n)
		}
	}
	// The two constants are Constant nodes, not initializers: models of IR
	// version 3 must list every initializer among the graph's inputs, and
	// the runtime refuses one that no node reads.
	var nodes []*onnxpb.NodeProto
	var inits []*onnxpb.TensorProto
	constant := func(name string, v ...int64) {
		t := &onnxpb.TensorProto{Name: name, DataType: dtInt64, Dims: []int64{int64(len(v))}, Int64Data: v}
		nodes = append(nodes, &onnxpb.NodeProto{OpType: "Constant", Name: name, Output: []string{name},
			Attribute: []*onnxpb.AttributeProto{{Name: "value", Type: onnxpb.AttributeProto_TENSOR, T: t}}})
	}
	constant(flatName, 0, 0, -1)
	axesUsed := false
	ints := func(name string, v ...int64) *onnxpb.AttributeProto {
		return &onnxpb.AttributeProto{Name: name, Type: onnxpb.AttributeProto_INTS, Ints: v}
	}
	one := func(name string, v int64) *onnxpb.AttributeProto {
		return &onnxpb.AttributeProto{Name: name, Type: onnxpb.AttributeProto_INT, I: v}
	}
	var outs []*onnxpb.ValueInfoProto
	for i, s := range sums {
		dims, ok := m.SummaryDims(s.Tensor)
		if !ok {
			return nil, nil, nil, m.errf(KindInvalid, "tensor %q cannot be summarised in the graph", s.Tensor)
		}
		p := fmt.Sprintf("fovea.summary.%d.", i)
		node := func(op string, in []string, attrs ...*onnxpb.AttributeProto) string {
			out := p + op
			nodes = append(nodes, &onnxpb.NodeProto{OpType: op, Name: out, Input: in, Output: []string{out}, Attribute: attrs})
			return out
		}
		// reduce adds a reduction over the positions (axis 2 of the
		// flattened map), keeping the axis: [N][C][1]. The axes moved from
		// an attribute to an input in operator set 18 (ReduceSum: 13).
		reduce := func(op string, x string, inputFrom int64) string {
			if o >= inputFrom {
				axesUsed = true
				return node(op, []string{x, axesName}, one("keepdims", 1))
			}
			return node(op, []string{x}, ints("axes", 2), one("keepdims", 1))
		}
		flat := node("Reshape", []string{s.Tensor, flatName})
		width := int64(SummaryWidth)
		var result string
		if s.MaxOnly {
			width = 1
			result = reduce("ReduceMax", flat, 18)
		} else {
			cols := make([]string, SummaryWidth)
			cols[SummaryMax] = reduce("ReduceMax", flat, 18)
			cols[SummaryMin] = reduce("ReduceMin", flat, 18)
			cols[SummarySum] = reduce("ReduceSum", flat, 13)
			// ArgMax returns the first position of the largest value
			// (select_last_index 0, the default since operator set 12 and
			// what the runtime does before it).
			arg := node("ArgMax", []string{flat}, one("axis", 2), one("keepdims", 1))
			cols[SummaryArg] = node("Cast", []string{arg}, one("to", dtFloat))
			result = node("Concat", cols, one("axis", 2))
		}
		// The result gets the output's name through an Identity, so the
		// node names above stay free of the tensor's own name.
		name := SummaryName(s.Tensor)
		nodes = append(nodes, &onnxpb.NodeProto{OpType: "Identity", Name: p + "out", Input: []string{result}, Output: []string{name}})
		batch := &onnxpb.TensorShapeProto_Dimension{}
		if b := m.g.info[s.Tensor].shape[0]; b.Known() {
			batch.Value = &onnxpb.TensorShapeProto_Dimension_DimValue{DimValue: b.Size}
		} else if b.Param != "" {
			batch.Value = &onnxpb.TensorShapeProto_Dimension_DimParam{DimParam: b.Param}
		}
		outs = append(outs, &onnxpb.ValueInfoProto{
			Name: name,
			Type: &onnxpb.TypeProto{Value: &onnxpb.TypeProto_TensorType{TensorType: &onnxpb.TypeProto_Tensor{
				ElemType: dtFloat,
				Shape: &onnxpb.TensorShapeProto{Dim: []*onnxpb.TensorShapeProto_Dimension{
					batch,
					{Value: &onnxpb.TensorShapeProto_Dimension_DimValue{DimValue: dims[0]}},
					{Value: &onnxpb.TensorShapeProto_Dimension_DimValue{DimValue: width}},
				}},
			}}},
		})
	}
	if axesUsed {
		// Before its readers: the nodes stay in topological order.
		constant(axesName, 2)
		nodes = append(nodes[len(nodes)-1:], nodes[:len(nodes)-1]...)
	}
	return nodes, inits, outs, nil
}
