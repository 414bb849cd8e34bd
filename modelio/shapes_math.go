package modelio

import (
	"fovea/modelio/onnxpb"
)

// Shape rules of the elementwise operators (unary, binary with
// broadcasting), Gemm and MatMul, the reductions, and the selections along
// one axis (ArgMax/ArgMin, TopK).

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
