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
