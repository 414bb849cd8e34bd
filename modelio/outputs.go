package modelio

import (
	"fmt"
	"maps"
	"strings"

	"google.golang.org/protobuf/proto"

	"fovea/modelio/onnxpb"
)

// WithOutputs returns the model serialised with the tensors names added as
// graph outputs (after the model's own outputs, which stay first and
// unchanged). Each extra output is declared with its element type and with
// the statically known shape, symbolic or unknown dimensions left open.
// Names that are already outputs are skipped. Weights are not copied apart
// from the one serialisation the result needs.
func (m *Model) WithOutputs(names []string) ([]byte, error) {
	return m.WithSummaries(names, nil)
}

// WithSummaries is WithOutputs that also adds, for each of sums, the nodes
// computing its per-channel summary and an output named
// SummaryName(tensor) (see Summary). Every summarised tensor must pass
// SummaryDims.
func (m *Model) WithSummaries(names []string, sums []Summary) ([]byte, error) {
	g := m.g
	gp := m.pb.GetGraph()
	have := map[string]bool{}
	for _, o := range gp.GetOutput() {
		have[o.GetName()] = true
	}
	outs := append([]*onnxpb.ValueInfoProto(nil), gp.GetOutput()...)
	for _, name := range names {
		if have[name] {
			continue
		}
		if _, ok := g.producer[name]; !ok {
			return nil, m.errf(KindNotFound, "no node computes a tensor named %q", name)
		}
		have[name] = true
		outs = append(outs, m.valueInfo(name))
	}
	nodes, inits := gp.GetNode(), gp.GetInitializer()
	if len(sums) > 0 {
		sn, si, so, err := m.summaryNodes(sums)
		if err != nil {
			return nil, err
		}
		// New slices: the model's own graph is shared and must not change.
		nodes = append(append([]*onnxpb.NodeProto(nil), nodes...), sn...)
		inits = append(append([]*onnxpb.TensorProto(nil), inits...), si...)
		outs = append(outs, so...)
	}
	// A new GraphProto sharing every field of the original except Output
	// (and, with summaries, Node and Initializer): the nodes and
	// initializers themselves are not copied.
	ng := &onnxpb.GraphProto{
		Node:                   nodes,
		Name:                   gp.GetName(),
		Initializer:            inits,
		SparseInitializer:      gp.GetSparseInitializer(),
		DocString:              gp.GetDocString(),
		Input:                  gp.GetInput(),
		Output:                 outs,
		ValueInfo:              gp.GetValueInfo(),
		QuantizationAnnotation: gp.GetQuantizationAnnotation(),
	}
	pb := m.pb
	nm := &onnxpb.ModelProto{
		IrVersion:       pb.GetIrVersion(),
		OpsetImport:     pb.GetOpsetImport(),
		ProducerName:    pb.GetProducerName(),
		ProducerVersion: pb.GetProducerVersion(),
		Domain:          pb.GetDomain(),
		ModelVersion:    pb.GetModelVersion(),
		DocString:       pb.GetDocString(),
		Graph:           ng,
		MetadataProps:   pb.GetMetadataProps(),
		TrainingInfo:    pb.GetTrainingInfo(),
		Functions:       pb.GetFunctions(),
	}
	b, err := proto.Marshal(nm)
	if err != nil {
		return nil, wrapErr(m.file, KindInvalid, err, "serialising the model with extra outputs")
	}
	return b, nil
}

func (m *Model) valueInfo(name string) *onnxpb.ValueInfoProto {
	t := m.g.info[name]
	elem := int32(dtFloat)
	var shape *onnxpb.TensorShapeProto
	if t != nil {
		if t.elem != 0 {
			elem = t.elem
		}
		if t.shape != nil && t.src == SourceStatic {
			shape = &onnxpb.TensorShapeProto{}
			for _, d := range t.shape {
				dim := &onnxpb.TensorShapeProto_Dimension{}
				switch {
				case d.Known():
					dim.Value = &onnxpb.TensorShapeProto_Dimension_DimValue{DimValue: d.Size}
				case d.Param != "":
					dim.Value = &onnxpb.TensorShapeProto_Dimension_DimParam{DimParam: d.Param}
				}
				shape.Dim = append(shape.Dim, dim)
			}
		}
	}
	return &onnxpb.ValueInfoProto{
		Name: name,
		Type: &onnxpb.TypeProto{Value: &onnxpb.TypeProto_TensorType{TensorType: &onnxpb.TypeProto_Tensor{ElemType: elem, Shape: shape}}},
	}
}

// Observe returns a copy of m whose layer table fills the shapes static
// inference left unknown from a real run: shapes maps tensor names (layer
// outputs) to the dims the runtime returned. Layers it fills get
// ShapeSource "observed"; their volumes, memory and multiply-accumulates,
// and those of the layers after them, are recomputed. A statically known
// shape is kept, with a note when the run disagrees. m itself does not
// change (a Model never does once opened), so code still reading it is not
// disturbed; the copy shares m's weights.
func (m *Model) Observe(shapes map[string][]int64) *Model {
	c := *m
	g := *m.g
	g.observed = maps.Clone(m.g.observed)
	if g.observed == nil {
		g.observed = map[string][]int64{}
	}
	for name, s := range shapes {
		ok := true
		for _, d := range s {
			if d < 0 || d > maxDim {
				ok = false
			}
		}
		if ok {
			g.observed[name] = append([]int64(nil), s...)
		}
	}
	c.g = &g
	c.analyse()
	return &c
}

// Limits applied by CheckRunnable.
const (
	MaxRunDim      = 1 << 20 // largest dimension of an input or activation
	MaxRunElements = 1 << 31 // largest element count of one image's input or activation
)

// CheckRunnable reports whether the model can be handed to a runtime: its
// weights are stored (not an architecture-only model), its input and every
// statically known activation stay within MaxRunDim per dimension and
// MaxRunElements per image. ONNX Runtime can spend minutes creating a
// session for absurd declared dimensions, or abort on a huge allocation;
// this check runs first.
func (m *Model) CheckRunnable() error {
	var weights []string
	for _, v := range m.Inputs {
		if v.Weight {
			weights = append(weights, v.Name)
		}
	}
	if len(weights) > 0 {
		if len(weights) > 3 {
			weights = append(weights[:3], "…")
		}
		return m.errf(KindUnsupported, "weights are declared as inputs without data (%s): an architecture-only model cannot be run", strings.Join(weights, ", "))
	}
	for _, v := range m.Inputs {
		if err := m.checkShape("input "+quote(v.Name), v.Shape); err != nil {
			return err
		}
	}
	for _, l := range m.Layers {
		if l.ShapeSource == SourceUnknown {
			continue
		}
		if err := m.checkShape(fmt.Sprintf("layer %q output", l.Name), l.Shape); err != nil {
			return err
		}
	}
	return nil
}

func (m *Model) checkShape(what string, s Shape) error {
	total := int64(1)
	for i, d := range s {
		if !d.Known() {
			continue
		}
		if d.Size > MaxRunDim {
			return m.errf(KindLimit, "%s: dimension %d is %d, above the limit of %d", what, i, d.Size, MaxRunDim)
		}
		if i > 0 || len(s) == 1 {
			total = satMul(total, d.Size)
		}
	}
	if total > MaxRunElements {
		return m.errf(KindLimit, "%s: %s is %d values per image, above the limit of %d", what, s, total, int64(MaxRunElements))
	}
	return nil
}
