package modelio

import (
	"math"
	"slices"

	"fovea/modelio/onnxpb"
)

// Shape rules of the operators that work on the spatial axes: Conv,
// ConvTranspose, pooling, Pad, Resize/Upsample, DepthToSpace/SpaceToDepth,
// and the reader of their kernel, stride, dilation and pad attributes.

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
