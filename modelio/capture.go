package modelio

// What capturing an intermediate tensor as an extra graph output does to a
// run. ONNX Runtime's graph optimisations merge a node into its producer
// when the producer's output has that one consumer and is not a graph
// output: Conv with a following BatchNormalization (the normalisation is
// folded into the weights), Conv or MatMul with a following Add of a
// constant, Conv or Gemm with a following activation, and on x86 the whole
// Conv [+ Add] [+ Relu] chain in its blocked "NCHWc" layout. Making the
// inner tensor a graph output stops the merge. For some merges that only
// costs time (the activation is applied to the same numbers either way);
// for others the unmerged graph rounds differently and the model's own
// outputs move in their last bits (measured: a ResNet-18-sized network
// with every Conv output captured changed 1,756 of its 2,000 logits by up to
// 4e-5). The kinds below let a caller capture what it needs and still
// return the model's outputs exactly as a plain run computes them.
type CaptureEffect int

const (
	// CaptureFree: the runtime materialises the tensor anyway (a graph
	// input or output, or read by several nodes), so returning it costs
	// only the copy.
	CaptureFree CaptureEffect = iota
	// CaptureSlows: the tensor is the input of a following step the
	// runtime may merge with its producer without changing any value
	// (Relu, LeakyRelu and Clip after a Conv or Gemm; the blocked-layout
	// chain). Capturing it keeps the outputs bit for bit but costs the
	// merge.
	CaptureSlows
	// CaptureShifts: capturing the tensor may stop a merge that rounds
	// differently (BatchNormalization or arithmetic with a constant
	// folded into the producer, anything not known to be harmless), so the
	// model's own outputs of the rewritten graph may differ in their last
	// bits from a plain run's.
	CaptureShifts
)

// neutralNext are consumers after which no merge changes values, whatever
// the producer: the pooling, reshaping and linear operators ONNX Runtime
// does not fold into the node before them (common practice of its CPU
// optimiser, from its transformer list as remembered, and checked for the
// Conv, Relu, MaxPool and Gemm cases by infer's TestCaptureKeepsOutputs
// against real runs). MatMul and Gemm are excluded when the producer is a
// Mul or Div (a scale the runtime folds into the product).
var neutralNext = map[string]bool{
	"MaxPool": true, "AveragePool": true, "GlobalAveragePool": true, "GlobalMaxPool": true, "LpPool": true,
	"Flatten": true, "Reshape": true, "Squeeze": true, "Unsqueeze": true, "Identity": true, "Dropout": true,
	"Conv": true, "ConvTranspose": true, "Gemm": true, "MatMul": true, "Concat": true, "Softmax": true,
	"LogSoftmax": true, "LRN": true, "Resize": true, "Upsample": true, "Shape": true, "Split": true, "Slice": true,
}

// sameValueActs are activations a merged Conv or Gemm applies to the same
// numbers the separate operator would see: merging them saves time only.
var sameValueActs = map[string]bool{"Relu": true, "LeakyRelu": true, "Clip": true}

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

// CaptureEffect says what returning the tensor name besides the model's
// outputs does to a run (see the type). Unknown names count as free: the
// rewrite refuses them anyway.
func (m *Model) CaptureEffect(name string) CaptureEffect {
	g := m.g
	next, ok := m.soleReader(name)
	if !ok {
		return CaptureFree
	}
	op := g.nodes[next].GetOpType()
	prod := ""
	if p, ok := g.producer[name]; ok {
		prod = g.nodes[p].GetOpType()
	}
	switch {
	case neutralNext[op] && !((op == "MatMul" || op == "Gemm") && (prod == "Mul" || prod == "Div")):
		return CaptureFree
	case sameValueActs[op]:
		return CaptureSlows
	}
	return CaptureShifts
}

// soleReader returns the index of the one node reading the tensor, when it
// is computed by a node, read by exactly one node and not a graph output.
func (m *Model) soleReader(name string) (int, bool) {
	g := m.g
	if _, ok := g.producer[name]; !ok {
		return 0, false
	}
	for _, o := range m.pb.GetGraph().GetOutput() {
		if o.GetName() == name {
			return 0, false
		}
	}
	c := g.consumers[name]
	if len(c) != 1 {
		return 0, false
	}
	return c[0], true
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
