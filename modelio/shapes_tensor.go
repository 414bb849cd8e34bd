package modelio

import (
	"fmt"
	"math"
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
	src      string // SourceStatic, SourceObserved, or "" (unknown)
	declared bool   // shape taken from the file's value_info, not inferred
	fromRun  bool   // shape observed in a run or inferred from one that was
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

func (m *Model) ruleUnary(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	op := n.GetOpType()
	x := input(in, 0)
	if x == nil {
		return nil, errf("%s has no input", op)
	}
	// Shapes are never modified in place once made, so the input's can be
	// shared.
	out := &tinfo{shape: x.shape, why: x.why, elem: x.elem}
	switch {
	case boolOps[op]:
		out.elem = dtBool
	case op == "Cast":
		out.elem = int32(attrInt(n, "to", int64(x.elem)))
	case op == "CastLike":
		if t := input(in, 1); t != nil {
			out.elem = t.elem
		}
	case op == "QuantizeLinear":
		out.elem = dtUint8
		if zp := input(in, 2); zp != nil && zp.elem != 0 {
			out.elem = zp.elem
		}
	case op == "DequantizeLinear":
		out.elem = dtFloat
		if sc := input(in, 1); sc != nil && sc.elem != 0 {
			out.elem = sc.elem
		}
	}
	if (op == "Identity" || (op == "Cast" && isIntType(out.elem))) && x.ints != nil {
		out.ints = x.ints
	}
	if op == "Identity" {
		out.floats = x.floats
	}
	if op == "Dropout" {
		return []*tinfo{out, {shape: x.shape, why: x.why, elem: dtBool}}, nil
	}
	if op == "BatchNormalization" {
		// Training mode also outputs the running mean and variance (and,
		// before opset 14, the saved batch statistics), all of shape [C].
		res := []*tinfo{out}
		for k := 1; k < len(n.GetOutput()); k++ {
			if c := input(in, 1); c != nil {
				res = append(res, &tinfo{shape: cloneShape(c.shape), elem: c.elem})
			}
		}
		return res, nil
	}
	return []*tinfo{out}, nil
}

func (m *Model) ruleBinary(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	op := n.GetOpType()
	var shapes []Shape
	var first *tinfo
	for k, t := range in {
		if t == nil {
			continue
		}
		if first == nil || (op == "Where" && k == 1) {
			first = t
		}
		if t.shape == nil {
			if t.why != "" {
				return nil, ruleErr(t.why)
			}
			return nil, errf("the shape of input %d is unknown", k)
		}
		shapes = append(shapes, t.shape)
	}
	if first == nil {
		return nil, errf("%s has no inputs", op)
	}
	s, err := broadcast(shapes...)
	if err != nil {
		return nil, errf("%s: %v", op, err)
	}
	out := &tinfo{shape: s, elem: first.elem}
	if boolOps[op] {
		out.elem = dtBool
	}
	// Fold integer arithmetic on shape values (x.size(2) // 2 and the like).
	if len(in) == 2 && isIntType(out.elem) && in[0] != nil && in[1] != nil {
		a, aok := intsOf(in[0])
		b, bok := intsOf(in[1])
		if aok && bok && (len(a) == len(b) || len(a) == 1 || len(b) == 1) {
			ln := max(len(a), len(b))
			vals := make([]ival, ln)
			ok := true
			for i := range vals {
				x, y := a[min(i, len(a)-1)], b[min(i, len(b)-1)]
				var v int64
				switch op {
				case "Add":
					v = x + y
				case "Sub":
					v = x - y
				case "Mul":
					v = x * y
				case "Div":
					if y == 0 {
						ok = false
					} else {
						v = x / y
					}
				default:
					ok = false
				}
				vals[i] = ival{v: v, ok: true}
			}
			if ok {
				out.ints = vals
			}
		}
	}
	return []*tinfo{out}, nil
}

// spatialParams reads kernel_shape, strides, dilations and pads for ns
// spatial axes, with the ONNX defaults (stride 1, dilation 1, pad 0).
type spatial struct {
	kernel, strides, dilations, pads []int64
	autoPad                          string
}

func readSpatial(n *onnxpb.NodeProto, ns int, kernel []int64) (*spatial, error) {
	sp := &spatial{kernel: kernel, autoPad: attrString(n, "auto_pad", "NOTSET")}
	if k, ok := attrInts(n, "kernel_shape"); ok {
		sp.kernel = k
	}
	if len(sp.kernel) != ns {
		return nil, errf("kernel_shape has %d values for %d spatial axes", len(sp.kernel), ns)
	}
	get := func(name string, want int, def int64, minV int64) ([]int64, error) {
		v, ok := attrInts(n, name)
		if !ok || len(v) == 0 {
			v = make([]int64, want)
			for i := range v {
				v[i] = def
			}
			return v, nil
		}
		if len(v) != want {
			return nil, errf("%s has %d values, needs %d", name, len(v), want)
		}
		for _, x := range v {
			if x < minV || x > maxAttr {
				return nil, errf("%s value %d is out of range", name, x)
			}
		}
		return v, nil
	}
	var err error
	for _, k := range sp.kernel {
		if k < 1 || k > maxAttr {
			return nil, errf("kernel size %d is out of range", k)
		}
	}
	if sp.strides, err = get("strides", ns, 1, 1); err != nil {
		return nil, err
	}
	if sp.dilations, err = get("dilations", ns, 1, 1); err != nil {
		return nil, err
	}
	if sp.pads, err = get("pads", 2*ns, 0, 0); err != nil {
		return nil, err
	}
	switch sp.autoPad {
	case "NOTSET", "SAME_UPPER", "SAME_LOWER", "VALID", "":
	default:
		return nil, errf("auto_pad %q is not one of NOTSET, SAME_UPPER, SAME_LOWER, VALID", sp.autoPad)
	}
	return sp, nil
}

// convOut is the output size of one spatial axis of Conv or a pooling
// (ONNX Operators.md, Conv and MaxPool: explicit pads floor((in + pads −
// ((k−1)·d+1)) / s) + 1; SAME_* ceil(in / s); VALID ceil((in −
// ((k−1)·d+1) + 1) / s); ceil_mode rounds up and drops a last window that
// would start in the right padding).
func (sp *spatial) out(i int, in Dim, ceilMode bool) (Dim, error) {
	if !in.Known() {
		return unknownDim, nil
	}
	k, s, d := sp.kernel[i], sp.strides[i], sp.dilations[i]
	dk := (k-1)*d + 1
	x := in.Size
	switch sp.autoPad {
	case "SAME_UPPER", "SAME_LOWER":
		return dimOK((x + s - 1) / s), nil
	case "VALID":
		if x < dk {
			return unknownDim, errf("kernel extent %d is larger than the input size %d", dk, x)
		}
		return dimOK((x-dk)/s + 1), nil
	}
	pb, pe := sp.pads[i], sp.pads[i+len(sp.kernel)]
	num := x + pb + pe - dk
	if num < 0 {
		return unknownDim, errf("kernel extent %d is larger than the padded input size %d", dk, x+pb+pe)
	}
	o := num/s + 1
	if ceilMode && num%s != 0 {
		o++
		if (o-1)*s >= x+pb {
			o--
		}
	}
	return dimOK(o), nil
}

func (m *Model) ruleConv(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	wi := 1
	if n.GetOpType() == "QLinearConv" {
		wi = 3
	}
	xs, err := needShape(in, 0, "Conv")
	if err != nil {
		return nil, err
	}
	if len(xs) < 3 {
		return nil, errf("Conv input has rank %d, needs at least 3 (N, C, spatial...)", len(xs))
	}
	ns := len(xs) - 2
	ws, err := needShape(in, wi, "Conv")
	if err != nil {
		return nil, errf("weight shape unknown: %v", err)
	}
	if len(ws) != len(xs) {
		return nil, errf("Conv weight has rank %d, input rank %d", len(ws), len(xs))
	}
	var kernel []int64
	for _, d := range ws[2:] {
		if d.Known() {
			kernel = append(kernel, d.Size)
		}
	}
	sp, err := readSpatial(n, ns, kernel)
	if err != nil {
		return nil, err
	}
	if len(kernel) == ns && !slices.Equal(kernel, sp.kernel) {
		return nil, errf("kernel_shape %v disagrees with the weight dims %s", sp.kernel, ws)
	}
	group := attrInt(n, "group", 1)
	if group < 1 {
		return nil, errf("group is %d", group)
	}
	if xs[1].Known() && ws[1].Known() && xs[1].Size != ws[1].Size*group {
		return nil, errf("input has %d channels, the weights expect %d×%d (C/group × group)", xs[1].Size, ws[1].Size, group)
	}
	if ws[0].Known() && ws[0].Size%group != 0 {
		return nil, errf("%d filters do not divide into %d groups", ws[0].Size, group)
	}
	out := make(Shape, len(xs))
	out[0] = xs[0]
	out[1] = ws[0]
	for i := range ns {
		if out[2+i], err = sp.out(i, xs[2+i], false); err != nil {
			return nil, err
		}
	}
	return []*tinfo{{shape: out}}, nil
}

func (m *Model) ruleConvTranspose(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	xs, err := needShape(in, 0, "ConvTranspose")
	if err != nil {
		return nil, err
	}
	if len(xs) < 3 {
		return nil, errf("ConvTranspose input has rank %d", len(xs))
	}
	ns := len(xs) - 2
	ws, err := needShape(in, 1, "ConvTranspose")
	if err != nil {
		return nil, errf("weight shape unknown: %v", err)
	}
	if len(ws) != len(xs) {
		return nil, errf("ConvTranspose weight has rank %d, input rank %d", len(ws), len(xs))
	}
	var kernel []int64
	for _, d := range ws[2:] {
		if d.Known() {
			kernel = append(kernel, d.Size)
		}
	}
	sp, err := readSpatial(n, ns, kernel)
	if err != nil {
		return nil, err
	}
	group := attrInt(n, "group", 1)
	if group < 1 || group > maxAttr {
		return nil, errf("group is %d", group)
	}
	outPad, ok := attrInts(n, "output_padding")
	if !ok || len(outPad) == 0 {
		outPad = make([]int64, ns)
	}
	if len(outPad) != ns {
		return nil, errf("output_padding has %d values for %d axes", len(outPad), ns)
	}
	out := make(Shape, len(xs))
	out[0] = xs[0]
	out[1] = prod([]Dim{ws[1], known(group)})
	outShape, hasOS := attrInts(n, "output_shape")
	if hasOS && len(outShape) >= ns {
		for i := range ns {
			out[2+i] = dimOK(outShape[len(outShape)-ns+i])
		}
		return []*tinfo{{shape: out}}, nil
	}
	for i := range ns {
		x := xs[2+i]
		if !x.Known() {
			out[2+i] = unknownDim
			continue
		}
		s, d, k := sp.strides[i], sp.dilations[i], sp.kernel[i]
		if outPad[i] < 0 || outPad[i] > maxAttr {
			return nil, errf("output_padding %d is out of range", outPad[i])
		}
		if x.Size > maxDim/s {
			out[2+i] = unknownDim
			continue
		}
		switch sp.autoPad {
		case "SAME_UPPER", "SAME_LOWER":
			out[2+i] = dimOK(x.Size * s)
		default:
			pb, pe := sp.pads[i], sp.pads[i+ns]
			if sp.autoPad == "VALID" {
				pb, pe = 0, 0
			}
			v := s*(x.Size-1) + outPad[i] + (k-1)*d + 1 - pb - pe
			if v < 0 {
				return nil, errf("ConvTranspose output size %d is negative", v)
			}
			out[2+i] = dimOK(v)
		}
	}
	return []*tinfo{{shape: out}}, nil
}

func (m *Model) rulePool(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	op := n.GetOpType()
	xs, err := needShape(in, 0, op)
	if err != nil {
		return nil, err
	}
	if len(xs) < 3 {
		return nil, errf("%s input has rank %d, needs at least 3", op, len(xs))
	}
	ns := len(xs) - 2
	if _, ok := attrInts(n, "kernel_shape"); !ok {
		return nil, errf("%s has no kernel_shape", op)
	}
	sp, err := readSpatial(n, ns, nil)
	if err != nil {
		return nil, err
	}
	ceil := attrInt(n, "ceil_mode", 0) != 0
	out := cloneShape(xs)
	for i := range ns {
		if out[2+i], err = sp.out(i, xs[2+i], ceil); err != nil {
			return nil, err
		}
	}
	res := []*tinfo{{shape: out}}
	if op == "MaxPool" {
		res = append(res, &tinfo{shape: cloneShape(out), elem: dtInt64})
	}
	return res, nil
}

func ruleFlatten(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	s, err := needShape(in, 0, "Flatten")
	if err != nil {
		return nil, err
	}
	axis := attrInt(n, "axis", 1)
	if axis < 0 {
		axis += int64(len(s))
	}
	if axis < 0 || axis > int64(len(s)) {
		return nil, errf("Flatten axis %d is outside rank %d", attrInt(n, "axis", 1), len(s))
	}
	return []*tinfo{{shape: Shape{prod(s[:axis]), prod(s[axis:])}}}, nil
}

func (m *Model) ruleReshape(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	s, err := needShape(in, 0, "Reshape")
	if err != nil {
		return nil, err
	}
	var target []ival
	if t := input(in, 1); t != nil {
		if t.ints == nil {
			return nil, errf("the target shape of Reshape is computed at run time")
		}
		target = t.ints
	} else if v, ok := attrInts(n, "shape"); ok { // opset < 5
		for _, x := range v {
			target = append(target, ival{v: x, ok: true})
		}
	} else {
		return nil, errf("Reshape has no target shape")
	}
	allowZero := attrInt(n, "allowzero", 0) != 0
	out := make(Shape, len(target))
	neg := -1
	for i, t := range target {
		switch {
		case !t.ok:
			out[i] = Dim{Size: -1, Param: t.param}
		case t.v == 0 && !allowZero:
			if i >= len(s) {
				return nil, errf("Reshape copies dimension %d, the input has rank %d", i, len(s))
			}
			out[i] = s[i]
		case t.v == -1:
			if neg >= 0 {
				return nil, errf("Reshape target has two -1 entries")
			}
			neg = i
		case t.v < -1:
			return nil, errf("Reshape target dimension %d is %d", i, t.v)
		default:
			out[i] = dimOK(t.v)
		}
	}
	if neg >= 0 {
		out[neg] = inferMinusOne(s, out, neg)
	}
	if a, b := prod(s), prod(out); a.Known() && b.Known() && a.Size != b.Size {
		return nil, errf("Reshape of %d elements into %s (%d elements)", a.Size, out, b.Size)
	}
	return []*tinfo{{shape: out}}, nil
}

// inferMinusOne computes the -1 entry of a Reshape target: the input's
// element count divided by the other entries, cancelling symbolic
// dimensions that appear on both sides.
func inferMinusOne(in, out Shape, neg int) Dim {
	pin, pout := int64(1), int64(1)
	var params []string
	for _, d := range in {
		switch {
		case d.Known():
			if d.Size == 0 {
				return unknownDim
			}
			if pin > maxDim/d.Size {
				return unknownDim
			}
			pin *= d.Size
		case d.Param != "":
			params = append(params, d.Param)
		default:
			return unknownDim
		}
	}
	for i, d := range out {
		if i == neg {
			continue
		}
		switch {
		case d.Known():
			if d.Size == 0 {
				return unknownDim
			}
			pout *= d.Size
			if pout > maxDim {
				return unknownDim
			}
		case d.Param != "":
			k := slices.Index(params, d.Param)
			if k < 0 {
				return unknownDim
			}
			params = slices.Delete(params, k, k+1)
		default:
			return unknownDim
		}
	}
	if pin%pout != 0 {
		return unknownDim
	}
	switch len(params) {
	case 0:
		return dimOK(pin / pout)
	case 1:
		if pin == pout {
			return Dim{Size: -1, Param: params[0]}
		}
	}
	return unknownDim
}

func ruleGemm(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	a, err := needShape(in, 0, "Gemm")
	if err != nil {
		return nil, err
	}
	b, err := needShape(in, 1, "Gemm")
	if err != nil {
		return nil, errf("weight shape unknown: %v", err)
	}
	if len(a) != 2 || len(b) != 2 {
		return nil, errf("Gemm needs 2-D inputs, got ranks %d and %d", len(a), len(b))
	}
	mDim, ka := a[0], a[1]
	if attrInt(n, "transA", 0) != 0 {
		mDim, ka = a[1], a[0]
	}
	kb, nDim := b[0], b[1]
	if attrInt(n, "transB", 0) != 0 {
		kb, nDim = b[1], b[0]
	}
	if ka.Known() && kb.Known() && ka.Size != kb.Size {
		return nil, errf("Gemm inner sizes differ: %d and %d", ka.Size, kb.Size)
	}
	return []*tinfo{{shape: Shape{mDim, nDim}}}, nil
}

func ruleMatMul(in []*tinfo, ai, bi int) ([]*tinfo, error) {
	a, err := needShape(in, ai, "MatMul")
	if err != nil {
		return nil, err
	}
	b, err := needShape(in, bi, "MatMul")
	if err != nil {
		return nil, err
	}
	if len(a) == 0 || len(b) == 0 {
		return nil, errf("MatMul of a scalar")
	}
	a1, b1 := len(a) == 1, len(b) == 1
	if a1 {
		a = Shape{known(1), a[0]}
	}
	if b1 {
		b = Shape{b[0], known(1)}
	}
	ka, kb := a[len(a)-1], b[len(b)-2]
	if ka.Known() && kb.Known() && ka.Size != kb.Size {
		return nil, errf("MatMul inner sizes differ: %d and %d", ka.Size, kb.Size)
	}
	batch, err := broadcast(a[:len(a)-2], b[:len(b)-2])
	if err != nil {
		return nil, errf("MatMul: %v", err)
	}
	out := append(batch, a[len(a)-2], b[len(b)-1])
	if a1 {
		out = append(out[:len(out)-2], out[len(out)-1])
	}
	if b1 {
		out = out[:len(out)-1]
	}
	return []*tinfo{{shape: out}}, nil
}

func ruleConcat(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	var shapes []Shape
	for k, t := range in {
		if t == nil {
			continue
		}
		if t.shape == nil {
			if t.why != "" {
				return nil, ruleErr(t.why)
			}
			return nil, errf("the shape of input %d is unknown", k)
		}
		shapes = append(shapes, t.shape)
	}
	if len(shapes) == 0 {
		return nil, errf("Concat has no inputs")
	}
	r := len(shapes[0])
	a := attr(n, "axis")
	if a == nil {
		return nil, errf("Concat has no axis")
	}
	axis, ok := normAxis(a.GetI(), r)
	if !ok {
		return nil, errf("Concat axis %d is outside rank %d", a.GetI(), r)
	}
	out := cloneShape(shapes[0])
	sum := int64(0)
	sumOK := true
	for _, s := range shapes {
		if len(s) != r {
			return nil, errf("Concat inputs have ranks %d and %d", r, len(s))
		}
		for i, d := range s {
			if i == axis {
				if d.Known() {
					sum += d.Size
				} else {
					sumOK = false
				}
				continue
			}
			if !out[i].Known() && d.Known() {
				out[i] = d
			} else if out[i].Known() && d.Known() && out[i].Size != d.Size {
				return nil, errf("Concat inputs differ in dimension %d: %d and %d", i, out[i].Size, d.Size)
			}
		}
	}
	out[axis] = unknownDim
	if sumOK {
		out[axis] = dimOK(sum)
	}
	res := &tinfo{shape: out}
	if r == 1 {
		var vals []ival
		for _, t := range in {
			if t == nil {
				continue
			}
			if t.ints == nil || len(vals)+len(t.ints) > maxFold {
				vals = nil
				break
			}
			vals = append(vals, t.ints...)
		}
		if vals != nil {
			res.ints = vals
		}
	}
	return []*tinfo{res}, nil
}

func ruleOpPad(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	s, err := needShape(in, 0, "Pad")
	if err != nil {
		return nil, err
	}
	r := len(s)
	var pads []int64
	if v, ok := attrInts(n, "pads"); ok { // opset < 11
		pads = v
	} else if v, ok := intsOf(input(in, 1)); ok {
		pads = v
	} else {
		return nil, errf("the pads of Pad are computed at run time")
	}
	axes := make([]int, r)
	for i := range axes {
		axes[i] = i
	}
	if t := input(in, 3); t != nil {
		v, ok := intsOf(t)
		if !ok {
			return nil, errf("the axes of Pad are computed at run time")
		}
		axes = axes[:0]
		for _, a := range v {
			ax, ok := normAxis(a, r)
			if !ok {
				return nil, errf("Pad axis %d is outside rank %d", a, r)
			}
			axes = append(axes, ax)
		}
	}
	if len(pads) != 2*len(axes) {
		return nil, errf("Pad has %d pads for %d axes", len(pads), len(axes))
	}
	out := cloneShape(s)
	for i, ax := range axes {
		pb, pe := pads[i], pads[i+len(axes)]
		if pb < -maxAttr || pb > maxAttr || pe < -maxAttr || pe > maxAttr {
			return nil, errf("pad value out of range")
		}
		if !out[ax].Known() {
			if pb != 0 || pe != 0 {
				out[ax] = unknownDim
			}
			continue
		}
		v := out[ax].Size + pb + pe
		if v < 0 {
			return nil, errf("Pad makes dimension %d negative", ax)
		}
		out[ax] = dimOK(v)
	}
	return []*tinfo{{shape: out}}, nil
}

func transposePerm(n *onnxpb.NodeProto, r int) ([]int, error) {
	perm := make([]int, r)
	if v, ok := attrInts(n, "perm"); ok && len(v) > 0 {
		if len(v) != r {
			return nil, errf("Transpose perm has %d entries for rank %d", len(v), r)
		}
		seen := make([]bool, r)
		for i, p := range v {
			if p < 0 || p >= int64(r) || seen[p] {
				return nil, errf("Transpose perm %v is not a permutation", v)
			}
			seen[p] = true
			perm[i] = int(p)
		}
		return perm, nil
	}
	for i := range perm {
		perm[i] = r - 1 - i
	}
	return perm, nil
}

func ruleTranspose(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	s, err := needShape(in, 0, "Transpose")
	if err != nil {
		return nil, err
	}
	perm, err := transposePerm(n, len(s))
	if err != nil {
		return nil, err
	}
	out := make(Shape, len(s))
	for i, p := range perm {
		out[i] = s[p]
	}
	return []*tinfo{{shape: out}}, nil
}

// axesOf reads the axes of Squeeze/Unsqueeze/Reduce*: the attribute (older
// opsets) or input 1 (opset 13 and later; 18 for most reductions). present
// is false when neither is given.
func axesOf(n *onnxpb.NodeProto, in []*tinfo) (axes []int64, present bool, err error) {
	if v, ok := attrInts(n, "axes"); ok {
		return v, true, nil
	}
	if t := input(in, 1); t != nil {
		v, ok := intsOf(t)
		if !ok {
			return nil, true, errf("the axes of %s are computed at run time", n.GetOpType())
		}
		return v, true, nil
	}
	return nil, false, nil
}

func ruleSqueeze(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	s, err := needShape(in, 0, "Squeeze")
	if err != nil {
		return nil, err
	}
	axes, present, err := axesOf(n, in)
	if err != nil {
		return nil, err
	}
	drop := make([]bool, len(s))
	if !present || len(axes) == 0 {
		for i, d := range s {
			if !d.Known() {
				return nil, errf("Squeeze without axes on an unknown dimension %d", i)
			}
			drop[i] = d.Size == 1
		}
	} else {
		for _, a := range axes {
			ax, ok := normAxis(a, len(s))
			if !ok {
				return nil, errf("Squeeze axis %d is outside rank %d", a, len(s))
			}
			if s[ax].Known() && s[ax].Size != 1 {
				return nil, errf("Squeeze axis %d has size %d, not 1", ax, s[ax].Size)
			}
			drop[ax] = true
		}
	}
	var out Shape = Shape{}
	for i, d := range s {
		if !drop[i] {
			out = append(out, d)
		}
	}
	return []*tinfo{{shape: out, ints: input(in, 0).ints}}, nil
}

func ruleUnsqueeze(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	s, err := needShape(in, 0, "Unsqueeze")
	if err != nil {
		return nil, err
	}
	axes, present, err := axesOf(n, in)
	if err != nil {
		return nil, err
	}
	if !present {
		return nil, errf("Unsqueeze has no axes")
	}
	r := len(s) + len(axes)
	ins := make([]bool, r)
	for _, a := range axes {
		ax, ok := normAxis(a, r)
		if !ok || ins[ax] {
			return nil, errf("Unsqueeze axes %v are invalid for output rank %d", axes, r)
		}
		ins[ax] = true
	}
	out := make(Shape, 0, r)
	k := 0
	for i := range r {
		if ins[i] {
			out = append(out, known(1))
		} else {
			out = append(out, s[k])
			k++
		}
	}
	return []*tinfo{{shape: out, ints: input(in, 0).ints}}, nil
}

func (m *Model) ruleReduce(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	s, err := needShape(in, 0, n.GetOpType())
	if err != nil {
		return nil, err
	}
	axes, present, err := axesOf(n, in)
	if err != nil {
		return nil, err
	}
	keep := attrInt(n, "keepdims", 1) != 0
	red := make([]bool, len(s))
	if !present || len(axes) == 0 {
		if attrInt(n, "noop_with_empty_axes", 0) != 0 {
			return []*tinfo{{shape: cloneShape(s)}}, nil
		}
		for i := range red {
			red[i] = true
		}
	}
	for _, a := range axes {
		ax, ok := normAxis(a, len(s))
		if !ok {
			return nil, errf("%s axis %d is outside rank %d", n.GetOpType(), a, len(s))
		}
		red[ax] = true
	}
	out := Shape{}
	for i, d := range s {
		switch {
		case !red[i]:
			out = append(out, d)
		case keep:
			out = append(out, known(1))
		}
	}
	return []*tinfo{{shape: out}}, nil
}

func ruleArg(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	s, err := needShape(in, 0, n.GetOpType())
	if err != nil {
		return nil, err
	}
	ax, ok := normAxis(attrInt(n, "axis", 0), len(s))
	if !ok {
		return nil, errf("%s axis is outside rank %d", n.GetOpType(), len(s))
	}
	out := Shape{}
	for i, d := range s {
		if i == ax {
			if attrInt(n, "keepdims", 1) != 0 {
				out = append(out, known(1))
			}
			continue
		}
		out = append(out, d)
	}
	return []*tinfo{{shape: out, elem: dtInt64}}, nil
}

func ruleShape(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	s, err := needShape(in, 0, "Shape")
	if err != nil {
		return nil, err
	}
	r := int64(len(s))
	start, end := attrInt(n, "start", 0), attrInt(n, "end", r)
	clamp := func(v int64) int64 {
		if v < 0 {
			v += r
		}
		return min(max(v, 0), r)
	}
	start, end = clamp(start), clamp(end)
	if end < start {
		end = start
	}
	sub := s[start:end]
	res := &tinfo{shape: Shape{known(int64(len(sub)))}, elem: dtInt64}
	if len(sub) <= maxFold {
		res.ints = make([]ival, len(sub))
		for i, d := range sub {
			res.ints[i] = ival{v: d.Size, ok: d.Known(), param: d.Param}
		}
	}
	return []*tinfo{res}, nil
}

func ruleGather(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	s, err := needShape(in, 0, "Gather")
	if err != nil {
		return nil, err
	}
	is, err := needShape(in, 1, "Gather")
	if err != nil {
		return nil, err
	}
	if len(s) == 0 {
		return nil, errf("Gather from a scalar")
	}
	ax, ok := normAxis(attrInt(n, "axis", 0), len(s))
	if !ok {
		return nil, errf("Gather axis is outside rank %d", len(s))
	}
	out := append(append(cloneShape(s[:ax]), is...), s[ax+1:]...)
	res := &tinfo{shape: out}
	data, idx := in[0], in[1]
	if len(s) == 1 && data.ints != nil {
		if iv, ok := intsOf(idx); ok && len(iv) <= maxFold {
			vals := make([]ival, len(iv))
			for k, i := range iv {
				if i < 0 {
					i += int64(len(data.ints))
				}
				if i < 0 || i >= int64(len(data.ints)) {
					return nil, errf("Gather index %d is outside %d values", iv[k], len(data.ints))
				}
				vals[k] = data.ints[i]
			}
			res.ints = vals
		}
	}
	return []*tinfo{res}, nil
}

// sliceLen is the length of data[start:end:step] along an axis of size dim,
// with the clamping of ONNX Operators.md, Slice.
func sliceLen(dim, start, end, step int64) int64 {
	if start < 0 {
		start += dim
	}
	if end < 0 {
		end += dim
	}
	if step > 0 {
		start = min(max(start, 0), dim)
		end = min(max(end, 0), dim)
		if end <= start {
			return 0
		}
		return (end - start + step - 1) / step
	}
	start = min(max(start, 0), dim-1)
	end = min(max(end, -1), dim-1)
	if start <= end {
		return 0
	}
	return (start - end + (-step) - 1) / (-step)
}

func sliceArgs(n *onnxpb.NodeProto, in []*tinfo, r int) (starts, ends []int64, axes []int, steps []int64, err error) {
	if _, ok := attrInts(n, "starts"); ok { // opset < 10
		starts, _ = attrInts(n, "starts")
		ends, _ = attrInts(n, "ends")
		var a []int64
		if v, ok := attrInts(n, "axes"); ok {
			a = v
		}
		for i := range starts {
			if a != nil && i < len(a) {
				ax, ok := normAxis(a[i], r)
				if !ok {
					return nil, nil, nil, nil, errf("Slice axis %d is outside rank %d", a[i], r)
				}
				axes = append(axes, ax)
			} else {
				axes = append(axes, i)
			}
			steps = append(steps, 1)
		}
	} else {
		var ok1, ok2 bool
		starts, ok1 = intsOf(input(in, 1))
		ends, ok2 = intsOf(input(in, 2))
		if !ok1 || !ok2 {
			return nil, nil, nil, nil, errf("the bounds of Slice are computed at run time")
		}
		if t := input(in, 3); t != nil {
			a, ok := intsOf(t)
			if !ok {
				return nil, nil, nil, nil, errf("the axes of Slice are computed at run time")
			}
			for _, x := range a {
				ax, ok := normAxis(x, r)
				if !ok {
					return nil, nil, nil, nil, errf("Slice axis %d is outside rank %d", x, r)
				}
				axes = append(axes, ax)
			}
		} else {
			for i := range starts {
				axes = append(axes, i)
			}
		}
		if t := input(in, 4); t != nil {
			st, ok := intsOf(t)
			if !ok {
				return nil, nil, nil, nil, errf("the steps of Slice are computed at run time")
			}
			steps = st
		} else {
			steps = make([]int64, len(starts))
			for i := range steps {
				steps[i] = 1
			}
		}
	}
	if len(ends) != len(starts) || len(axes) != len(starts) || len(steps) != len(starts) {
		return nil, nil, nil, nil, errf("Slice has %d starts, %d ends, %d axes and %d steps", len(starts), len(ends), len(axes), len(steps))
	}
	for i, s := range steps {
		if s == 0 {
			return nil, nil, nil, nil, errf("Slice step %d is 0", i)
		}
		if axes[i] >= r {
			return nil, nil, nil, nil, errf("Slice axis %d is outside rank %d", axes[i], r)
		}
	}
	return starts, ends, axes, steps, nil
}

func ruleSlice(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	s, err := needShape(in, 0, "Slice")
	if err != nil {
		return nil, err
	}
	starts, ends, axes, steps, err := sliceArgs(n, in, len(s))
	if err != nil {
		return nil, err
	}
	out := cloneShape(s)
	for i, ax := range axes {
		if !s[ax].Known() {
			out[ax] = unknownDim
			continue
		}
		out[ax] = dimOK(sliceLen(s[ax].Size, starts[i], ends[i], steps[i]))
	}
	res := &tinfo{shape: out}
	if len(s) == 1 && in[0].ints != nil && len(axes) == 1 && s[0].Known() && int64(len(in[0].ints)) == s[0].Size {
		d := s[0].Size
		start, end, step := starts[0], ends[0], steps[0]
		if start < 0 {
			start += d
		}
		if end < 0 {
			end += d
		}
		var vals []ival
		if step > 0 {
			start, end = min(max(start, 0), d), min(max(end, 0), d)
			for k := start; k < end; k += step {
				vals = append(vals, in[0].ints[k])
			}
		} else {
			start, end = min(max(start, 0), d-1), min(max(end, -1), d-1)
			for k := start; k > end; k += step {
				vals = append(vals, in[0].ints[k])
			}
		}
		if vals == nil {
			vals = []ival{}
		}
		res.ints = vals
	}
	return []*tinfo{res}, nil
}

func ruleSplit(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	s, err := needShape(in, 0, "Split")
	if err != nil {
		return nil, err
	}
	ax, ok := normAxis(attrInt(n, "axis", 0), len(s))
	if !ok {
		return nil, errf("Split axis is outside rank %d", len(s))
	}
	nout := len(n.GetOutput())
	var sizes []int64
	if v, ok := attrInts(n, "split"); ok && len(v) > 0 {
		sizes = v
	} else if t := input(in, 1); t != nil {
		v, ok := intsOf(t)
		if !ok {
			return nil, errf("the split sizes are computed at run time")
		}
		sizes = v
	}
	if sizes == nil {
		if !s[ax].Known() {
			return nil, errf("Split of an unknown dimension")
		}
		parts := attrInt(n, "num_outputs", int64(nout))
		if parts <= 0 {
			return nil, errf("Split into %d parts", parts)
		}
		chunk := (s[ax].Size + parts - 1) / parts
		rest := s[ax].Size
		for range nout {
			c := min(chunk, rest)
			sizes = append(sizes, c)
			rest -= c
		}
	}
	if len(sizes) != nout {
		return nil, errf("Split has %d sizes for %d outputs", len(sizes), nout)
	}
	res := make([]*tinfo, nout)
	for i, sz := range sizes {
		if sz < 0 {
			return nil, errf("Split size %d is negative", sz)
		}
		o := cloneShape(s)
		o[ax] = dimOK(sz)
		res[i] = &tinfo{shape: o}
	}
	return res, nil
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

// ruleResize follows ONNX Operators.md, Resize: output = floor(input ×
// scale) per axis, or the given sizes (with keep_aspect_ratio_policy);
// opset 10 and Upsample take (X, scales).
func (m *Model) ruleResize(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	s, err := needShape(in, 0, n.GetOpType())
	if err != nil {
		return nil, err
	}
	r := len(s)
	var scales []float64
	var sizes []int64
	scaleIdx, sizeIdx := 2, 3
	if n.GetOpType() == "Upsample" || len(in) == 2 && m.opset() <= 10 {
		scaleIdx, sizeIdx = 1, -1
	}
	if v, ok := attrFloats(n, "scales"); ok && n.GetOpType() == "Upsample" {
		for _, f := range v {
			scales = append(scales, float64(f))
		}
	}
	if t := input(in, scaleIdx); t != nil && scales == nil && !(t.shape != nil && len(t.shape) == 1 && t.shape[0].Size == 0) {
		if t.floats == nil {
			return nil, errf("the scales of %s are computed at run time", n.GetOpType())
		}
		scales = t.floats
	}
	if sizeIdx > 0 {
		if t := input(in, sizeIdx); t != nil && scales == nil {
			v, ok := intsOf(t)
			if !ok {
				return nil, errf("the sizes of Resize are computed at run time")
			}
			sizes = v
		}
	}
	axes := make([]int, r)
	for i := range axes {
		axes[i] = i
	}
	if v, ok := attrInts(n, "axes"); ok && len(v) > 0 {
		axes = axes[:0]
		for _, a := range v {
			ax, ok := normAxis(a, r)
			if !ok {
				return nil, errf("Resize axis %d is outside rank %d", a, r)
			}
			axes = append(axes, ax)
		}
	}
	out := cloneShape(s)
	switch {
	case scales != nil:
		if len(scales) != len(axes) {
			return nil, errf("%s has %d scales for %d axes", n.GetOpType(), len(scales), len(axes))
		}
		for i, ax := range axes {
			sc := scales[i]
			if !(sc > 0) || sc > float64(maxAttr) {
				return nil, errf("%s scale %v is not positive", n.GetOpType(), sc)
			}
			if !s[ax].Known() {
				if sc != 1 {
					out[ax] = unknownDim
				}
				continue
			}
			out[ax] = dimOK(int64(math.Floor(float64(s[ax].Size) * sc)))
		}
	case sizes != nil:
		if len(sizes) != len(axes) {
			return nil, errf("Resize has %d sizes for %d axes", len(sizes), len(axes))
		}
		policy := attrString(n, "keep_aspect_ratio_policy", "stretch")
		if policy == "stretch" {
			for i, ax := range axes {
				if sizes[i] < 0 {
					return nil, errf("Resize size %d is negative", sizes[i])
				}
				out[ax] = dimOK(sizes[i])
			}
			break
		}
		scale := math.Inf(1)
		if policy == "not_smaller" {
			scale = math.Inf(-1)
		} else if policy != "not_larger" {
			return nil, errf("keep_aspect_ratio_policy %q is unknown", policy)
		}
		for i, ax := range axes {
			if !s[ax].Known() || s[ax].Size == 0 {
				return nil, errf("Resize with kept aspect ratio of an unknown dimension")
			}
			f := float64(sizes[i]) / float64(s[ax].Size)
			if policy == "not_larger" {
				scale = math.Min(scale, f)
			} else {
				scale = math.Max(scale, f)
			}
		}
		for _, ax := range axes {
			out[ax] = dimOK(int64(math.Round(scale * float64(s[ax].Size))))
		}
	default:
		return nil, errf("%s has neither scales nor sizes", n.GetOpType())
	}
	return []*tinfo{{shape: out}}, nil
}

func ruleDepthSpace(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	s, err := needShape(in, 0, n.GetOpType())
	if err != nil {
		return nil, err
	}
	if len(s) != 4 {
		return nil, errf("%s needs rank 4", n.GetOpType())
	}
	b := attrInt(n, "blocksize", 0)
	if b < 1 || b > maxAttr {
		return nil, errf("blocksize %d is out of range", b)
	}
	out := cloneShape(s)
	div := func(d Dim, k int64) (Dim, error) {
		if !d.Known() {
			return unknownDim, nil
		}
		if d.Size%k != 0 {
			return unknownDim, errf("%s: %d is not divisible by %d", n.GetOpType(), d.Size, k)
		}
		return known(d.Size / k), nil
	}
	if n.GetOpType() == "DepthToSpace" {
		if out[1], err = div(s[1], b*b); err != nil {
			return nil, err
		}
		out[2], out[3] = prod([]Dim{s[2], known(b)}), prod([]Dim{s[3], known(b)})
	} else {
		out[1] = prod([]Dim{s[1], known(b * b)})
		if out[2], err = div(s[2], b); err != nil {
			return nil, err
		}
		if out[3], err = div(s[3], b); err != nil {
			return nil, err
		}
	}
	return []*tinfo{{shape: out}}, nil
}

func ruleTopK(n *onnxpb.NodeProto, in []*tinfo) ([]*tinfo, error) {
	s, err := needShape(in, 0, "TopK")
	if err != nil {
		return nil, err
	}
	ax, ok := normAxis(attrInt(n, "axis", -1), len(s))
	if !ok {
		return nil, errf("TopK axis is outside rank %d", len(s))
	}
	k := attrInt(n, "k", -1)
	if t := input(in, 1); t != nil {
		v, ok := intsOf(t)
		if !ok || len(v) != 1 {
			return nil, errf("the k of TopK is computed at run time")
		}
		k = v[0]
	}
	if k < 0 {
		return nil, errf("TopK k is %d", k)
	}
	out := cloneShape(s)
	out[ax] = dimOK(k)
	return []*tinfo{{shape: out}, {shape: cloneShape(out), elem: dtInt64}}, nil
}

// shortWhy trims long reasons for the Note column.
func shortWhy(s string) string {
	s = strings.TrimSpace(s)
	if len(s) > 200 {
		return s[:200] + "…"
	}
	return s
}
