package refconv

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"google.golang.org/protobuf/proto"

	"fovea/modelio/onnxpb"
)

// ConformanceRoot is where Debian's libonnx-testdata package puts the ONNX
// backend test data: one folder per case with model.onnx and
// test_data_set_*/{input,output}_*.pb.
const ConformanceRoot = "/usr/share/libonnx-testdata/data"

// ConformanceOps are the operators whose conformance cases the tests run:
// those an image classifier is mostly made of.
var ConformanceOps = map[string]bool{
	"Conv": true, "MaxPool": true, "AveragePool": true, "GlobalAveragePool": true,
	"Gemm": true, "Relu": true, "Softmax": true, "BatchNormalization": true,
}

// Named is a tensor with the graph name it feeds or comes from.
type Named struct {
	Name string
	Tensor
}

// Case is one ONNX backend test case.
type Case struct {
	Dir   string
	Model *onnxpb.ModelProto
	Opset int64 // ai.onnx opset
	Sets  []Set
}

// Set is one test_data_set_N: the inputs to feed and the expected outputs.
type Set struct {
	Inputs, Outputs []Named
}

// Skipped is a case in scope by operator that a test does not run, and why.
type Skipped struct {
	Dir, Reason string
}

// ConformanceCases lists the cases under root/node and
// root/pytorch-converted whose every node is one of ConformanceOps, loads the
// float32 ones and reports the others as skipped with the reason. A missing
// root is an error (the tests must fail, not pass empty).
func ConformanceCases(root string) ([]*Case, []Skipped, error) {
	var cases []*Case
	var skipped []Skipped
	n := 0
	for _, sub := range []string{"node", "pytorch-converted"} {
		dirs, err := os.ReadDir(filepath.Join(root, sub))
		if err != nil {
			return nil, nil, fmt.Errorf("ONNX conformance data missing (Debian package libonnx-testdata): %w", err)
		}
		for _, d := range dirs {
			dir := filepath.Join(root, sub, d.Name())
			m, err := readModel(filepath.Join(dir, "model.onnx"))
			if err != nil {
				continue // not a case folder
			}
			if !inScope(m) {
				continue
			}
			n++
			c, reason, err := loadCase(dir, m)
			if err != nil {
				return nil, nil, err
			}
			if reason != "" {
				skipped = append(skipped, Skipped{Dir: filepath.Join(sub, d.Name()), Reason: reason})
				continue
			}
			cases = append(cases, c)
		}
	}
	if n == 0 {
		return nil, nil, fmt.Errorf("no conformance cases for %v under %s", keys(ConformanceOps), root)
	}
	return cases, skipped, nil
}

func keys(m map[string]bool) []string {
	var k []string
	for s := range m {
		k = append(k, s)
	}
	sort.Strings(k)
	return k
}

func readModel(p string) (*onnxpb.ModelProto, error) {
	b, err := os.ReadFile(p)
	if err != nil {
		return nil, err
	}
	m := &onnxpb.ModelProto{}
	if err := proto.Unmarshal(b, m); err != nil {
		return nil, fmt.Errorf("%s: %w", p, err)
	}
	return m, nil
}

func inScope(m *onnxpb.ModelProto) bool {
	nodes := m.GetGraph().GetNode()
	if len(nodes) == 0 {
		return false
	}
	for _, n := range nodes {
		if !ConformanceOps[n.GetOpType()] || (n.GetDomain() != "" && n.GetDomain() != "ai.onnx") {
			return false
		}
	}
	return true
}

// loadCase reads the data sets; reason is non-empty when the case is out of
// the float32, inference-only scope.
func loadCase(dir string, m *onnxpb.ModelProto) (*Case, string, error) {
	c := &Case{Dir: dir, Model: m}
	for _, o := range m.GetOpsetImport() {
		if o.GetDomain() == "" || o.GetDomain() == "ai.onnx" {
			c.Opset = o.GetVersion()
		}
	}
	for _, n := range m.GetGraph().GetNode() {
		for _, a := range n.GetAttribute() {
			if a.GetName() == "training_mode" && a.GetI() != 0 {
				return nil, "BatchNormalization with training_mode=1: training, not inference", nil
			}
		}
	}
	init := map[string]bool{}
	for _, t := range m.GetGraph().GetInitializer() {
		init[t.GetName()] = true
	}
	var inNames, outNames []string
	for _, v := range m.GetGraph().GetInput() {
		if !init[v.GetName()] {
			inNames = append(inNames, v.GetName())
		}
	}
	for _, v := range m.GetGraph().GetOutput() {
		outNames = append(outNames, v.GetName())
	}
	for _, v := range append(m.GetGraph().GetInput(), m.GetGraph().GetOutput()...) {
		if tt := v.GetType().GetTensorType(); tt != nil && tt.GetElemType() != int32(onnxpb.TensorProto_FLOAT) {
			return nil, fmt.Sprintf("%s %q is %s, not float32", role(m, v.GetName()), v.GetName(), onnxpb.TensorProto_DataType(tt.GetElemType())), nil
		}
	}
	sets, _ := filepath.Glob(filepath.Join(dir, "test_data_set_*"))
	sort.Strings(sets)
	if len(sets) == 0 {
		return nil, "", fmt.Errorf("%s: no test_data_set_*", dir)
	}
	for _, sd := range sets {
		var s Set
		for _, kind := range []string{"input", "output"} {
			names := inNames
			if kind == "output" {
				names = outNames
			}
			for i := 0; ; i++ {
				p := filepath.Join(sd, fmt.Sprintf("%s_%d.pb", kind, i))
				b, err := os.ReadFile(p)
				if os.IsNotExist(err) {
					break
				}
				if err != nil {
					return nil, "", err
				}
				tp := &onnxpb.TensorProto{}
				if err := proto.Unmarshal(b, tp); err != nil {
					return nil, "", fmt.Errorf("%s: %w", p, err)
				}
				t, err := FromProto(tp)
				if err != nil {
					return nil, "", fmt.Errorf("%s: %w", p, err)
				}
				name := tp.GetName()
				if name == "" && i < len(names) {
					name = names[i]
				}
				nt := Named{Name: name, Tensor: t}
				if kind == "input" {
					s.Inputs = append(s.Inputs, nt)
				} else {
					s.Outputs = append(s.Outputs, nt)
				}
			}
		}
		if len(s.Inputs) != len(inNames) || len(s.Outputs) != len(outNames) {
			return nil, "", fmt.Errorf("%s: %d inputs and %d outputs on disk for a graph with %d and %d", sd, len(s.Inputs), len(s.Outputs), len(inNames), len(outNames))
		}
		c.Sets = append(c.Sets, s)
	}
	return c, "", nil
}

func role(m *onnxpb.ModelProto, name string) string {
	for _, v := range m.GetGraph().GetOutput() {
		if v.GetName() == name {
			return "output"
		}
	}
	return "input"
}

// Run evaluates the case's graph on one data set with this package's
// operators, node by node in file order (the test graphs are sorted), and
// returns every graph output in graph order.
func (c *Case) Run(s Set) ([]Named, error) {
	vals := map[string]Tensor{}
	for _, t := range c.Model.GetGraph().GetInitializer() {
		v, err := FromProto(t)
		if err != nil {
			return nil, err
		}
		vals[t.GetName()] = v
	}
	for _, in := range s.Inputs {
		vals[in.Name] = in.Tensor
	}
	for _, n := range c.Model.GetGraph().GetNode() {
		var in []Tensor
		for _, name := range n.GetInput() {
			v, ok := vals[name]
			if name != "" && !ok {
				return nil, fmt.Errorf("%s: node %q: input %q not computed", c.Dir, n.GetName(), name)
			}
			in = append(in, v)
		}
		out, err := Eval(n, c.Opset, in)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", c.Dir, err)
		}
		for i, t := range out {
			vals[n.GetOutput()[i]] = t
		}
	}
	var outs []Named
	for _, o := range c.Model.GetGraph().GetOutput() {
		outs = append(outs, Named{Name: o.GetName(), Tensor: vals[o.GetName()]})
	}
	return outs, nil
}

// Name is the case's folder relative to the data root, e.g. "node/test_relu".
func (c *Case) Name() string {
	parts := strings.Split(filepath.ToSlash(c.Dir), "/")
	if len(parts) < 2 {
		return c.Dir
	}
	return strings.Join(parts[len(parts)-2:], "/")
}

// Close reports whether got is within the ONNX backend tests' tolerance of
// want (onnx/backend/test/runner: numpy.testing.assert_allclose with
// rtol=1e-3, atol=1e-7): |got-want| <= atol + rtol*|want| for every element.
// It returns the first element that is not, or -1.
func Close(got, want []float32, rtol, atol float64) int {
	if len(got) != len(want) {
		return 0
	}
	for i := range got {
		g, w := float64(got[i]), float64(want[i])
		if math.IsNaN(w) && math.IsNaN(g) {
			continue
		}
		if !(math.Abs(g-w) <= atol+rtol*math.Abs(w)) {
			return i
		}
	}
	return -1
}
