package modelio

import (
	"encoding/json"
	"fmt"
	"sort"
	"strconv"
	"strings"

	"fovea/modelio/onnxpb"
)

// Model is an opened ONNX model: its summary, its layer table and access to
// its weights. A Model does not change once opened (Observe returns a new
// one) and is safe for concurrent use.
type Model struct {
	Path, Name                string // Path as given to Open ("" for Decode); Name: file name without folder
	IRVersion                 int64
	Producer, ProducerVersion string
	Opsets                    map[string]int64 // domain ("" = ai.onnx) -> version
	Metadata                  map[string]string
	Inputs, Outputs           []Value     // graph inputs that are not initializers; graph outputs
	Image                     *ImageInput // nil when no input looks like an image
	Labels                    []string    // from metadata key "labels", when present
	Layers                    []Layer     // execution order
	Total                     Totals      // sums over Layers
	Notes                     []string    // things a person should know (two image-like inputs, missing weights, ...)

	file string // name used in messages
	dir  string // absolute folder for external data, "" when decoded from memory
	buf  []byte // the encoded model; initializer raw_data points into it
	pb   *onnxpb.ModelProto
	g    *graph
	// flags keeps KernelFlags' results: they depend on the weights alone,
	// which never change once the model is open.
	flags *flagMemo
}

// Value is a graph input or output.
type Value struct {
	Name, ElemType string // ElemType: "float32", "int64", ... ("" when not a tensor)
	Shape          Shape  // nil when the file declares no shape
	// Weight is true for inputs that only feed weight positions (Conv
	// weights, Gemm matrices, ...): architecture-only models declare their
	// weights as inputs without data.
	Weight bool
}

// Dim is one dimension: Size ≥ 0 when known, -1 when not; Param is the
// symbolic name when the file gives one ("N", "batch").
type Dim struct {
	Size  int64
	Param string
}

// Known reports whether the dimension has a numeric size.
func (d Dim) Known() bool { return d.Size >= 0 }

func (d Dim) String() string {
	switch {
	case d.Size >= 0:
		return strconv.FormatInt(d.Size, 10)
	case d.Param != "":
		return d.Param
	}
	return "?"
}

// Shape is a tensor shape, outermost dimension first.
type Shape []Dim

// String renders the shape as "N×3×64×64" ("?" for unknown dimensions,
// "scalar" for rank 0).
func (s Shape) String() string {
	if s == nil {
		return "?"
	}
	if len(s) == 0 {
		return "scalar"
	}
	parts := make([]string, len(s))
	for i, d := range s {
		parts[i] = d.String()
	}
	return strings.Join(parts, "×")
}

// Ints returns the sizes, -1 for unknown dimensions.
func (s Shape) Ints() []int64 {
	out := make([]int64, len(s))
	for i, d := range s {
		out[i] = d.Size
	}
	return out
}

// ShapeOf makes a Shape from sizes (negative = unknown).
func ShapeOf(sizes ...int64) Shape {
	s := make(Shape, len(sizes))
	for i, v := range sizes {
		if v < 0 {
			v = -1
		}
		s[i] = Dim{Size: v}
	}
	return s
}

// ImageInput describes the input that looks like an image.
type ImageInput struct {
	Name     string
	Layout   Layout // LayoutNCHW or LayoutNHWC
	Channels int    // 0 = symbolic
	Height   int    // 0 = symbolic
	Width    int    // 0 = symbolic
	// BatchFixed is the fixed batch size, 0 when the batch is symbolic.
	BatchFixed int
	// Why says how the layout was decided (first op after the input, or the
	// position of the 1/3/4-sized dimension).
	Why string
}

// Layer is one row of the layer table: a node whose output is a feature
// volume or a vector computed from the model's inputs.
type Layer struct {
	Name, Op, Output string // node name (or op_index when unnamed), op type, output tensor name
	// Inputs are the tensors the node reads, in the node's order (data
	// first, then weights and other operands; optional inputs left empty in
	// the file are left out). Model.LayerOf finds the layer computing one.
	Inputs []string
	Shape  Shape // model's own layout, batch first
	// Width, Height, Depth of the output volume for one image: rank-4
	// outputs per the tensor's layout (NCHW unless the image's NHWC axes
	// were tracked to it), rank 3 [N, C, L] as L×1×C, rank 2 [N, F] as
	// 1×1×F; -1 when unknown.
	Width, Height, Depth int64
	Params, MACs, Bytes  int64       // Bytes: output at float32 for batch 1
	RF, Jump             int         // receptive field (pixels) and cumulative stride w.r.t. the image; 0 = n/a
	ShapeSource          ShapeSource // SourceStatic, SourceObserved or SourceUnknown
	Note                 string      // why a shape is unknown, etc.
	// RFY, RFX and JumpY, JumpX are RF and Jump per image axis (height,
	// width); RF and Jump are the larger of the two. 0 = n/a.
	RFY, RFX, JumpY, JumpX int
	// CenterY, CenterX locate the centre of the receptive field of output
	// cell (0, 0) in input-image pixel coordinates, where the centre of
	// pixel k (0-indexed from the top or left edge) is at k, so the image
	// spans −0.5 … size−0.5. The receptive field of cell (0, 0) covers
	// pixels u … u+RF−1 along an axis, u ≤ 0 counting the padding, and its
	// centre is u + (RF−1)/2 (may be negative or half-integer); cell (i, j)
	// is centred at (CenterY + i·JumpY, CenterX + j·JumpX). Valid only when
	// HasCenter: false when RF is n/a or the padding depends on a size
	// static inference does not know (auto_pad SAME_* on a symbolic size,
	// Pad with pads computed at run time). See the package doc.
	CenterY, CenterX float64
	HasCenter        bool
}

// WHD renders the output volume as "64×64×16" (width×height×depth), "?" for
// unknown sizes.
func (l Layer) WHD() string {
	f := func(v int64) string {
		if v < 0 {
			return "?"
		}
		return strconv.FormatInt(v, 10)
	}
	return f(l.Width) + "×" + f(l.Height) + "×" + f(l.Depth)
}

// Totals sums the layer table.
type Totals struct{ Params, MACs, Bytes int64 }

// ShapeSource says where a layer's output shape came from. Its string is
// the spelling in JSON and in the command line's layer table.
type ShapeSource string

// The shape sources.
const (
	SourceStatic   ShapeSource = "static"   // inferred from the file without running it
	SourceObserved ShapeSource = "observed" // measured on a run (Model.Observe)
	SourceUnknown  ShapeSource = "unknown"  // neither: the note says why
)

// Layout is the axis order of an image tensor. Its string is the spelling
// in JSON, settings files and on the command line.
type Layout string

// The image layouts.
const (
	LayoutNCHW Layout = "nchw" // [n][c][h][w]: channels first, ONNX's order for convolutions
	LayoutNHWC Layout = "nhwc" // [n][h][w][c]: channels last
)

// build fills the summary and the layer table from m.pb.
func (m *Model) build() error {
	pb := m.pb
	m.IRVersion = pb.GetIrVersion()
	m.Producer = pb.GetProducerName()
	m.ProducerVersion = pb.GetProducerVersion()
	m.Opsets = map[string]int64{}
	for _, o := range pb.GetOpsetImport() {
		d := o.GetDomain()
		if d == "ai.onnx" {
			d = ""
		}
		m.Opsets[d] = o.GetVersion()
	}
	m.Metadata = map[string]string{}
	for _, kv := range pb.GetMetadataProps() {
		m.Metadata[kv.GetKey()] = kv.GetValue()
	}
	m.Labels = parseLabels(m.Metadata["labels"])

	g, err := m.newGraph()
	if err != nil {
		return err
	}
	m.g = g
	for _, vi := range pb.GetGraph().GetInput() {
		if _, isInit := g.inits[vi.GetName()]; isInit {
			continue
		}
		v, err := m.value("input", vi)
		if err != nil {
			return err
		}
		v.Weight = g.weightInput[v.Name]
		m.Inputs = append(m.Inputs, v)
	}
	for _, vi := range pb.GetGraph().GetOutput() {
		v, err := m.value("output", vi)
		if err != nil {
			return err
		}
		m.Outputs = append(m.Outputs, v)
	}
	m.findImage()
	if len(g.weightInput) > 0 {
		names := make([]string, 0, len(g.weightInput))
		for n := range g.weightInput {
			names = append(names, n)
		}
		sort.Strings(names)
		m.Notes = append(m.Notes, strconv.Itoa(len(names))+" weight tensors are declared as inputs without data (architecture only): the layer table is complete, the model cannot be run")
	}
	m.analyse()
	return nil
}

// value converts a ValueInfoProto. Negative declared dimensions (some
// converters write -1 for "unknown") are read as unknown, with a note.
func (m *Model) value(what string, vi *onnxpb.ValueInfoProto) (Value, error) {
	v := Value{Name: vi.GetName()}
	tt := vi.GetType().GetTensorType()
	if tt == nil {
		return v, nil
	}
	v.ElemType = ElemTypeName(tt.GetElemType())
	s, bad := shapeFromProto(tt.GetShape())
	if bad >= 0 {
		m.Notes = append(m.Notes, fmt.Sprintf("%s %q declares dimension %d as %d; read as unknown", what, vi.GetName(), bad, tt.GetShape().GetDim()[bad].GetDimValue()))
	}
	v.Shape = s
	return v, nil
}

// shapeFromProto converts a declared shape (nil when none is declared).
// Negative dim_values become unknown; bad is the first such dimension, -1
// when there is none.
func shapeFromProto(sp *onnxpb.TensorShapeProto) (s Shape, bad int) {
	bad = -1
	if sp == nil {
		return nil, bad
	}
	s = make(Shape, len(sp.GetDim()))
	for i, d := range sp.GetDim() {
		switch v := d.GetValue().(type) {
		case *onnxpb.TensorShapeProto_Dimension_DimValue:
			if v.DimValue < 0 {
				s[i] = unknownDim
				if bad < 0 {
					bad = i
				}
				continue
			}
			s[i] = Dim{Size: v.DimValue}
		case *onnxpb.TensorShapeProto_Dimension_DimParam:
			s[i] = Dim{Size: -1, Param: v.DimParam}
		default:
			s[i] = Dim{Size: -1}
		}
	}
	return s, bad
}

// parseLabels reads class labels: a JSON array of strings, or one label a
// line. Trailing empty lines are dropped.
func parseLabels(s string) []string {
	t := strings.TrimSpace(s)
	if t == "" {
		return nil
	}
	if strings.HasPrefix(t, "[") {
		var arr []string
		if json.Unmarshal([]byte(t), &arr) == nil {
			return arr
		}
	}
	lines := strings.Split(strings.TrimRight(s, "\r\n"), "\n")
	for i, l := range lines {
		lines[i] = strings.TrimRight(l, "\r")
	}
	return lines
}
