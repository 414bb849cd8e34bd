package modelio

import (
	"fmt"
)

// Stages of the convolutional front of a network, for analyses that run
// parts of it on crops of its activation maps (incremental occlusion): the
// graph is cut at tensors that every path from the image to the outputs
// passes through, and, along each image axis, every operator between two
// cuts either maps cells one to one (activations, normalisation with fixed
// statistics, merges of same-sized maps, concatenation of channels) or slides
// a window (convolution, pooling) whose geometry the stage records.

// StageTensor is one activation tensor inside a stage.
type StageTensor struct {
	Name string
	// Shape is the per-image shape (without the batch); HAxis and WAxis
	// index its image height and width axes.
	Shape        []int64
	HAxis, WAxis int
}

// Height and Width are the sizes of the tensor's image axes.
func (t StageTensor) Height() int { return int(t.Shape[t.HAxis]) }

// Width is the size of the tensor's image width axis.
func (t StageTensor) Width() int { return int(t.Shape[t.WAxis]) }

// StageStep is one operator of a stage as seen along the image axes
// (index 0 = height, 1 = width). A window step reads, for output cell o,
// the input cells o·S − PadBegin + t·D for t = 0 … K−1 (cells outside the
// input are padding); any other step maps each cell to the same cell.
type StageStep struct {
	Op               string
	Node             string // node name
	In               []int  // indices in Stage.Tensors of the activation inputs
	Out              int
	Window           bool
	K, S, D          [2]int
	PadBegin, PadEnd [2]int
}

// Stage is the part of the graph from one cut tensor (Tensors[0]) to the
// next (Tensors[len-1]).
type Stage struct {
	Tensors []StageTensor
	Steps   []StageStep // in execution order
	MACs    int64       // multiply-accumulates of one image
}

// In and Out are the stage's input and output tensors.
func (s Stage) In() StageTensor { return s.Tensors[0] }

// Out is the stage's output tensor.
func (s Stage) Out() StageTensor { return s.Tensors[len(s.Tensors)-1] }

// pointOps map every cell of their input to the same cell of their output
// (with per-channel parameters at most).
var pointOps = map[string]bool{
	"Relu": true, "LeakyRelu": true, "Sigmoid": true, "Tanh": true, "Clip": true, "HardSigmoid": true,
	"HardSwish": true, "Elu": true, "Selu": true, "Celu": true, "Softplus": true, "Softsign": true,
	"Mish": true, "Gelu": true, "Erf": true, "Exp": true, "Log": true, "Neg": true, "Abs": true,
	"Sqrt": true, "Reciprocal": true, "Floor": true, "Ceil": true, "Round": true, "Sign": true,
	"ThresholdedRelu": true, "Shrink": true, "BatchNormalization": true, "LRN": true, "PRelu": true,
	"Identity": true, "Dropout": true,
	"Add": true, "Sub": true, "Mul": true, "Div": true, "Max": true, "Min": true, "Sum": true, "Mean": true, "Pow": true,
}

// Stages returns the stages of the network's convolutional front, from the
// image input to the last cut before the first operator that is not
// tracked (global pooling, a reshape, a fully connected layer, a spatial
// padding rule that depends on the input size, ...); why says where and
// why the front ends. A cut is placed only where the producer is not a
// convolution, normalisation or merge, so that the runtime can still fuse
// a convolution with the operators that follow it.
func (m *Model) Stages() (stages []Stage, why string) {
	g := m.g
	if m.Image == nil {
		return nil, "no image input"
	}
	img := m.Image.Name
	ti := g.info[img]
	if ti == nil || !ti.static() || len(ti.shape) != 4 || !ti.rf.ax.ok {
		return nil, "the image input's size is not fixed"
	}
	type tens struct {
		t     StageTensor
		stage int // index of the stage whose Tensors hold it, in cur
	}
	macsOf := map[string]int64{}
	for _, l := range m.Layers {
		macsOf[l.Output] = l.MACs
	}
	remaining := map[string]int{}
	for name, cs := range g.consumers {
		remaining[name] = len(cs)
	}
	for _, o := range m.pb.GetGraph().GetOutput() {
		remaining[o.GetName()]++
	}
	live := map[string]bool{img: true}
	stageTensor := func(name string) (StageTensor, error) {
		t := g.info[name]
		if t == nil || !t.static() || len(t.shape) != 4 || !t.rf.ax.ok {
			return StageTensor{}, fmt.Errorf("the shape or layout of %q is not known", name)
		}
		s := make([]int64, 3)
		for i := range s {
			s[i] = t.shape[i+1].Size
		}
		return StageTensor{Name: name, Shape: s, HAxis: t.rf.ax.h - 1, WAxis: t.rf.ax.w - 1}, nil
	}
	first, err := stageTensor(img)
	if err != nil {
		return nil, err.Error()
	}
	cur := Stage{Tensors: []StageTensor{first}}
	index := map[string]int{img: 0}
	for _, i := range g.order {
		n := g.nodes[i]
		var acts []string
		for _, in := range n.GetInput() {
			if in != "" && g.info[in] != nil && g.info[in].act && !g.weightInput[in] {
				acts = append(acts, in)
			}
		}
		if len(acts) == 0 {
			continue // computed from weights only
		}
		step, err := m.stageStep(i, acts, index, &cur)
		if err != nil {
			return stages, fmt.Sprintf("node %q (%s): %v", g.names[i], n.GetOpType(), err)
		}
		out := n.GetOutput()[0]
		t, err := stageTensor(out)
		if err != nil {
			return stages, fmt.Sprintf("node %q (%s): %v", g.names[i], n.GetOpType(), err)
		}
		step.Out = len(cur.Tensors)
		index[out] = step.Out
		cur.Tensors = append(cur.Tensors, t)
		cur.Steps = append(cur.Steps, step)
		cur.MACs += max(macsOf[out], 0)
		seen := map[string]bool{}
		for _, in := range acts {
			if seen[in] {
				continue
			}
			seen[in] = true
			remaining[in]--
			if remaining[in] <= 0 {
				delete(live, in)
			}
		}
		if remaining[out] > 0 {
			live[out] = true
		}
		if len(live) == 1 && live[out] && cutAfter(n.GetOpType()) {
			stages = append(stages, cur)
			cur = Stage{Tensors: []StageTensor{t}}
			index = map[string]int{out: 0}
		}
	}
	return stages, "the whole graph is tracked"
}

// cutAfter reports whether a stage may end at the output of op.
func cutAfter(op string) bool {
	switch op {
	case "Conv", "BatchNormalization", "Add", "Sub", "Mul", "Div", "Sum", "Mean", "Max", "Min", "Pow", "Identity", "Dropout", "Transpose":
		return false
	}
	return true
}

// stageStep describes node i, whose activation inputs are acts, as a step
// of cur, or says why it cannot be one.
func (m *Model) stageStep(i int, acts []string, index map[string]int, cur *Stage) (StageStep, error) {
	g := m.g
	n := g.nodes[i]
	op := n.GetOpType()
	step := StageStep{Op: op, Node: g.names[i], K: [2]int{1, 1}, S: [2]int{1, 1}, D: [2]int{1, 1}}
	if n.GetDomain() != "" && n.GetDomain() != "ai.onnx" {
		return step, fmt.Errorf("operator of domain %q", n.GetDomain())
	}
	for _, a := range acts {
		k, ok := index[a]
		if !ok {
			return step, fmt.Errorf("reads %q from before the current stage", a)
		}
		step.In = append(step.In, k)
	}
	for k, out := range n.GetOutput() {
		if k > 0 && out != "" && len(g.consumers[out]) > 0 {
			return step, fmt.Errorf("its output %d is used", k)
		}
	}
	in := cur.Tensors[step.In[0]]
	switch {
	case op == "Conv" || op == "MaxPool" || op == "AveragePool":
		if len(step.In) != 1 || acts[0] != n.GetInput()[0] {
			return step, fmt.Errorf("a weight computed from the image")
		}
		if in.HAxis != 1 || in.WAxis != 2 {
			return step, fmt.Errorf("its spatial axes are not the image's height and width")
		}
		var kernel []int64
		if op == "Conv" {
			w := g.info[n.GetInput()[1]]
			if w == nil || !w.static() || len(w.shape) != 4 {
				return step, fmt.Errorf("kernel size unknown")
			}
			kernel = []int64{w.shape[2].Size, w.shape[3].Size}
		}
		sp, err := readSpatial(n, 2, kernel)
		if err != nil {
			return step, err
		}
		if sp.autoPad != "NOTSET" && sp.autoPad != "" && sp.autoPad != "VALID" {
			return step, fmt.Errorf("auto_pad %s pads by the input's size", sp.autoPad)
		}
		if op == "MaxPool" && attrInt(n, "storage_order", 0) != 0 {
			return step, fmt.Errorf("storage_order 1")
		}
		if op != "Conv" && attrInt(n, "ceil_mode", 0) != 0 {
			return step, fmt.Errorf("ceil_mode 1")
		}
		step.Window = true
		for a := range 2 {
			step.K[a], step.S[a], step.D[a] = int(sp.kernel[a]), int(sp.strides[a]), int(sp.dilations[a])
			if sp.autoPad != "VALID" {
				step.PadBegin[a], step.PadEnd[a] = int(sp.pads[a]), int(sp.pads[a+2])
			}
		}
		return step, nil
	case op == "Concat":
		ax := attrInt(n, "axis", 0)
		a, ok := normAxis(ax, 4)
		if !ok || a-1 == in.HAxis || a-1 == in.WAxis || a == 0 {
			return step, fmt.Errorf("concatenation along axis %d", ax)
		}
		if len(acts) != len(n.GetInput()) {
			return step, fmt.Errorf("concatenates a constant")
		}
	case op == "Transpose":
		perm, err := transposePerm(n, 4)
		if err != nil || perm[0] != 0 {
			return step, fmt.Errorf("moves the batch axis")
		}
	case pointOps[op]:
		if op == "BatchNormalization" && attrInt(n, "training_mode", 0) != 0 {
			return step, fmt.Errorf("training mode")
		}
		// Constants must not vary along the image axes.
		for _, name := range n.GetInput() {
			t := g.info[name]
			if name == "" || t == nil || (t.act && !g.weightInput[name]) {
				continue
			}
			if t.shape == nil {
				return step, fmt.Errorf("constant %q of unknown shape", name)
			}
			if op == "PRelu" || binaryOps[op] {
				r := len(t.shape)
				for _, ax := range []int{in.HAxis + 1, in.WAxis + 1} {
					if j := ax - (4 - r); j >= 0 && j < r && t.shape[j].Size != 1 {
						return step, fmt.Errorf("constant %q varies over the image", name)
					}
				}
			}
		}
	default:
		return step, fmt.Errorf("not tracked")
	}
	for _, k := range step.In {
		t := cur.Tensors[k]
		if t.Height() != in.Height() || t.Width() != in.Width() || t.HAxis != in.HAxis || t.WAxis != in.WAxis {
			return step, fmt.Errorf("merges maps of different sizes or layouts")
		}
	}
	return step, nil
}
