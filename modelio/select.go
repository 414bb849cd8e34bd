package modelio

import "slices"

// The layer selectors: which tensors of a model are worth capturing for
// which purpose, and the graph questions behind them (which node computes a
// tensor, which convolution feeds an activation). Every package that
// chooses tensors to capture asks here, so the rules live in one place.
//
//	ActivationLayers  every feature map (a Conv's output before its normalisation too)
//	MapLayers         the maps each layer hands on (the Relu after Conv → BatchNormalization)
//	ReluLayers        the ReLU-like activations, whose channels "fire" where they are > 0
//	OutputsOf         the tensor names of a selection, for a session's capture list

// ActivationLayers returns the layers whose outputs are activation maps
// worth capturing: rank-4 outputs (one map per channel) of convolutions,
// activations, pooling, normalisation and merges, with more than one value
// per map (or a size still unknown). Layout-only ops (Identity, Dropout,
// Transpose, Reshape, Pad, Cast) are left out, and so is the input
// normalisation before the first convolution (receptive field 1).
func (m *Model) ActivationLayers() []Layer {
	var out []Layer
	for _, l := range m.Layers {
		switch l.Op {
		case "Identity", "Dropout", "Transpose", "Reshape", "Pad", "Cast", "Flatten", "Squeeze", "Unsqueeze",
			"Shape", "Gather", "Slice", "Split", "Constant", "Softmax", "LogSoftmax", "QuantizeLinear", "DequantizeLinear":
			continue
		}
		if l.ShapeSource == SourceUnknown {
			if l.Shape != nil && len(l.Shape) != 4 {
				continue
			}
			out = append(out, l)
			continue
		}
		if len(l.Shape) != 4 {
			continue
		}
		if t := m.g.info[l.Output]; t != nil && t.elem != 0 && !elemTypes[t.elem].float {
			continue
		}
		if l.Width == 1 && l.Height == 1 {
			continue
		}
		if l.RF == 1 && l.Jump == 1 {
			continue // before the first spatial layer: the image rescaled, not a feature map
		}
		out = append(out, l)
	}
	return out
}

// continuesMap are elementwise steps that carry a feature map on to the same
// shape: the normalisation, the activation and the residual sum after a
// convolution. A tensor whose one reader is such a step is an inner stage of
// the layer, not the map the layer hands on.
var continuesMap = map[string]bool{
	"BatchNormalization": true, "InstanceNormalization": true,
	"Relu": true, "LeakyRelu": true, "PRelu": true, "Clip": true, "Elu": true, "Selu": true, "Celu": true,
	"ThresholdedRelu": true, "Sigmoid": true, "HardSigmoid": true, "HardSwish": true, "Tanh": true,
	"Softplus": true, "Softsign": true, "Gelu": true, "Mish": true,
	"Add": true, "Sub": true, "Mul": true, "Div": true, "Sum": true,
}

// MapLayers returns the activation layers (ActivationLayers) whose output is
// the map the layer hands on: it leaves out a layer whose output is read
// only by a following normalisation, activation or residual sum of the same
// shape, whose result is that layer's map. For Conv → BatchNormalization →
// Relu → MaxPool it keeps Relu and MaxPool. Those are the maps a user reads
// as "what the layer responds to", and capturing only them keeps the
// runtime's merged steps (CaptureEffect): a run returning them costs little
// more than a plain one.
func (m *Model) MapLayers() []Layer {
	var out []Layer
	for _, l := range m.ActivationLayers() {
		if next, ok := m.soleReader(l.Output); ok && continuesMap[m.g.nodes[next].GetOpType()] {
			var a, b Shape
			if t := m.g.info[l.Output]; t != nil {
				a = t.shape
			}
			if outs := m.g.nodes[next].GetOutput(); len(outs) > 0 {
				if t := m.g.info[outs[0]]; t != nil {
					b = t.shape
				}
			}
			if !shapesDiffer(a, b) {
				continue // an inner stage of the layer
			}
		}
		out = append(out, l)
	}
	return out
}

// shapesDiffer reports whether two shapes are known to differ: ranks, or a
// dimension both know. Unknown parts are taken to agree.
func shapesDiffer(a, b Shape) bool {
	if a == nil || b == nil {
		return false
	}
	if len(a) != len(b) {
		return true
	}
	for i := range a {
		if a[i].Known() && b[i].Known() && a[i].Size != b[i].Size {
			return true
		}
	}
	return false
}

// reluLike are the activation ops whose output is > 0 exactly where their
// input is > 0, so "fires" (any value > 0) means the same for all of them
// and a channel that never fires passes no signal (or, for the leaky kinds,
// only the negative slope; PRelu with a non-negative slope). Clip is assumed
// to be the ReLU6 kind (min 0); a Clip with a negative minimum would count
// values in (min, 0] as not firing, which is what "fires" means anyway.
// ThresholdedRelu fires above its threshold.
var reluLike = map[string]bool{
	"Relu": true, "LeakyRelu": true, "PRelu": true, "Clip": true, "ThresholdedRelu": true,
	"Elu": true, "Celu": true, "Selu": true, "Gelu": true, "HardSwish": true,
}

// ReluLayers returns the layers whose op is ReLU-like (Relu, LeakyRelu,
// PRelu, Clip, ThresholdedRelu, Elu, Celu, Selu, Gelu, HardSwish), in
// execution order: the layers a dead-filter scan looks at. Their channel
// axis is 1, ONNX's convention for every operator after a Conv; a ReLU after
// a Gemm has one value per feature, and each feature counts as a channel.
func (m *Model) ReluLayers() []Layer {
	var out []Layer
	for _, l := range m.Layers {
		if reluLike[l.Op] {
			out = append(out, l)
		}
	}
	return out
}

// OutputsOf names the output tensors of layers, each once, in their order:
// the value for a session's capture list (infer.Options.Capture).
// OutputsOf(m.MapLayers()) is the cheap capture of every activation map:
// those tensors exist in a plain run anyway. OutputsOf(m.ActivationLayers())
// adds the inner stages (a Conv's output before its normalisation and
// activation); capturing them costs the runtime's merged steps, and for
// some models a second run for exact outputs (CaptureEffect): worth it for
// one image, not for a folder.
func OutputsOf(layers []Layer) []string {
	var names []string
	for _, l := range layers {
		if l.Output != "" && !slices.Contains(names, l.Output) {
			names = append(names, l.Output)
		}
	}
	return names
}

// LayerOf returns the index in m.Layers of the layer whose node computes
// tensor, or -1 for a graph input, an initializer, an unknown name or a
// node the layer table leaves out.
func (m *Model) LayerOf(tensor string) int {
	p, ok := m.g.producer[tensor]
	if !ok || tensor == "" {
		return -1
	}
	outs := m.g.nodes[p].GetOutput()
	if len(outs) == 0 {
		return -1
	}
	return slices.IndexFunc(m.Layers, func(l Layer) bool { return l.Output == outs[0] })
}

// FeedingConv returns the index in m.Layers of the Conv whose output
// reaches layer i through at most one BatchNormalization (Conv → Relu or
// Conv → BatchNormalization → Relu, following the node's first input, the
// data input of every activation), or -1 when no Conv feeds it so.
func (m *Model) FeedingConv(i int) int {
	l := m.Layers[i]
	for hop := 0; hop < 2 && len(l.Inputs) > 0; hop++ {
		j := m.LayerOf(l.Inputs[0])
		if j < 0 {
			return -1
		}
		switch m.Layers[j].Op {
		case "Conv":
			return j
		case "BatchNormalization":
			l = m.Layers[j]
			continue
		}
		return -1
	}
	return -1
}
