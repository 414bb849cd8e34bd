package modelio

import (
	"fmt"
	"math"
	"slices"

	"fovea/modelio/onnxpb"
)

// axes locates the image's height and width axes in a tensor, once the
// tensor is known to be laid out like the image (possibly transposed).
type axes struct {
	ok   bool
	h, w int
}

// rfInfo is the receptive field and jump of a tensor w.r.t. the input
// image, per image axis (0 = height, 1 = width), and u, the first input
// pixel of the receptive field of cell 0 (negative inside the padding),
// known when uok.
type rfInfo struct {
	ok  bool
	why string // why it is not applicable
	r   [2]int64
	j   [2]int64
	u   [2]int64
	uok bool
	ax  axes
}

// analyse runs static inference over the graph in execution order and
// builds the layer table. It is re-run by Observe.
func (m *Model) analyse() {
	g := m.g
	g.info = make(map[string]*tinfo, len(g.producer)+len(g.inits)+len(g.inputs))
	for name, t := range g.inits {
		if t.GetDataLocation() == onnxpb.TensorProto_EXTERNAL {
			s := make(Shape, len(t.GetDims()))
			for i, d := range t.GetDims() {
				s[i] = dimOK(d)
			}
			g.info[name] = &tinfo{shape: s, elem: t.GetDataType(), src: SourceStatic}
			continue
		}
		g.info[name] = m.constInfo(t)
	}
	for name, vi := range g.inputs {
		ti := declaredInfo(vi)
		ti.act = !g.weightInput[name]
		ti.rf = rfInfo{why: "not computed from the image input"}
		if m.Image != nil && name == m.Image.Name {
			h, w := 2, 3
			if m.Image.Layout == LayoutNHWC {
				h, w = 1, 2
			}
			ti.rf = rfInfo{ok: true, r: [2]int64{1, 1}, j: [2]int64{1, 1}, uok: true, ax: axes{true, h, w}}
		}
		g.info[name] = ti
	}
	m.Layers = make([]Layer, 0, len(g.order))
	m.Total = Totals{}
	ins := []*tinfo{}
	for _, i := range g.order {
		n := g.nodes[i]
		ins = ins[:0]
		act := false
		fromObserved := false
		for _, name := range n.GetInput() {
			var t *tinfo
			if name != "" {
				t = g.info[name]
			}
			ins = append(ins, t)
			if t != nil && t.act {
				act = true
			}
			if t != nil && t.fromRun {
				fromObserved = true
			}
		}
		op := n.GetOpType()
		if op == "Shape" || op == "Size" {
			act = false // their outputs describe a tensor, they are not activations
		}
		outs := m.infer(i, ins)
		rf := m.rfFor(n, ins, outs)
		for k, name := range n.GetOutput() {
			if name == "" {
				continue
			}
			o := outs[k]
			o.act = act
			if k == 0 {
				o.rf = rf
			} else {
				o.rf = rfInfo{why: rf.why, ax: rf.ax}
				if !rf.ok {
					o.rf.why = "not tracked"
				}
			}
			if o.static() && fromObserved {
				o.note = "inferred from shapes observed in a run"
				o.fromRun = true
			}
			m.override(name, o)
			g.info[name] = o
		}
		if act && len(n.GetOutput()) > 0 && n.GetOutput()[0] != "" {
			l := m.layer(i, ins, g.info[n.GetOutput()[0]])
			m.Layers = append(m.Layers, l)
			m.Total.Params = satAdd(m.Total.Params, l.Params)
			m.Total.MACs = satAdd(m.Total.MACs, l.MACs)
			m.Total.Bytes = satAdd(m.Total.Bytes, l.Bytes)
		}
	}
}

// override applies shapes observed in a run, or declared in the file's
// value_info, to a tensor whose shape inference left unknown.
func (m *Model) override(name string, o *tinfo) {
	g := m.g
	obs, hasObs := g.observed[name]
	if o.static() {
		if hasObs && len(obs) == len(o.shape) {
			for i := 1; i < len(obs); i++ {
				if obs[i] != o.shape[i].Size {
					o.note = fmt.Sprintf("a run gave %s, static inference %s", ShapeOf(obs...), o.shape)
					break
				}
			}
		}
		return
	}
	if hasObs {
		s := ShapeOf(obs...)
		if len(o.shape) == len(s) && len(s) > 0 && !o.shape[0].Known() && o.shape[0].Param != "" {
			s[0] = o.shape[0] // keep the symbolic batch
		}
		o.note = "static inference: " + shortWhy(o.why)
		o.shape, o.src, o.fromRun = s, SourceObserved, true
		return
	}
	if vi, ok := g.declared[name]; ok {
		if tt := vi.GetType().GetTensorType(); tt != nil {
			if s, bad := shapeFromProto(tt.GetShape()); bad < 0 && s != nil {
				d := &tinfo{shape: s}
				if d.static() {
					for _, x := range s {
						if x.Size > maxDim {
							return
						}
					}
					o.note = "shape declared in the file (value_info), not inferred: " + shortWhy(o.why)
					o.shape, o.src, o.declared = s, SourceStatic, true
					if o.elem == 0 {
						o.elem = tt.GetElemType()
					}
				}
			}
		}
	}
}

// layer makes the table row of node i.
func (m *Model) layer(i int, ins []*tinfo, o *tinfo) Layer {
	n := m.g.nodes[i]
	l := Layer{Name: m.g.names[i], Op: n.GetOpType(), Output: n.GetOutput()[0], Shape: cloneShape(o.shape)}
	for _, in := range n.GetInput() {
		if in != "" {
			l.Inputs = append(l.Inputs, in)
		}
	}
	l.Width, l.Height, l.Depth = -1, -1, -1
	switch {
	case o.src == SourceObserved:
		l.ShapeSource = SourceObserved
	case o.static():
		l.ShapeSource = SourceStatic
	default:
		l.ShapeSource = SourceUnknown
	}
	if l.ShapeSource == SourceUnknown {
		l.Note = shortWhy(o.why)
		if l.Note == "" {
			l.Note = "shape unknown"
		}
	} else {
		l.Note = o.note
		l.Width, l.Height, l.Depth = whd(o.shape, o.rf.ax)
		if per, ok := perImage(o.shape); ok {
			l.Bytes = satMul(per, 4)
		}
	}
	l.Params = m.params(n, ins)
	if l.ShapeSource != SourceUnknown {
		l.MACs = macs(n, ins, o.shape)
	}
	if o.rf.ok {
		l.RF = clampInt(max(o.rf.r[0], o.rf.r[1]))
		l.Jump = clampInt(max(o.rf.j[0], o.rf.j[1]))
		l.RFY, l.RFX = clampInt(o.rf.r[0]), clampInt(o.rf.r[1])
		l.JumpY, l.JumpX = clampInt(o.rf.j[0]), clampInt(o.rf.j[1])
		if o.rf.uok {
			// Centre of pixels u … u+r−1 (Araujo, Norris & Sim, Distill 2019).
			l.CenterY = float64(o.rf.u[0]) + float64(o.rf.r[0]-1)/2
			l.CenterX = float64(o.rf.u[1]) + float64(o.rf.r[1]-1)/2
			l.HasCenter = true
		}
		if o.rf.r[0] != o.rf.r[1] {
			l.Note = joinNote(l.Note, fmt.Sprintf("receptive field %d×%d (height×width)", o.rf.r[0], o.rf.r[1]))
		}
	}
	return l
}

func joinNote(a, b string) string {
	if a == "" {
		return b
	}
	return a + "; " + b
}

func clampInt(v int64) int {
	if v > math.MaxInt32 {
		return math.MaxInt32
	}
	return int(v)
}

func satAdd(a, b int64) int64 {
	if a > math.MaxInt64-b {
		return math.MaxInt64
	}
	return a + b
}

func satMul(a, b int64) int64 {
	if a == 0 || b == 0 {
		return 0
	}
	if a > math.MaxInt64/b {
		return math.MaxInt64
	}
	return a * b
}

// perImage is the element count of one image's slice of a batch-first
// tensor (dims after the first); scalars and vectors count whole.
func perImage(s Shape) (int64, bool) {
	dims := s
	if len(s) >= 2 {
		dims = s[1:]
	}
	p := int64(1)
	for _, d := range dims {
		if !d.Known() {
			return 0, false
		}
		p = satMul(p, d.Size)
	}
	return p, true
}

// whd maps a shape to width, height, depth for one image: rank 4 by the
// tracked image axes (NCHW when unknown, the layout ONNX convolutions use),
// rank 3 as [N, C, L] → L×1×C, rank 2 as 1×1×features.
func whd(s Shape, ax axes) (w, h, d int64) {
	switch len(s) {
	case 4:
		hi, wi := 2, 3
		if ax.ok && ax.h >= 1 && ax.w >= 1 && ax.h != ax.w {
			hi, wi = ax.h, ax.w
		}
		ci := 6 - hi - wi // the remaining axis of 1, 2, 3
		if ci < 1 || ci > 3 {
			return -1, -1, -1
		}
		return s[wi].Size, s[hi].Size, s[ci].Size
	case 3:
		return s[2].Size, 1, s[1].Size
	case 2:
		return 1, 1, s[1].Size
	case 1:
		return 1, 1, s[0].Size
	}
	return -1, -1, -1
}

// elems is the element count of a weight operand, when its shape is known.
func elems(t *tinfo) int64 {
	if t == nil || t.act || t.shape == nil {
		return 0
	}
	p := int64(1)
	for _, d := range t.shape {
		if !d.Known() {
			return 0
		}
		p = satMul(p, d.Size)
	}
	return p
}

// params counts the trainable values node n owns (see the package doc).
func (m *Model) params(n *onnxpb.NodeProto, ins []*tinfo) int64 {
	at := func(k int) *tinfo { return input(ins, k) }
	switch n.GetOpType() {
	case "Conv", "ConvTranspose", "Gemm":
		return satAdd(elems(at(1)), elems(at(2)))
	case "ConvInteger", "MatMulInteger":
		return elems(at(1))
	case "QLinearConv":
		return satAdd(elems(at(3)), elems(at(8)))
	case "MatMul":
		return satAdd(elems(at(0)), elems(at(1)))
	case "BatchNormalization":
		return satMul(2, elems(at(1)))
	case "InstanceNormalization", "LayerNormalization", "GroupNormalization":
		return satAdd(elems(at(1)), elems(at(2)))
	case "PRelu":
		return elems(at(1))
	case "Add", "Sub", "Mul", "Div":
		var p int64
		for _, t := range ins {
			if e := elems(t); e > 1 {
				p = satAdd(p, e)
			}
		}
		return p
	}
	return 0
}

// macs counts multiply-accumulates per image (see the package doc).
func macs(n *onnxpb.NodeProto, ins []*tinfo, out Shape) int64 {
	shapeAt := func(k int) Shape {
		if t := input(ins, k); t != nil {
			return t.shape
		}
		return nil
	}
	all := func(s Shape) (int64, bool) {
		if s == nil {
			return 0, false
		}
		p := int64(1)
		for _, d := range s {
			if !d.Known() {
				return 0, false
			}
			p = satMul(p, d.Size)
		}
		return p, true
	}
	switch n.GetOpType() {
	case "Conv", "ConvInteger", "QLinearConv":
		wi := 1
		if n.GetOpType() == "QLinearConv" {
			wi = 3
		}
		w, ok1 := all(shapeAt(wi))
		if len(out) < 3 {
			return 0
		}
		sp, ok2 := all(out[2:])
		if ok1 && ok2 {
			return satMul(w, sp)
		}
	case "ConvTranspose":
		w, ok1 := all(shapeAt(1))
		x := shapeAt(0)
		if len(x) < 3 {
			return 0
		}
		sp, ok2 := all(x[2:])
		if ok1 && ok2 {
			return satMul(w, sp)
		}
	case "Gemm":
		a := shapeAt(0)
		if len(a) != 2 || len(out) != 2 {
			return 0
		}
		k := a[1]
		if attrInt(n, "transA", 0) != 0 {
			k = a[0]
		}
		if k.Known() && out[1].Known() {
			return satMul(k.Size, out[1].Size)
		}
	case "MatMul", "MatMulInteger":
		a := shapeAt(0)
		if len(a) == 0 {
			return 0
		}
		k := a[len(a)-1]
		per, ok := perImage(out)
		if k.Known() && ok {
			return satMul(per, k.Size)
		}
	}
	return 0
}

// rfFor computes the receptive field of node n's first output from its
// inputs, per the recurrence in the package doc.
func (m *Model) rfFor(n *onnxpb.NodeProto, ins []*tinfo, outs []*tinfo) rfInfo {
	op := n.GetOpType()
	var acts []*tinfo
	for _, t := range ins {
		if t != nil && t.act {
			acts = append(acts, t)
		}
	}
	if len(acts) == 0 {
		return rfInfo{why: "not computed from the image input"}
	}
	outRank := -1
	if len(outs) > 0 && outs[0].shape != nil {
		outRank = len(outs[0].shape)
	}
	first := acts[0]
	for _, t := range acts {
		if !t.rf.ok {
			return rfInfo{why: t.rf.why, ax: keepAxes(op, t.rf.ax, t, outRank)}
		}
	}
	whole := rfInfo{why: "every value depends on the whole image"}
	switch {
	case op == "Conv" || op == "ConvInteger" || op == "QLinearConv" || op == "MaxPool" || op == "AveragePool" || op == "LpPool":
		x := input(ins, 0)
		if x == nil || !x.rf.ok || len(x.shape) != 4 {
			return rfInfo{why: "receptive field is tracked for 2-D convolutions and pooling only"}
		}
		var kernel []int64
		if op == "Conv" || op == "ConvInteger" || op == "QLinearConv" {
			wi := 1
			if op == "QLinearConv" {
				wi = 3
			}
			w := input(ins, wi)
			if w == nil || len(w.shape) != 4 {
				return rfInfo{why: "kernel size unknown"}
			}
			for _, d := range w.shape[2:] {
				if !d.Known() {
					return rfInfo{why: "kernel size unknown"}
				}
				kernel = append(kernel, d.Size)
			}
		}
		sp, err := readSpatial(n, 2, kernel)
		if err != nil {
			return rfInfo{why: err.Error()}
		}
		// Tensor axis 2 is the first kernel axis, axis 3 the second.
		var idx [2]int // kernel index for image height, width
		switch {
		case x.rf.ax.h == 2 && x.rf.ax.w == 3:
			idx = [2]int{0, 1}
		case x.rf.ax.h == 3 && x.rf.ax.w == 2:
			idx = [2]int{1, 0}
		default:
			return rfInfo{why: "the operation's spatial axes are not the image's height and width"}
		}
		res := rfInfo{ok: true, uok: x.rf.uok, ax: x.rf.ax}
		for a := range 2 {
			k, s, d := sp.kernel[idx[a]], sp.strides[idx[a]], sp.dilations[idx[a]]
			if span := (k - 1) * d; (span > 0 && x.rf.j[a] > maxDim/span) || x.rf.j[a] > maxDim/s {
				return rfInfo{why: "receptive field too large to track"}
			}
			res.r[a] = x.rf.r[a] + (k-1)*d*x.rf.j[a]
			res.j[a] = x.rf.j[a] * s
			if res.r[a] > maxDim || res.j[a] > maxDim {
				return rfInfo{why: "receptive field too large to track"}
			}
			in := unknownDim
			if axis := [2]int{x.rf.ax.h, x.rf.ax.w}[a]; axis < len(x.shape) {
				in = x.shape[axis]
			}
			p, ok := sp.padBegin(idx[a], in)
			res.u[a], res.uok = shiftStart(x.rf.u[a], p, x.rf.j[a], res.uok && ok)
		}
		return res
	case op == "Pad":
		res := first.rf
		begin, ok := padOpBegin(n, ins, len(first.shape))
		for a, axis := range [2]int{res.ax.h, res.ax.w} {
			known := ok && axis >= 0 && axis < len(begin)
			p := int64(0)
			if known {
				p = begin[axis]
			}
			res.u[a], res.uok = shiftStart(res.u[a], p, res.j[a], res.uok && known)
		}
		return res
	case unaryOps[op]:
		return first.rf
	case op == "Transpose":
		perm, err := transposePerm(n, len(first.shape))
		if err != nil || first.shape == nil {
			return rfInfo{why: "transpose of unknown rank"}
		}
		res := first.rf
		for i, p := range perm {
			if p == first.rf.ax.h {
				res.ax.h = i
			}
			if p == first.rf.ax.w {
				res.ax.w = i
			}
		}
		return res
	case binaryOps[op] || op == "Concat" || op == "Split":
		// Per axis, the branch with the largest receptive field (ties: the
		// larger jump, then the first input) gives r, j and u.
		res := rfInfo{ok: true, uok: true}
		var best [2]*rfInfo
		for k, t := range acts {
			ax := t.rf.ax
			if outRank >= 0 && t.shape != nil {
				off := outRank - len(t.shape)
				ax.h += off
				ax.w += off
			}
			if k == 0 {
				res.ax = ax
			} else if ax != res.ax {
				return rfInfo{why: "inputs with different layouts are merged"}
			}
			for a := range 2 {
				if b := best[a]; b == nil || t.rf.r[a] > b.r[a] || (t.rf.r[a] == b.r[a] && t.rf.j[a] > b.j[a]) {
					best[a] = &t.rf
				}
			}
		}
		for a, b := range best {
			res.r[a], res.j[a], res.u[a] = b.r[a], b.j[a], b.u[a]
			res.uok = res.uok && b.uok
		}
		if op == "Concat" || op == "Split" {
			a := attrInt(n, "axis", 0)
			if ax, ok := normAxis(a, max(outRank, 0)); !ok || ax == res.ax.h || ax == res.ax.w {
				return rfInfo{why: "concatenation along a spatial axis"}
			}
		}
		return res
	case op == "GlobalAveragePool" || op == "GlobalMaxPool" || op == "GlobalLpPool" || op == "Flatten" ||
		op == "Reshape" || op == "Gemm" || op == "MatMul" || op == "ReduceMean" || op == "ReduceMax" ||
		op == "ReduceSum" || op == "ReduceMin" || op == "ReduceL2" || op == "ArgMax" || op == "ArgMin":
		whole.ax = keepAxes(op, first.rf.ax, first, outRank)
		return whole
	}
	return rfInfo{why: "receptive field is not tracked through " + op, ax: keepAxes(op, first.rf.ax, first, outRank)}
}

// padBegin is the padding before the start of spatial axis i: the pads
// attribute, 0 for VALID, and for SAME_UPPER / SAME_LOWER the split ONNX
// Operators.md gives (Conv, auto_pad): the total pad makes the output
// ceil(in / s) long, (ceil(in/s) − 1)·s + (k−1)·d + 1 − in, and "in case the
// padding is an odd number, the extra padding is added at the end for
// SAME_UPPER and at the beginning for SAME_LOWER". SAME needs the input
// size: ok is false when it is unknown. The total is negative when the
// stride exceeds the kernel extent; ONNX does not say how to split that.
// ONNX Runtime 1.24.3 starts the windows at pixel 0 for a total of −1 (Conv
// and MaxPool, both modes, as a total clamped at 0 would), but for −2 and
// below it starts Conv and MaxPool windows at different pixels (measured
// with 1×k kernels on a ramp), so ok is false there.
func (sp *spatial) padBegin(i int, in Dim) (p int64, ok bool) {
	switch sp.autoPad {
	case "VALID":
		return 0, true
	case "SAME_UPPER", "SAME_LOWER":
		if !in.Known() {
			return 0, false
		}
		k, s, d := sp.kernel[i], sp.strides[i], sp.dilations[i]
		out := (in.Size + s - 1) / s
		total := (out-1)*s + (k-1)*d + 1 - in.Size
		switch {
		case total < -1:
			return 0, false
		case total < 0:
			return 0, true
		}
		if sp.autoPad == "SAME_UPPER" {
			return total / 2, true
		}
		return total - total/2, true
	}
	return sp.pads[i], true
}

// shiftStart is the start of the receptive field after a layer padding p
// pixels (of its input, whose jump is j) before the start:
// u_l = u_(l−1) − p_l·j_(l−1) (Araujo, Norris & Sim, Distill 2019). ok is
// false when the start was unknown or leaves the tracked range.
func shiftStart(u, p, j int64, ok bool) (int64, bool) {
	if !ok || p > maxDim || p < -maxDim || (p != 0 && j > maxDim/max(p, -p)) {
		return 0, false
	}
	v := u - p*j
	if v > maxDim || v < -maxDim {
		return 0, false
	}
	return v, true
}

// padOpBegin reads the leading pads of a Pad node per tensor axis (the pads
// attribute before opset 11, the pads and axes inputs after), when they are
// constants.
func padOpBegin(n *onnxpb.NodeProto, ins []*tinfo, rank int) ([]int64, bool) {
	pads, ok := attrInts(n, "pads")
	if !ok {
		if pads, ok = intsOf(input(ins, 1)); !ok {
			return nil, false
		}
	}
	axes := make([]int, rank)
	for i := range axes {
		axes[i] = i
	}
	if t := input(ins, 3); t != nil {
		v, ok := intsOf(t)
		if !ok {
			return nil, false
		}
		axes = axes[:0]
		for _, a := range v {
			ax, ok := normAxis(a, rank)
			if !ok {
				return nil, false
			}
			axes = append(axes, ax)
		}
	}
	if len(pads) != 2*len(axes) {
		return nil, false
	}
	begin := make([]int64, rank)
	for i, ax := range axes {
		begin[ax] = pads[i]
	}
	return begin, true
}

// keepAxes says where the image axes are in the output of op, when the op
// keeps the layout of its input.
func keepAxes(op string, ax axes, in *tinfo, outRank int) axes {
	if !ax.ok || in.shape == nil || outRank != len(in.shape) {
		return axes{}
	}
	switch op {
	case "Flatten", "Reshape", "Gemm", "MatMul", "Transpose", "Squeeze", "Unsqueeze":
		return axes{}
	}
	return ax
}

// layerIndex finds a layer by node name or output tensor name.
func (m *Model) layerIndex(name string) int {
	return slices.IndexFunc(m.Layers, func(l Layer) bool { return l.Name == name || l.Output == name })
}
