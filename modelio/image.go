package modelio

import (
	"fmt"
	"slices"
)

// passThrough are the ops an image may go through before the first
// convolution: layout transposes and the normalisation exporters put in
// front (x − mean) / std, batch normalisation, casts.
var passThrough = map[string]bool{
	"Sub": true, "Div": true, "Mul": true, "Add": true, "BatchNormalization": true,
	"Identity": true, "Cast": true, "Transpose": true, "Pad": true,
}

// firstConv follows the image input through passThrough ops (breadth
// first, in execution order) to the first Conv that reads it as data. It
// also reports the first layout Transpose on the way.
func (m *Model) firstConv(input string) (conv int, transposePerm []int64) {
	g := m.g
	conv = -1
	seen := map[string]bool{input: true}
	queue := []string{input}
	for steps := 0; len(queue) > 0 && steps < 64; steps++ {
		t := queue[0]
		queue = queue[1:]
		cons := slices.Clone(g.consumers[t])
		for _, c := range cons {
			n := g.nodes[c]
			if n.GetDomain() != "" {
				continue
			}
			op := n.GetOpType()
			if (op == "Conv" || op == "ConvInteger" || op == "QLinearConv") && len(n.GetInput()) > 0 && n.GetInput()[0] == t {
				if conv < 0 || slices.Index(g.order, c) < slices.Index(g.order, conv) {
					conv = c
				}
				continue
			}
			if !passThrough[op] {
				continue
			}
			if op == "Transpose" && transposePerm == nil {
				transposePerm, _ = attrInts(n, "perm")
				if transposePerm == nil {
					transposePerm = []int64{}
				}
			}
			for _, o := range n.GetOutput() {
				if o != "" && !seen[o] {
					seen[o] = true
					queue = append(queue, o)
				}
			}
		}
		if conv >= 0 {
			return conv, transposePerm
		}
	}
	return conv, transposePerm
}

func isColour(d Dim) bool { return d.Known() && (d.Size == 1 || d.Size == 3 || d.Size == 4) }

// findImage picks the input that looks like an image: a float tensor of
// rank 4 that is not a weight. The layout comes from the graph first (a
// Transpose [0 3 1 2] after the input means NHWC; a Conv reading it
// directly means NCHW, the layout of ONNX convolutions), then from the
// position of a 1-, 3- or 4-sized dimension.
func (m *Model) findImage() {
	type cand struct {
		img  *ImageInput
		conv bool
	}
	var cands []cand
	for _, v := range m.Inputs {
		if v.Weight || len(v.Shape) != 4 {
			continue
		}
		switch v.ElemType {
		case "float32", "float16", "float64", "bfloat16":
		default:
			continue
		}
		img := &ImageInput{Name: v.Name}
		conv, perm := m.firstConv(v.Name)
		s := v.Shape
		switch {
		case slices.Equal(perm, []int64{0, 3, 1, 2}):
			img.Layout, img.Why = LayoutNHWC, "a Transpose [0 3 1 2] turns it channels-first"
		case perm != nil && len(perm) > 0:
			img.Layout, img.Why = LayoutNCHW, fmt.Sprintf("a Transpose %v follows it; read as channels-first", perm)
		case conv >= 0 && perm == nil:
			img.Layout, img.Why = LayoutNCHW, "a convolution reads it directly (ONNX convolutions are channels-first)"
		case isColour(s[1]) && !isColour(s[3]):
			img.Layout, img.Why = LayoutNCHW, "dimension 1 has a colour-channel size"
		case isColour(s[3]) && !isColour(s[1]):
			img.Layout, img.Why = LayoutNHWC, "dimension 3 has a colour-channel size"
		default:
			img.Layout, img.Why = LayoutNCHW, "no evidence either way; ONNX convolutions are channels-first"
		}
		c, h, w := s[1], s[2], s[3]
		if img.Layout == LayoutNHWC {
			h, w, c = s[1], s[2], s[3]
		}
		toInt := func(d Dim) int {
			if d.Known() && d.Size <= 1<<30 {
				return int(d.Size)
			}
			return 0
		}
		img.Channels, img.Height, img.Width = toInt(c), toInt(h), toInt(w)
		img.BatchFixed = toInt(s[0])
		cands = append(cands, cand{img, conv >= 0})
	}
	if len(cands) == 0 {
		return
	}
	pick := cands[0]
	for _, c := range cands {
		if c.conv {
			pick = c
			break
		}
	}
	m.Image = pick.img
	if len(cands) > 1 {
		m.Notes = append(m.Notes, fmt.Sprintf("%d inputs look like images; %q is taken as the image", len(cands), pick.img.Name))
	}
}
