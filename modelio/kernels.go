package modelio

// Kernels holds the weights of one convolution.
type Kernels struct {
	Node  string // node name (as in Layer.Name)
	M     int    // filters (output channels)
	C     int    // input channels per group (C/group of the input)
	KH    int
	KW    int
	Group int
	// W is [M][C][KH][KW] row-major: the weight of filter m, channel c,
	// row y, column x is W[((m*C+c)*KH+y)*KW+x].
	W []float32
	// Bias has M values, nil when the convolution has none.
	Bias []float32
}

// Kernels returns the weights of a 2-D convolution. node is a node name or
// output tensor name as in the layer table; "" asks for the first layer:
// the Conv that reads the image input, possibly through a layout Transpose
// and normalisation nodes (Sub, Div, Mul, Add, BatchNormalization,
// Identity, Cast, Pad). Weights are converted to float32 from whatever
// element type the file stores.
func (m *Model) Kernels(node string) (k *Kernels, err error) {
	defer func() { // last resort, see decode
		if r := recover(); r != nil {
			k, err = nil, m.errf(KindInvalid, "internal error while reading kernels (please report): %v", r)
		}
	}()
	g := m.g
	idx := -1
	if node == "" {
		if m.Image == nil {
			return nil, m.errf(KindNotFound, "no input looks like an image, so there is no first layer")
		}
		idx, _ = m.firstConv(m.Image.Name)
		if idx < 0 {
			return nil, m.errf(KindNotFound, "no convolution reads the image input %q", m.Image.Name)
		}
	} else {
		for i, name := range g.names {
			if name == node {
				idx = i
				break
			}
		}
		if idx < 0 {
			if p, ok := g.producer[node]; ok {
				idx = p
			}
		}
		if idx < 0 {
			return nil, m.errf(KindNotFound, "no node or tensor named %q", node)
		}
	}
	n := g.nodes[idx]
	name := g.names[idx]
	op := n.GetOpType()
	wi, bi := 1, 2
	switch op {
	case "Conv":
	case "ConvInteger":
		bi = -1
	case "QLinearConv":
		wi, bi = 3, 8
	default:
		return nil, m.errf(KindNotFound, "node %q is a %s, not a convolution", name, op)
	}
	in := n.GetInput()
	if len(in) <= wi || in[wi] == "" {
		return nil, m.errf(KindInvalid, "convolution %q has no weight input", name)
	}
	wt := g.constTensor(in[wi])
	if wt == nil {
		if g.weightInput[in[wi]] {
			return nil, m.errf(KindUnsupported, "convolution %q: weights %q are declared without data (architecture-only model)", name, in[wi])
		}
		return nil, m.errf(KindUnsupported, "convolution %q: weights %q are computed at run time, not stored", name, in[wi])
	}
	dims := wt.GetDims()
	if len(dims) != 4 {
		return nil, m.errf(KindUnsupported, "convolution %q has %d-D weights; only 2-D kernels [M C kH kW] are shown", name, len(dims))
	}
	for _, d := range dims {
		if d <= 0 || d > maxAttr {
			return nil, m.errf(KindInvalid, "convolution %q: weight dims %s", name, dimsString(dims))
		}
	}
	group := attrInt(n, "group", 1)
	if group < 1 || group > dims[0] || dims[0]%group != 0 {
		return nil, m.errf(KindInvalid, "convolution %q: %d filters cannot form %d groups", name, dims[0], group)
	}
	w, err := m.floats("convolution "+quote(name)+" weights "+quote(in[wi]), wt)
	if err != nil {
		return nil, err
	}
	k = &Kernels{Node: name, M: int(dims[0]), C: int(dims[1]), KH: int(dims[2]), KW: int(dims[3]), Group: int(group), W: w}
	if bi >= 0 && len(in) > bi && in[bi] != "" {
		bt := g.constTensor(in[bi])
		if bt == nil {
			return nil, m.errf(KindUnsupported, "convolution %q: bias %q is not stored in the file", name, in[bi])
		}
		b, err := m.floats("convolution "+quote(name)+" bias "+quote(in[bi]), bt)
		if err != nil {
			return nil, err
		}
		if len(b) != k.M {
			return nil, m.errf(KindInvalid, "convolution %q: bias has %d values for %d filters", name, len(b), k.M)
		}
		k.Bias = b
	}
	return k, nil
}

// Weights returns an initializer or Constant-node tensor as float32 with
// its dims, for callers that need weights other than convolution kernels.
func (m *Model) Weights(name string) ([]float32, []int64, error) {
	t := m.g.constTensor(name)
	if t == nil {
		return nil, nil, m.errf(KindNotFound, "no stored tensor named %q", name)
	}
	v, err := m.floats("tensor "+quote(name), t)
	if err != nil {
		return nil, nil, err
	}
	return v, append([]int64(nil), t.GetDims()...), nil
}
