package modelio

import (
	"slices"

	"fovea/modelio/onnxpb"
)

// Shape rules of the operators that rearrange a tensor without computing
// on its values: Flatten, Reshape, Concat, Transpose, Squeeze, Unsqueeze,
// Shape, Gather, Slice, Split.

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
