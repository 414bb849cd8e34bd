package modelio

import (
	"fmt"
	"slices"
	"strings"

	"fovea/modelio/onnxpb"
)

// Static shape inference, one rule per operator, following the shape
// formulas of the ONNX Operators specification (docs/Operators.md). A rule
// either computes a shape or says why it cannot; it never guesses.

const (
	maxDim  = int64(1) << 40 // larger inferred dimensions are reported unknown
	maxAttr = int64(1) << 30 // larger kernel/stride/pad attributes are refused
	maxFold = 64             // longest integer vector folded as a constant
)

// ival is one element of a folded integer tensor (the values of a shape
// computation). When ok is false, param may still name the symbolic
// dimension the value equals.
type ival struct {
	v     int64
	ok    bool
	param string
}

// tinfo is what static analysis knows about one tensor.
type tinfo struct {
	shape    Shape // nil when even the rank is unknown
	elem     int32
	why      string    // why (part of) the shape is unknown
	ints     []ival    // folded integer value, nil when not known
	floats   []float64 // small constant float value, nil when not known
	act      bool      // computed from a model input: an activation
	rf       rfInfo
	src      ShapeSource // SourceStatic, SourceObserved, or "" (unknown)
	declared bool        // shape taken from the file's value_info, not inferred
	fromRun  bool        // shape observed in a run or inferred from one that was
	note     string
}

func unknownInfo(why string) *tinfo { return &tinfo{why: why} }

func (t *tinfo) static() bool {
	if t == nil || t.shape == nil {
		return false
	}
	for i, d := range t.shape {
		if i > 0 && !d.Known() {
			return false
		}
	}
	return true
}

func known(v int64) Dim { return Dim{Size: v} }

var unknownDim = Dim{Size: -1}

// dimOK makes a Dim from a computed size, unknown beyond maxDim.
func dimOK(v int64) Dim {
	if v < 0 || v > maxDim {
		return unknownDim
	}
	return known(v)
}

func sameDim(a, b Dim) bool {
	if a.Known() || b.Known() {
		return a.Size == b.Size
	}
	return a.Param != "" && a.Param == b.Param
}

// broadcastDim combines two dimensions by multidirectional broadcasting
// (ONNX Broadcasting.md).
func broadcastDim(a, b Dim) (Dim, error) {
	switch {
	case a.Size == 1:
		return b, nil
	case b.Size == 1:
		return a, nil
	case a.Known() && b.Known():
		if a.Size != b.Size {
			return unknownDim, fmt.Errorf("dimensions %d and %d do not broadcast", a.Size, b.Size)
		}
		return a, nil
	case a.Known():
		return a, nil
	case b.Known():
		return b, nil
	case sameDim(a, b):
		return a, nil
	}
	return unknownDim, nil
}

func broadcast(shapes ...Shape) (Shape, error) {
	r := 0
	for _, s := range shapes {
		r = max(r, len(s))
	}
	out := make(Shape, r)
	for i := range out {
		out[i] = known(1)
	}
	for _, s := range shapes {
		off := r - len(s)
		for i, d := range s {
			b, err := broadcastDim(out[off+i], d)
			if err != nil {
				return nil, err
			}
			out[off+i] = b
		}
	}
	return out, nil
}

// prod multiplies dims: known when all are; a single symbolic dim times
// ones stays that dim; otherwise unknown.
func prod(ds []Dim) Dim {
	p := int64(1)
	var sym []Dim
	for _, d := range ds {
		if !d.Known() {
			sym = append(sym, d)
			continue
		}
		if d.Size == 0 {
			return known(0)
		}
		if p > maxDim/d.Size {
			return unknownDim
		}
		p *= d.Size
	}
	if len(sym) == 0 {
		return known(p)
	}
	if len(sym) == 1 && p == 1 {
		return sym[0]
	}
	return unknownDim
}

func normAxis(a int64, r int) (int, bool) {
	if a < 0 {
		a += int64(r)
	}
	if a < 0 || a >= int64(r) {
		return 0, false
	}
	return int(a), true
}

func cloneShape(s Shape) Shape { return slices.Clone(s) }

func isIntType(dt int32) bool {
	switch dt {
	case dtInt64, dtInt32, dtInt16, dtInt8, dtUint8, dtUint16, dtUint32, dtUint64:
		return true
	}
	return false
}

// intsOf returns the folded values as plain integers when all are known.
func intsOf(t *tinfo) ([]int64, bool) {
	if t == nil || t.ints == nil {
		return nil, false
	}
	out := make([]int64, len(t.ints))
	for i, v := range t.ints {
		if !v.ok {
			return nil, false
		}
		out[i] = v.v
	}
	return out, true
}

// constInfo describes an initializer or Constant-node tensor.
func (m *Model) constInfo(t *onnxpb.TensorProto) *tinfo {
	s := make(Shape, len(t.GetDims()))
	for i, d := range t.GetDims() {
		s[i] = dimOK(d)
	}
	ti := &tinfo{shape: s, elem: t.GetDataType(), src: SourceStatic}
	if isIntType(t.GetDataType()) {
		if v, ok := m.smallInts(t, maxFold); ok {
			ti.ints = make([]ival, len(v))
			for i, x := range v {
				ti.ints[i] = ival{v: x, ok: true}
			}
		}
	} else if elemTypes[t.GetDataType()].float {
		if v, ok := m.smallFloats(t, maxFold); ok {
			ti.floats = v
		}
	}
	return ti
}

// declaredInfo describes a graph input from its declared type.
func declaredInfo(vi *onnxpb.ValueInfoProto) *tinfo {
	tt := vi.GetType().GetTensorType()
	if tt == nil {
		return unknownInfo("the input is not a tensor")
	}
	ti := &tinfo{elem: tt.GetElemType()}
	if tt.GetShape() == nil {
		ti.why = "the file declares no shape for input " + quote(vi.GetName())
		return ti
	}
	s, bad := shapeFromProto(tt.GetShape())
	if bad >= 0 {
		ti.why = fmt.Sprintf("input %q declares dimension %d as negative", vi.GetName(), bad)
	}
	for i, d := range s {
		if d.Size > maxDim {
			s[i] = Dim{Size: -1}
			ti.why = fmt.Sprintf("declared dimension %d of %q is too large", i, vi.GetName())
		}
	}
	ti.shape = s
	ti.src = SourceStatic
	return ti
}

// infer runs the shape rule of node i on its inputs' infos and returns one
// info per output.
func (m *Model) infer(i int, in []*tinfo) []*tinfo {
	n := m.g.nodes[i]
	outs, err := m.rule(n, in)
	res := make([]*tinfo, len(n.GetOutput()))
	for k := range res {
		switch {
		case err != nil:
			res[k] = unknownInfo(err.Error())
		case k < len(outs) && outs[k] != nil:
			res[k] = outs[k]
		default:
			res[k] = unknownInfo("no shape rule for this output of " + n.GetOpType())
		}
		t := res[k]
		if t.elem == 0 && len(in) > 0 && in[0] != nil {
			t.elem = in[0].elem
		}
		if t.shape != nil && !t.static() && t.why == "" {
			t.why = "depends on a symbolic or unknown input dimension"
			for _, x := range in {
				if x != nil && x.why != "" {
					t.why = x.why
					break
				}
			}
		}
		if t.shape != nil && t.static() {
			t.src = SourceStatic
		}
	}
	return res
}

type ruleErr string

func (e ruleErr) Error() string { return string(e) }

func errf(format string, args ...any) error { return ruleErr(fmt.Sprintf(format, args...)) }

var unaryOps = map[string]bool{
	"Relu": true, "LeakyRelu": true, "Sigmoid": true, "Tanh": true, "Clip": true, "HardSigmoid": true,
	"HardSwish": true, "Elu": true, "Selu": true, "Celu": true, "Softplus": true, "Softsign": true,
	"Mish": true, "Gelu": true, "Erf": true, "Exp": true, "Log": true, "Neg": true, "Abs": true,
	"Sqrt": true, "Reciprocal": true, "Floor": true, "Ceil": true, "Round": true, "Sign": true,
	"Sin": true, "Cos": true, "Tan": true, "Not": true, "IsNaN": true, "IsInf": true,
	"ThresholdedRelu": true, "Shrink": true, "Softmax": true, "LogSoftmax": true, "Hardmax": true,
	"BatchNormalization": true, "InstanceNormalization": true, "LRN": true, "LayerNormalization": true,
	"GroupNormalization": true, "LpNormalization": true, "MeanVarianceNormalization": true,
	"QuantizeLinear": true, "DequantizeLinear": true, "PRelu": true, "Identity": true, "Dropout": true,
	"Cast": true, "CastLike": true,
}

var binaryOps = map[string]bool{
	"Add": true, "Sub": true, "Mul": true, "Div": true, "Pow": true, "Mod": true,
	"Equal": true, "Less": true, "Greater": true, "LessOrEqual": true, "GreaterOrEqual": true,
	"And": true, "Or": true, "Xor": true, "BitShift": true, "Sum": true, "Mean": true, "Max": true,
	"Min": true, "Where": true,
}

var boolOps = map[string]bool{
	"Equal": true, "Less": true, "Greater": true, "LessOrEqual": true, "GreaterOrEqual": true,
	"And": true, "Or": true, "Xor": true, "Not": true, "IsNaN": true, "IsInf": true,
}

func needShape(in []*tinfo, k int, name string) (Shape, error) {
	if k >= len(in) || in[k] == nil {
		return nil, errf("input %d of %s is missing", k, name)
	}
	if in[k].shape == nil {
		if in[k].why != "" {
			return nil, ruleErr(in[k].why)
		}
		return nil, errf("the shape of input %d is unknown", k)
	}
	return in[k].shape, nil
}

func input(in []*tinfo, k int) *tinfo {
	if k < len(in) {
		return in[k]
	}
	return nil
}

func (m *Model) opset() int64 {
	if v, ok := m.Opsets[""]; ok {
		return v
	}
	return 0
}

// rule computes the output infos of n. Only ops of the default domain have
// rules.
func (m *Model) rule(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	op := n.GetOpType()
	if d := n.GetDomain(); d != "" && d != "ai.onnx" {
		return nil, errf("no shape rule for %s.%s", d, op)
	}
	switch {
	case unaryOps[op]:
		return m.ruleUnary(n, in)
	case binaryOps[op]:
		return m.ruleBinary(n, in)
	}
	switch op {
	case "Conv", "ConvInteger", "QLinearConv":
		return m.ruleConv(n, in)
	case "ConvTranspose":
		return m.ruleConvTranspose(n, in)
	case "MaxPool", "AveragePool", "LpPool":
		return m.rulePool(n, in)
	case "GlobalAveragePool", "GlobalMaxPool", "GlobalLpPool":
		s, err := needShape(in, 0, op)
		if err != nil {
			return nil, err
		}
		if len(s) < 3 {
			return nil, errf("%s input has rank %d, needs at least 3", op, len(s))
		}
		out := cloneShape(s)
		for i := 2; i < len(out); i++ {
			out[i] = known(1)
		}
		return []*tinfo{{shape: out}}, nil
	case "Flatten":
		return ruleFlatten(n, in)
	case "Reshape":
		return m.ruleReshape(n, in)
	case "Gemm":
		return ruleGemm(n, in)
	case "MatMul", "MatMulInteger", "QLinearMatMul":
		a, b := 0, 1
		if op == "QLinearMatMul" {
			a, b = 0, 3
		}
		return ruleMatMul(in, a, b)
	case "Concat":
		return ruleConcat(n, in)
	case "Pad":
		return ruleOpPad(n, in)
	case "Transpose":
		return ruleTranspose(n, in)
	case "Squeeze":
		return ruleSqueeze(n, in)
	case "Unsqueeze":
		return ruleUnsqueeze(n, in)
	case "ReduceMean", "ReduceMax", "ReduceMin", "ReduceSum", "ReduceProd", "ReduceL1", "ReduceL2",
		"ReduceLogSum", "ReduceLogSumExp", "ReduceSumSquare":
		return m.ruleReduce(n, in)
	case "ArgMax", "ArgMin":
		return ruleArg(n, in)
	case "Shape":
		return ruleShape(n, in)
	case "Size":
		return []*tinfo{{shape: Shape{}, elem: dtInt64}}, nil
	case "Gather":
		return ruleGather(n, in)
	case "Slice":
		return ruleSlice(n, in)
	case "Split":
		return ruleSplit(n, in)
	case "Constant":
		return m.ruleConstant(n)
	case "ConstantOfShape":
		v, ok := intsOf(input(in, 0))
		if !ok {
			return nil, errf("the shape given to ConstantOfShape is not a known constant")
		}
		out := make(Shape, len(v))
		for i, x := range v {
			if x < 0 {
				return nil, errf("ConstantOfShape dimension %d is %d", i, x)
			}
			out[i] = dimOK(x)
		}
		elem := int32(dtFloat)
		if a := attr(n, "value"); a != nil && a.GetT() != nil {
			elem = a.GetT().GetDataType()
		}
		return []*tinfo{{shape: out, elem: elem}}, nil
	case "Expand":
		s, err := needShape(in, 0, op)
		if err != nil {
			return nil, err
		}
		t := input(in, 1)
		if t == nil || t.ints == nil {
			return nil, errf("the shape given to Expand is not a known constant")
		}
		target := make(Shape, len(t.ints))
		for i, v := range t.ints {
			if v.ok {
				target[i] = dimOK(v.v)
			} else {
				target[i] = Dim{Size: -1, Param: v.param}
			}
		}
		out, err := broadcast(s, target)
		if err != nil {
			return nil, errf("Expand: %v", err)
		}
		return []*tinfo{{shape: out}}, nil
	case "Tile":
		s, err := needShape(in, 0, op)
		if err != nil {
			return nil, err
		}
		rep, ok := intsOf(input(in, 1))
		if !ok || len(rep) != len(s) {
			return nil, errf("the repeats of Tile are not a known constant of rank %d", len(s))
		}
		out := cloneShape(s)
		for i, r := range rep {
			if r < 0 {
				return nil, errf("Tile repeat %d is %d", i, r)
			}
			out[i] = prod([]Dim{s[i], known(r)})
		}
		return []*tinfo{{shape: out}}, nil
	case "Resize", "Upsample":
		return m.ruleResize(n, in)
	case "DepthToSpace", "SpaceToDepth":
		return ruleDepthSpace(n, in)
	case "TopK":
		return ruleTopK(n, in)
	case "NonZero", "NonMaxSuppression", "Unique", "Compress", "Range":
		return nil, errf("%s: the output size depends on the data", op)
	case "If", "Loop", "Scan":
		return nil, errf("%s: shapes inside control flow are not inferred", op)
	}
	return nil, errf("no shape rule for %s", op)
}

func (m *Model) ruleConstant(n *onnxpb.NodeProto) ([]*tinfo, error) {
	for _, a := range n.GetAttribute() {
		switch a.GetName() {
		case "value":
			if a.GetT() == nil {
				return nil, errf("Constant value is not a tensor")
			}
			return []*tinfo{m.constInfo(a.GetT())}, nil
		case "value_int":
			return []*tinfo{{shape: Shape{}, elem: dtInt64, ints: []ival{{v: a.GetI(), ok: true}}}}, nil
		case "value_ints":
			t := &tinfo{shape: Shape{known(int64(len(a.GetInts())))}, elem: dtInt64}
			if len(a.GetInts()) <= maxFold {
				for _, v := range a.GetInts() {
					t.ints = append(t.ints, ival{v: v, ok: true})
				}
				if t.ints == nil {
					t.ints = []ival{}
				}
			}
			return []*tinfo{t}, nil
		case "value_float":
			return []*tinfo{{shape: Shape{}, elem: dtFloat, floats: []float64{float64(a.GetF())}}}, nil
		case "value_floats":
			t := &tinfo{shape: Shape{known(int64(len(a.GetFloats())))}, elem: dtFloat}
			if len(a.GetFloats()) <= maxFold {
				for _, v := range a.GetFloats() {
					t.floats = append(t.floats, float64(v))
				}
			}
			return []*tinfo{t}, nil
		case "sparse_value":
			st := a.GetSparseTensor()
			s := make(Shape, len(st.GetDims()))
			for i, d := range st.GetDims() {
				s[i] = dimOK(d)
			}
			return []*tinfo{{shape: s, elem: st.GetValues().GetDataType()}}, nil
		case "value_string", "value_strings":
			return []*tinfo{{shape: Shape{}, elem: 8}}, nil
		}
	}
	return nil, errf("Constant has no value")
}

// shortWhy trims long reasons for the Note column.
func shortWhy(s string) string {
	s = strings.TrimSpace(s)
	if len(s) > 200 {
		return s[:200] + "…"
	}
	return s
}
