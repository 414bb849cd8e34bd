package modelio

import (
	"container/heap"
	"strconv"

	"fovea/modelio/onnxpb"
)

// graph is the analysed main graph of a model.
type graph struct {
	nodes       []*onnxpb.NodeProto
	names       []string // display name per node: its name, or Op_index
	order       []int    // node indices in execution order
	producer    map[string]int
	consumers   map[string][]int
	inits       map[string]*onnxpb.TensorProto
	consts      map[string]*onnxpb.TensorProto // outputs of Constant nodes with a tensor value
	inputs      map[string]*onnxpb.ValueInfoProto
	declared    map[string]*onnxpb.ValueInfoProto // value_info and graph outputs
	weightInput map[string]bool
	info        map[string]*tinfo
	observed    map[string][]int64
}

// newGraph indexes the main graph and checks the rules every later step
// relies on: each tensor has one source, every node input has a source,
// initializer data matches its dims, and the nodes form no cycle.
func (m *Model) newGraph() (*graph, error) {
	gp := m.pb.GetGraph()
	g := &graph{
		nodes:       gp.GetNode(),
		producer:    map[string]int{},
		consumers:   map[string][]int{},
		inits:       map[string]*onnxpb.TensorProto{},
		consts:      map[string]*onnxpb.TensorProto{},
		inputs:      map[string]*onnxpb.ValueInfoProto{},
		declared:    map[string]*onnxpb.ValueInfoProto{},
		weightInput: map[string]bool{},
		info:        map[string]*tinfo{},
	}
	if len(g.nodes) == 0 {
		return nil, m.errf(KindInvalid, "the graph has no nodes")
	}
	for _, t := range gp.GetInitializer() {
		name := t.GetName()
		what := "initializer " + quote(name)
		if name == "" {
			return nil, m.errf(KindInvalid, "an initializer has no name")
		}
		if _, dup := g.inits[name]; dup {
			return nil, m.errf(KindInvalid, "%s appears twice", what)
		}
		if _, err := m.checkTensor(what, t); err != nil {
			return nil, err
		}
		g.inits[name] = t
	}
	for _, vi := range gp.GetInput() {
		name := vi.GetName()
		if _, isInit := g.inits[name]; isInit {
			continue
		}
		if _, dup := g.inputs[name]; dup {
			return nil, m.errf(KindInvalid, "input %q is declared twice", name)
		}
		g.inputs[name] = vi
	}
	for _, vi := range gp.GetValueInfo() {
		g.declared[vi.GetName()] = vi
	}
	for _, vi := range gp.GetOutput() {
		g.declared[vi.GetName()] = vi
	}
	g.names = make([]string, len(g.nodes))
	for i, n := range g.nodes {
		if n == nil {
			return nil, m.errf(KindInvalid, "node %d is empty", i)
		}
		g.names[i] = n.GetName()
		if g.names[i] == "" {
			g.names[i] = n.GetOpType() + "_" + strconv.Itoa(i)
		}
		for _, out := range n.GetOutput() {
			if out == "" {
				continue
			}
			if j, dup := g.producer[out]; dup {
				return nil, m.errf(KindInvalid, "tensor %q is produced by two nodes, %q and %q", out, g.names[j], g.names[i])
			}
			if _, ok := g.inits[out]; ok {
				return nil, m.errf(KindInvalid, "node %q (%s) writes %q, which is an initializer", g.names[i], n.GetOpType(), out)
			}
			if _, ok := g.inputs[out]; ok {
				return nil, m.errf(KindInvalid, "node %q (%s) writes %q, which is a graph input", g.names[i], n.GetOpType(), out)
			}
			g.producer[out] = i
		}
		if n.GetOpType() == "Constant" && n.GetDomain() == "" {
			for _, a := range n.GetAttribute() {
				if a.GetName() == "value" && a.GetT() != nil && len(n.GetOutput()) > 0 {
					what := "node " + quote(g.names[i]) + " (Constant) value"
					if _, err := m.checkTensor(what, a.GetT()); err != nil {
						return nil, err
					}
					g.consts[n.GetOutput()[0]] = a.GetT()
				}
			}
		}
	}
	for i, n := range g.nodes {
		for _, in := range n.GetInput() {
			if in == "" {
				continue // an omitted optional input
			}
			if !g.has(in) {
				return nil, m.errf(KindInvalid, "node %q (%s) reads %q, which no node, input or initializer provides", g.names[i], n.GetOpType(), in)
			}
			if c := g.consumers[in]; len(c) == 0 || c[len(c)-1] != i {
				g.consumers[in] = append(c, i)
			}
		}
	}
	for _, vi := range gp.GetOutput() {
		if !g.has(vi.GetName()) {
			return nil, m.errf(KindInvalid, "graph output %q is not computed by any node", vi.GetName())
		}
	}
	if err := m.sortGraph(g); err != nil {
		return nil, err
	}
	g.findWeightInputs()
	return g, nil
}

func (g *graph) has(name string) bool {
	if _, ok := g.producer[name]; ok {
		return true
	}
	if _, ok := g.inits[name]; ok {
		return true
	}
	_, ok := g.inputs[name]
	return ok
}

// intHeap is a min-heap of node indices, so the execution order follows
// the file's order wherever the dependencies allow.
type intHeap []int

func (h intHeap) Len() int           { return len(h) }
func (h intHeap) Less(i, j int) bool { return h[i] < h[j] }
func (h intHeap) Swap(i, j int)      { h[i], h[j] = h[j], h[i] }
func (h *intHeap) Push(x any)        { *h = append(*h, x.(int)) }
func (h *intHeap) Pop() any {
	old := *h
	x := old[len(old)-1]
	*h = old[:len(old)-1]
	return x
}

// sortGraph orders the nodes topologically (Kahn's algorithm, no
// recursion) and reports a cycle naming one node on it.
func (m *Model) sortGraph(g *graph) error {
	indeg := make([]int, len(g.nodes))
	for i, n := range g.nodes {
		seen := map[int]bool{}
		for _, in := range n.GetInput() {
			if p, ok := g.producer[in]; ok && in != "" && !seen[p] {
				seen[p] = true
				indeg[i]++
			}
		}
	}
	h := &intHeap{}
	for i, d := range indeg {
		if d == 0 {
			*h = append(*h, i)
		}
	}
	heap.Init(h)
	g.order = make([]int, 0, len(g.nodes))
	for h.Len() > 0 {
		i := heap.Pop(h).(int)
		g.order = append(g.order, i)
		done := map[int]bool{}
		for _, out := range g.nodes[i].GetOutput() {
			if out == "" {
				continue
			}
			for _, c := range g.consumers[out] {
				if done[c] {
					continue
				}
				done[c] = true
				indeg[c]--
				if indeg[c] == 0 {
					heap.Push(h, c)
				}
			}
		}
	}
	if len(g.order) < len(g.nodes) {
		for i, d := range indeg {
			if d > 0 {
				return m.errf(KindInvalid, "the graph has a cycle: node %q (%s) depends on its own output; %d of %d nodes cannot be ordered", g.names[i], g.nodes[i].GetOpType(), len(g.nodes)-len(g.order), len(g.nodes))
			}
		}
	}
	return nil
}

// weightSlot reports whether input idx of op is a weight position (a
// parameter tensor rather than data flowing through the network).
func weightSlot(op string, idx int) bool {
	switch op {
	case "Conv", "ConvTranspose", "Gemm", "BatchNormalization", "InstanceNormalization", "LayerNormalization", "GroupNormalization":
		return idx >= 1
	case "PRelu", "MatMul":
		return idx == 1
	}
	return false
}

// findWeightInputs marks graph inputs that feed only weight positions: the
// weights of architecture-only models.
func (g *graph) findWeightInputs() {
	for name, vi := range g.inputs {
		tt := vi.GetType().GetTensorType()
		if tt == nil || !elemTypes[tt.GetElemType()].float {
			continue
		}
		cons := g.consumers[name]
		if len(cons) == 0 {
			continue
		}
		all := true
		for _, c := range cons {
			n := g.nodes[c]
			for k, in := range n.GetInput() {
				if in == name && (n.GetDomain() != "" || !weightSlot(n.GetOpType(), k)) {
					all = false
				}
			}
		}
		if all {
			g.weightInput[name] = true
		}
	}
}

// constTensor returns the initializer or Constant-node tensor named name,
// following Identity nodes (exporters put them on shared weights) and
// Casts to float32 or float64 (models stored in float16 or bfloat16 to
// halve their size cast each weight to float at run time). Callers read
// the result as float32 (Model.floats converts from the stored type), which
// is what such a Cast computes; a Cast to a narrower type would round, so it
// is not followed.
func (g *graph) constTensor(name string) *onnxpb.TensorProto {
	for range 16 {
		if t, ok := g.inits[name]; ok {
			return t
		}
		if t, ok := g.consts[name]; ok {
			return t
		}
		p, ok := g.producer[name]
		if !ok || g.nodes[p].GetDomain() != "" || len(g.nodes[p].GetInput()) != 1 {
			return nil
		}
		switch n := g.nodes[p]; n.GetOpType() {
		case "Identity":
		case "Cast":
			if to := attrInt(n, "to", 0); to != 1 && to != 11 { // FLOAT, DOUBLE
				return nil
			}
		default:
			return nil
		}
		name = g.nodes[p].GetInput()[0]
	}
	return nil
}
