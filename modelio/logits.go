package modelio

import (
	"fmt"
	"slices"

	"fovea/modelio/onnxpb"
)

// ClassSoftmax is the Softmax or LogSoftmax node that turns a score output's
// logits into probabilities (or log-probabilities) over the classes. Most
// exports from high-level training frameworks end that way; the node's input
// is then the tensor of logits, which stays informative where the
// probabilities saturate at 0 or 1.
type ClassSoftmax struct {
	Output string // the graph output the node (through shape-only steps) produces
	Node   string // the node's name, or Op_index when it has none
	Op     string // "Softmax" or "LogSoftmax"
	Logits string // the node's input: the logits
}

// shapeOnly are the steps allowed between the class softmax and the score
// output: they move no value from one class to another.
var shapeOnly = []string{"Reshape", "Flatten", "Identity", "Squeeze", "Dropout"}

// ClassSoftmax finds the Softmax or LogSoftmax node that produces the graph
// output named output, directly or through Reshape, Flatten, Identity,
// Squeeze or Dropout steps, and checks that it normalises over the class
// axis of one image: every value of an image in one distribution, never
// across images. The axis follows the ONNX operator spec: before opset 13
// the input is coerced to 2-D at axis (default 1), [a0·…·a(k−1),
// ak·…·a(n−1)], so the dimensions between the batch and axis must be 1;
// from opset 13 on the softmax runs along the one axis (default −1), so
// every other dimension but the batch must be 1. A softmax over some other
// axis (attention over positions, a per-position softmax of an [N,C,K]
// output) is not the classifier's. The error says, for a person, why there
// is none.
func (m *Model) ClassSoftmax(output string) (ClassSoftmax, error) {
	g := m.g
	if g == nil {
		return ClassSoftmax{}, fmt.Errorf("the model has no graph")
	}
	name := output
	for steps := 0; ; steps++ {
		p, ok := g.producer[name]
		if !ok || steps > len(g.nodes) {
			return ClassSoftmax{}, fmt.Errorf("output %q is not computed by a Softmax node", output)
		}
		n := g.nodes[p]
		op := n.GetOpType()
		if d := n.GetDomain(); d != "" && d != "ai.onnx" {
			return ClassSoftmax{}, fmt.Errorf("output %q is computed by %s.%s (node %q), not by a Softmax", output, d, op, g.names[p])
		}
		if slices.Contains(shapeOnly, op) && len(n.GetInput()) > 0 {
			name = n.GetInput()[0]
			continue
		}
		if op != "Softmax" && op != "LogSoftmax" {
			return ClassSoftmax{}, fmt.Errorf("output %q is computed by a %s node (%q), not by a Softmax", output, op, g.names[p])
		}
		if len(n.GetInput()) == 0 || n.GetInput()[0] == "" {
			return ClassSoftmax{}, fmt.Errorf("%s node %q has no input", op, g.names[p])
		}
		in := n.GetInput()[0]
		if err := m.classAxis(n, g.names[p], in); err != nil {
			return ClassSoftmax{}, err
		}
		return ClassSoftmax{Output: output, Node: g.names[p], Op: op, Logits: in}, nil
	}
}

// classAxis checks that the softmax node named node, reading the tensor in,
// normalises over the class axis (see ClassSoftmax).
func (m *Model) classAxis(n *onnxpb.NodeProto, node, in string) error {
	g := m.g
	op := n.GetOpType()
	var shape Shape
	if t := g.info[in]; t != nil {
		shape = t.shape
	}
	if shape == nil {
		return fmt.Errorf("%s node %q: the shape of its input %q is unknown, so its axis cannot be checked against the classes", op, node, in)
	}
	r := int64(len(shape))
	legacy := m.opset() < 13
	def := int64(-1)
	if legacy {
		def = 1
	}
	axis := attrInt(n, "axis", def)
	if axis < 0 {
		axis += r
	}
	if axis < 0 || axis >= r {
		return fmt.Errorf("%s node %q: axis %d is outside the rank %d of its input", op, node, attrInt(n, "axis", def), r)
	}
	if axis == 0 {
		return fmt.Errorf("%s node %q normalises over axis 0, the batch, not over the classes of one image", op, node)
	}
	for i := int64(1); i < r; i++ {
		inside := i == axis || (legacy && i > axis)
		if inside {
			continue
		}
		if d := shape[i]; d.Size != 1 {
			what := "unknown"
			if d.Known() {
				what = fmt.Sprint(d.Size)
			}
			return fmt.Errorf("%s node %q normalises over axis %d of its %s input %q, not over all the values of an image (dimension %d is %s): it is not the classifier's softmax", op, node, axis, shape, in, i, what)
		}
	}
	return nil
}
