package infer

import (
	"context"
	"errors"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"google.golang.org/protobuf/proto"

	"fovea/modelio"
	"fovea/modelio/internal/refconv"
	"fovea/modelio/onnxpb"
)

// images returns n pseudo-random images for tinyCNN.
func images(n int) []float32 { return randn(99, n*3*16*16, 1) }

// The rewrite that adds activation maps as graph outputs must not change the
// model's own outputs: compared bit for bit, on a batch, with and
// without every intermediate tensor captured.
func TestRewriteKeepsOutputs(t *testing.T) {
	for _, softmax := range []bool{false, true} {
		m := openTiny(t, 0, softmax)
		plain := newSession(t, m, Options{})
		capt := newSession(t, m, Options{Capture: tinyOutputs})
		x := images(5)
		a, err := plain.Run(context.Background(), x, 5)
		if err != nil {
			t.Fatal(err)
		}
		b, err := capt.Run(context.Background(), x, 5)
		if err != nil {
			t.Fatal(err)
		}
		if len(a.Outputs) != 1 || len(b.Outputs) != 1 {
			t.Fatalf("outputs: %d plain, %d with captures; want 1 each", len(a.Outputs), len(b.Outputs))
		}
		if !slices.Equal(a.Outputs[0].Shape, b.Outputs[0].Shape) || !bitsEqual(a.Outputs[0].Data, b.Outputs[0].Data) {
			t.Errorf("softmax=%v: model output differs with the rewrite:\n plain %v\n capt  %v", softmax, a.Outputs[0].Data[:5], b.Outputs[0].Data[:5])
		}
		if len(a.Maps) != 0 || len(b.Maps) != len(tinyOutputs) {
			t.Errorf("maps: %d plain, %d captured; want 0 and %d", len(a.Maps), len(b.Maps), len(tinyOutputs))
		}
		// shapes of the maps, batch first (by hand from the graph: 16×16
		// convolved with padding 1 stays 16×16, each pooling halves it)
		want := map[string][]int64{"c1": {5, 8, 16, 16}, "r1": {5, 8, 16, 16}, "p1": {5, 8, 8, 8}, "c2": {5, 16, 8, 8},
			"r2": {5, 16, 8, 8}, "p2": {5, 16, 4, 4}, "f": {5, 256}}
		for name, sh := range want {
			if got := b.Maps[name].Shape; !slices.Equal(got, sh) {
				t.Errorf("map %s: shape %v, want %v", name, got, sh)
			}
		}
	}
}

func bitsEqual(a, b []float32) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float32bits(a[i]) != math.Float32bits(b[i]) {
			return false
		}
	}
	return true
}

// Every intermediate activation ONNX Runtime returns is reproduced by the
// direct reference (package refconv, Operators.md formulas) from the
// runtime's own input to that node, to 1e-4 (|a-b| <= 1e-4·max(1,|b|);
// float32 sums of a few hundred products differ from float64 ones by about
// 1e-6). Also end to end: the reference chained from the image gives the
// same logits.
func TestActivationsMatchReference(t *testing.T) {
	m := openTiny(t, 0, true)
	s := newSession(t, m, Options{Capture: append([]string{"logits"}, tinyOutputs...), Batch: 2})
	x := images(3)
	r, err := s.Run(context.Background(), x, 3)
	if err != nil {
		t.Fatal(err)
	}
	g := tinyCNN(0, true)
	got := map[string]refconv.Tensor{"image": {Shape: []int64{3, 3, 16, 16}, Data: x}}
	for name, tt := range r.Maps {
		got[name] = refconv.Tensor{Shape: tt.Shape, Data: tt.Data}
	}
	got["probs"] = refconv.Tensor{Shape: r.Outputs[0].Shape, Data: r.Outputs[0].Data}
	compared := checkLayers(t, "tiny.onnx", g, 13, got)
	if compared != len(g.Node) {
		t.Errorf("compared %d of %d nodes", compared, len(g.Node))
	}
	// chained from the image alone
	chain := map[string]refconv.Tensor{"image": got["image"]}
	for _, n := range g.Node {
		out, err := evalNode(g, n, 13, chain)
		if err != nil {
			t.Fatal(err)
		}
		chain[n.GetOutput()[0]] = out
	}
	if i := closeTo(chain["probs"].Data, r.Outputs[0].Data, 1e-4); i >= 0 {
		t.Errorf("chained reference probs[%d] = %v, runtime %v", i, chain["probs"].Data[i], r.Outputs[0].Data[i])
	}
}

// checkLayers recomputes every node of g with refconv from the tensors in
// vals (runtime captures by name) and compares with the runtime's output. It
// returns how many nodes it compared.
func checkLayers(t *testing.T, file string, g *onnxpb.GraphProto, opset int64, vals map[string]refconv.Tensor) int {
	t.Helper()
	n := 0
	for _, nd := range g.GetNode() {
		out := nd.GetOutput()[0]
		want, ok := vals[out]
		if !ok {
			continue
		}
		ref, err := evalNode(g, nd, opset, vals)
		if errors.Is(err, refconv.ErrUnsupported) {
			continue
		}
		if err != nil {
			t.Errorf("%s: node %q: %v", file, nd.GetName(), err)
			continue
		}
		if !slices.Equal(ref.Shape, want.Shape) {
			t.Errorf("%s: node %q (%s): runtime shape %v, reference %v", file, nd.GetName(), nd.GetOpType(), want.Shape, ref.Shape)
			continue
		}
		if i := closeTo(ref.Data, want.Data, 1e-4); i >= 0 {
			t.Errorf("%s: node %q (%s): element %d: runtime %v, reference %v", file, nd.GetName(), nd.GetOpType(), i, want.Data[i], ref.Data[i])
		}
		n++
	}
	return n
}

// evalNode runs one node with refconv, taking its inputs from vals or from
// the graph's initializers.
func evalNode(g *onnxpb.GraphProto, nd *onnxpb.NodeProto, opset int64, vals map[string]refconv.Tensor) (refconv.Tensor, error) {
	var in []refconv.Tensor
	for _, name := range nd.GetInput() {
		v, ok := vals[name]
		if !ok && name != "" {
			for _, ini := range g.GetInitializer() {
				if ini.GetName() == name {
					var err error
					if v, err = refconv.FromProto(ini); err != nil {
						return v, err
					}
					ok = true
				}
			}
			if !ok {
				return v, errors.New("input " + name + " not available")
			}
		}
		in = append(in, v)
	}
	out, err := refconv.Eval(nd, opset, in)
	if err != nil {
		return refconv.Tensor{}, err
	}
	return out[0], nil
}

// closeTo returns the first index where |a-b| > tol·max(1,|b|), or -1.
func closeTo(a, b []float32, tol float64) int {
	if len(a) != len(b) {
		return 0
	}
	for i := range a {
		if !(math.Abs(float64(a[i])-float64(b[i])) <= tol*math.Max(1, math.Abs(float64(b[i])))) {
			return i
		}
	}
	return -1
}

// Batching: a symbolic batch splits n images into chunks (here of 3, leaving
// a remainder of 1); a batch fixed at 1 loops; a batch fixed at 2 pads the
// last chunk. All give, per image, what a run of that image alone gives.
func TestBatchingMatchesSingleRuns(t *testing.T) {
	const n = 7
	x := images(n)
	single := newSession(t, openTiny(t, 0, false), Options{Batch: 1})
	var want []float32
	for i := range n {
		r, err := single.Run(context.Background(), x[i*768:(i+1)*768], 1)
		if err != nil {
			t.Fatal(err)
		}
		if !slices.Equal(r.Outputs[0].Shape, []int64{1, 5}) {
			t.Fatalf("single image: shape %v, want [1 5]", r.Outputs[0].Shape)
		}
		want = append(want, r.Outputs[0].Data...)
	}
	cases := []struct {
		name      string
		fixed     int
		opt       Options
		wantBatch int
	}{
		{"symbolic, chunks of 3", 0, Options{Batch: 3}, 3},
		{"symbolic, automatic chunks", 0, Options{}, 0},
		{"fixed at 1: loop", 1, Options{}, 1},
		{"fixed at 2: padded", 2, Options{}, 2},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s := newSession(t, openTiny(t, c.fixed, false), c.opt)
			if c.wantBatch > 0 && s.BatchSize() != c.wantBatch {
				t.Errorf("%s: BatchSize %d, want %d", c.name, s.BatchSize(), c.wantBatch)
			}
			for pass := range 2 { // the second pass writes into preallocated outputs
				r, err := s.Run(context.Background(), x, n)
				if err != nil {
					t.Fatalf("%s: %v", c.name, err)
				}
				if r.N != n || !slices.Equal(r.Outputs[0].Shape, []int64{n, 5}) {
					t.Fatalf("%s: N %d shape %v, want %d [%d 5]", c.name, r.N, r.Outputs[0].Shape, n, n)
				}
				// Different batch sizes may take different kernel paths; 1e-5
				// relative is float32 rounding of sums of ~1000 terms.
				if i := closeTo(r.Outputs[0].Data, want, 1e-5); i >= 0 {
					t.Errorf("%s pass %d: logit %d = %v, single run %v", c.name, pass, i, r.Outputs[0].Data[i], want[i])
				}
				for i := range n {
					if got := r.Scores(i); !slices.Equal(got, r.Outputs[0].Data[i*5:(i+1)*5]) {
						t.Errorf("%s: Scores(%d) = %v", c.name, i, got)
					}
				}
			}
		})
	}
}

// RunInto reuses the slices of a previous Result.
func TestRunIntoReuses(t *testing.T) {
	s := newSession(t, openTiny(t, 0, false), Options{Capture: []string{"r1"}, Batch: 4})
	x := images(4)
	r, err := s.Run(context.Background(), x, 4)
	if err != nil {
		t.Fatal(err)
	}
	first := slices.Clone(r.Maps["r1"].Data)
	p := &r.Maps["r1"].Data[0]
	x2 := images(5)[768:]
	r2, err := s.RunInto(context.Background(), x2, 4, r)
	if err != nil {
		t.Fatal(err)
	}
	if &r2.Maps["r1"].Data[0] != p {
		t.Error("RunInto allocated a new map instead of reusing the old one")
	}
	if slices.Equal(first, r2.Maps["r1"].Data) {
		t.Error("RunInto did not overwrite the map with the new images")
	}
}

// An output whose first dimension is not the batch (Flatten with axis 0
// folds the batch away) makes the session fall back to one image at a time,
// and the Result still has one row per image.
func TestOutputWithoutBatchDimension(t *testing.T) {
	g := &onnxpb.GraphProto{
		Name:   "fold",
		Input:  []*onnxpb.ValueInfoProto{vi("x", onnxpb.TensorProto_FLOAT, "N", 3)},
		Node:   []*onnxpb.NodeProto{node("Flatten", "fold", []string{"x"}, []string{"y"}, intAttr("axis", 0))},
		Output: []*onnxpb.ValueInfoProto{vi("y", onnxpb.TensorProto_FLOAT, 1, nil)},
	}
	s := newSession(t, writeModel(t, "fold.onnx", modelBytes(t, g, 13, nil)), Options{Batch: 4})
	x := []float32{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12}
	r, err := s.Run(context.Background(), x, 4)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(r.Outputs[0].Shape, []int64{4, 3}) || !slices.Equal(r.Outputs[0].Data, x) {
		t.Errorf("got %v %v, want [4 3] %v", r.Outputs[0].Shape, r.Outputs[0].Data, x)
	}
	if s.BatchSize() != 1 {
		t.Errorf("BatchSize %d after the fallback, want 1", s.BatchSize())
	}
}

// Input the Go side can check never reaches the runtime: wrong lengths, no
// images, non-float inputs, symbolic image sizes without Options.Dims.
func TestInputChecks(t *testing.T) {
	s := newSession(t, openTiny(t, 0, false), Options{})
	ctx := context.Background()
	for _, c := range []struct {
		n    int
		len  int
		want string
	}{
		{1, 10, "input has 10 values; 1 images of [3 16 16] need 768"},
		{2, 768, "need 1536"},
		{0, 0, "Run with 0 images"},
	} {
		_, err := s.Run(ctx, make([]float32, c.len), c.n)
		if err == nil || !strings.Contains(err.Error(), c.want) || !strings.HasPrefix(err.Error(), "infer: tiny.onnx: ") {
			t.Errorf("n=%d len=%d: got %v, want an error with %q", c.n, c.len, err, c.want)
		}
	}

	intIn := &onnxpb.GraphProto{
		Name:   "ints",
		Input:  []*onnxpb.ValueInfoProto{vi("x", onnxpb.TensorProto_INT64, "N", 4)},
		Node:   []*onnxpb.NodeProto{node("Cast", "c", []string{"x"}, []string{"y"}, intAttr("to", 1))},
		Output: []*onnxpb.ValueInfoProto{vi("y", onnxpb.TensorProto_FLOAT, "N", 4)},
	}
	needORT(t)
	_, err := NewSession(writeModel(t, "ints.onnx", modelBytes(t, intIn, 13, nil)), Options{})
	if err == nil || !strings.Contains(err.Error(), `infer: ints.onnx: input "x" is int64; only float32`) {
		t.Errorf("int64 input: got %v", err)
	}

	sym := tinyCNN(0, false)
	sym.Input[0] = vi("image", onnxpb.TensorProto_FLOAT, "N", 3, "H", "W")
	m := writeModel(t, "sym.onnx", modelBytes(t, sym, 13, nil))
	s2 := newSession(t, m, Options{})
	if _, err := s2.Run(ctx, make([]float32, 768), 1); err == nil || !strings.Contains(err.Error(), "Options.Dims") {
		t.Errorf("symbolic H, W without Dims: got %v", err)
	}
	s3 := newSession(t, m, Options{Dims: []int64{3, 16, 16}})
	if _, err := s3.Run(ctx, images(2), 2); err != nil {
		t.Errorf("symbolic H, W with Dims: %v", err)
	}
	if _, err := NewSession(m, Options{Dims: []int64{4, 16, 16}}); err == nil {
		// NewSession keeps the session usable for RunTensors; Run refuses.
	} else {
		t.Errorf("NewSession with contradicting Dims failed early: %v", err)
	}
	s4 := newSession(t, m, Options{Dims: []int64{4, 16, 16}})
	if _, err := s4.Run(ctx, make([]float32, 4*256), 1); err == nil || !strings.Contains(err.Error(), "disagrees") {
		t.Errorf("Dims contradicting the fixed channels: got %v", err)
	}
}

// Failures inside ONNX Runtime come back as *RuntimeError naming the node and
// operator: an operator nobody implements (at session creation) and a shape
// that only turns out wrong at run time (a Gemm fed 5 features for a 3×4
// weight matrix).
func TestRuntimeErrorsNameNode(t *testing.T) {
	needORT(t)
	bad := &onnxpb.GraphProto{
		Name:   "bad",
		Input:  []*onnxpb.ValueInfoProto{vi("x", onnxpb.TensorProto_FLOAT, "N", 4)},
		Node:   []*onnxpb.NodeProto{node("Relu", "ok", []string{"x"}, []string{"a"}), node("NoSuchOp", "mystery", []string{"a"}, []string{"y"})},
		Output: []*onnxpb.ValueInfoProto{vi("y", onnxpb.TensorProto_FLOAT, "N", 4)},
	}
	_, err := NewSession(writeModel(t, "bad.onnx", modelBytes(t, bad, 13, nil)), Options{})
	var re *RuntimeError
	if !errors.As(err, &re) || re.Node != "mystery" || re.Op != "NoSuchOp" || re.File != "bad.onnx" {
		t.Errorf("unknown op: got %#v (%v), want RuntimeError for node mystery (NoSuchOp) in bad.onnx", re, err)
	}

	gemm := &onnxpb.GraphProto{
		Name:        "gemm",
		Input:       []*onnxpb.ValueInfoProto{vi("x", onnxpb.TensorProto_FLOAT, "N", "K")},
		Initializer: []*onnxpb.TensorProto{f32("w", []int64{3, 4}, randn(7, 12, 1))},
		Node:        []*onnxpb.NodeProto{node("Gemm", "fc", []string{"x", "w"}, []string{"y"})},
		Output:      []*onnxpb.ValueInfoProto{vi("y", onnxpb.TensorProto_FLOAT, "N", 4)},
	}
	s := newSession(t, writeModel(t, "gemm.onnx", modelBytes(t, gemm, 13, nil)), Options{Dims: []int64{5}})
	_, err = s.Run(context.Background(), make([]float32, 5), 1)
	re = nil
	if !errors.As(err, &re) || re.Node != "fc" || re.Op != "Gemm" {
		t.Errorf("shape mismatch: got %v, want RuntimeError for node fc (Gemm)", err)
	} else if !strings.HasPrefix(err.Error(), `infer: gemm.onnx: node "fc" (Gemm): `) {
		t.Errorf("message %q does not start with the file, node and op", err)
	}
	// the session stays usable after a failed run
	if _, err := s.Run(context.Background(), make([]float32, 5), 1); err == nil {
		t.Error("second bad run succeeded")
	}
}

// The message parser on messages of the shapes ONNX Runtime 1.24 produces
// (from the runtime's source: onnxruntime/core/framework/sequential_executor.cc,
// session_state.cc, graph.cc).
func TestRuntimeErrorParsing(t *testing.T) {
	for _, c := range []struct{ msg, node, op string }{
		{"Error running network: [ONNXRuntimeError] : 2 : INVALID_ARGUMENT : Non-zero status code returned while running Conv node. Name:'conv 1' Status Message: bad", "conv 1", "Conv"},
		{"Error creating C session: [ONNXRuntimeError] : 9 : NOT_IMPLEMENTED : Could not find an implementation for Foo(13) node with name 'n/1'", "n/1", "Foo"},
		{"[ONNXRuntimeError] : 1 : FAIL : Node (c2) Op (Conv) [ShapeInferenceError] Attribute dilations has incorrect size", "c2", "Conv"},
		{`[ONNXRuntimeError] : 10 : INVALID_GRAPH : This is an invalid model. In Node, ("x", NoSuchOp, "", -1) : ("a": tensor(float),) -> ("y",) , Error No Op registered for NoSuchOp`, "x", "NoSuchOp"},
		{"something else entirely", "", ""},
	} {
		var re *RuntimeError
		if !errors.As(runtimeError("m.onnx", errors.New(c.msg)), &re) || re.Node != c.node || re.Op != c.op {
			t.Errorf("%q: got node %q op %q, want %q %q", c.msg, re.Node, re.Op, c.node, c.op)
		}
		if strings.Contains(re.Error(), "[ONNXRuntimeError]") || !strings.HasPrefix(re.Error(), "infer: m.onnx: ") {
			t.Errorf("message %q keeps the status prefix or lacks the file", re.Error())
		}
	}
}

// Cancellation: a cancelled context gives ctx.Err() before anything runs;
// a cancel during a long run (400 images of 64×64, a few seconds of work)
// stops it and returns ctx.Err(), both between chunks (chunks of 2) and
// inside one chunk (all 400 in one call: only the runtime's terminate flag
// can stop that); afterwards no goroutine is left behind and the session
// still works.
func TestCancellation(t *testing.T) {
	m := writeModel(t, "partslike.onnx", modelBytes(t, partsLikeCNN(), 13, nil))
	const n = 400
	big := randn(5, n*3*64*64, 1)
	x := big[:3*64*64]
	for _, batch := range []int{2, n} {
		s := newSession(t, m, Options{Batch: batch, Capture: []string{"r1"}})
		if _, err := s.Run(context.Background(), x, 1); err != nil {
			t.Fatal(err)
		}
		base := runtime.NumGoroutine()
		ctx, cancel := context.WithCancel(context.Background())
		cancel()
		if _, err := s.Run(ctx, x, 1); !errors.Is(err, context.Canceled) {
			t.Errorf("batch %d, cancelled context: got %v, want context.Canceled", batch, err)
		}
		// In flight, deterministically: the session's hook runs inside
		// the first runtime run of the call (after the terminate flag is
		// armed, before the runtime starts); it cancels there, or waits
		// there until the deadline has passed. 400 images take far longer
		// than the flag takes to reach the runtime, so the run cannot end
		// on its own first (if it did, Run would return nil and fail here).
		ctx, cancel = context.WithCancel(context.Background())
		var once sync.Once
		s.execHook = func(context.Context) { once.Do(cancel) }
		if _, err := s.Run(ctx, big, n); !errors.Is(err, context.Canceled) {
			t.Errorf("batch %d, cancel during the run: got %v, want context.Canceled", batch, err)
		}
		ctx, cancel = context.WithTimeout(context.Background(), time.Millisecond)
		once = sync.Once{}
		s.execHook = func(ctx context.Context) { once.Do(func() { <-ctx.Done() }) }
		if _, err := s.Run(ctx, big, n); !errors.Is(err, context.DeadlineExceeded) {
			t.Errorf("batch %d, deadline during the run: got %v, want context.DeadlineExceeded", batch, err)
		}
		cancel()
		s.execHook = nil
		// The runtime's terminate callbacks (context.AfterFunc) end right
		// after firing; give the scheduler a moment (this bounds the wait,
		// it times nothing).
		deadline := time.Now().Add(2 * time.Second)
		for runtime.NumGoroutine() > base && time.Now().Before(deadline) {
			time.Sleep(10 * time.Millisecond)
		}
		if g := runtime.NumGoroutine(); g > base {
			buf := make([]byte, 1<<16)
			t.Errorf("batch %d: %d goroutines after the cancelled runs, %d before:\n%s", batch, g, base, buf[:runtime.Stack(buf, true)])
		}
		if _, err := s.Run(context.Background(), x, 1); err != nil {
			t.Errorf("batch %d: run after the cancelled ones: %v", batch, err)
		}
	}
}

// A run whose result cannot fit in memory is refused before anything is
// allocated for it.
func TestMemoryCheck(t *testing.T) {
	s := newSession(t, openTiny(t, 0, false), Options{Capture: tinyOutputs})
	if avail := availableMemory(); avail <= 0 {
		t.Fatalf("available memory unknown (%d); /proc/meminfo is expected on Linux", avail)
	}
	var me *MemoryError
	if err := s.checkMemory(1 << 40); !errors.As(err, &me) || !strings.Contains(err.Error(), "infer: tiny.onnx: ") {
		t.Errorf("2^40 images: got %v, want *MemoryError", err)
	}
	if err := s.checkMemory(8); err != nil {
		t.Errorf("8 images: %v", err)
	}
}

// External data: the weights live in a file beside the model. Loading from
// bytes (a rewrite is needed for the captures) must still find them in the
// model's folder, give the same outputs as the model with embedded weights,
// and write nothing into that folder.
func TestExternalData(t *testing.T) {
	g := tinyCNN(0, false)
	embedded := writeModel(t, "tiny.onnx", modelBytes(t, g, 13, nil))

	dir := t.TempDir()
	var blob []byte
	for _, ini := range g.Initializer {
		off := len(blob)
		blob = append(blob, ini.RawData...)
		ini.RawData = nil
		ini.DataLocation = onnxpb.TensorProto_EXTERNAL
		ini.ExternalData = []*onnxpb.StringStringEntryProto{
			{Key: "location", Value: "tiny.weights"},
			{Key: "offset", Value: strconv.Itoa(off)},
			{Key: "length", Value: strconv.Itoa(len(blob) - off)},
		}
	}
	if err := os.WriteFile(filepath.Join(dir, "tiny.weights"), blob, 0o644); err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(dir, "ext.onnx")
	if err := os.WriteFile(p, modelBytes(t, g, 13, nil), 0o644); err != nil {
		t.Fatal(err)
	}
	ext, err := modelio.Open(p)
	if err != nil {
		t.Fatal(err)
	}
	if !ext.HasExternalData() {
		t.Fatal("test model has no external data")
	}
	before, _ := os.ReadDir(dir)
	x := images(3)
	a, err := newSession(t, embedded, Options{}).Run(context.Background(), x, 3)
	if err != nil {
		t.Fatal(err)
	}
	for _, opt := range []Options{{}, {Capture: []string{"r2"}}} {
		b, err := newSession(t, ext, opt).Run(context.Background(), x, 3)
		if err != nil {
			t.Fatalf("external data, capture %v: %v", opt.Capture, err)
		}
		if !bitsEqual(a.Outputs[0].Data, b.Outputs[0].Data) {
			t.Errorf("external data, capture %v: outputs differ from the embedded model", opt.Capture)
		}
	}
	after, _ := os.ReadDir(dir)
	if len(after) != len(before) {
		t.Errorf("the model's folder had %d entries, now %d", len(before), len(after))
	}
}

// Threads: the session runs with an explicit thread count too.
func TestThreadsOption(t *testing.T) {
	m := openTiny(t, 0, false)
	x := images(2)
	a, err := newSession(t, m, Options{Threads: 1}).Run(context.Background(), x, 2)
	if err != nil {
		t.Fatal(err)
	}
	b, err := newSession(t, m, Options{}).Run(context.Background(), x, 2)
	if err != nil {
		t.Fatal(err)
	}
	if i := closeTo(a.Outputs[0].Data, b.Outputs[0].Data, 1e-5); i >= 0 {
		t.Errorf("1 thread vs default: logit %d %v vs %v", i, a.Outputs[0].Data[i], b.Outputs[0].Data[i])
	}
}

// Close: later runs report ErrClosed; closing twice is fine.
func TestClose(t *testing.T) {
	needORT(t)
	s, err := NewSession(openTiny(t, 0, false), Options{})
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	if _, err := s.Run(context.Background(), images(1), 1); !errors.Is(err, ErrClosed) {
		t.Errorf("run after Close: %v", err)
	}
}

// Shapes static inference cannot know (an Einsum, which modelio has no rule
// for, and the Relu after it) are filled from one real run and marked
// "observed"; the shapes are the ones the graph implies (by hand: a 3×3
// convolution with padding 1 keeps 8×8; the identity Einsum and the Relu
// keep the shape).
func TestObserveShapes(t *testing.T) {
	needORT(t)
	g := &onnxpb.GraphProto{
		Name:        "einsum",
		Input:       []*onnxpb.ValueInfoProto{vi("image", onnxpb.TensorProto_FLOAT, "N", 3, 8, 8)},
		Initializer: []*onnxpb.TensorProto{f32("w", []int64{4, 3, 3, 3}, randn(1, 108, 0.3))},
		Node: []*onnxpb.NodeProto{
			node("Conv", "conv", []string{"image", "w"}, []string{"c"}, ints("pads", 1, 1, 1, 1)),
			node("Einsum", "same", []string{"c"}, []string{"e"}, &onnxpb.AttributeProto{Name: "equation", Type: onnxpb.AttributeProto_STRING, S: []byte("nchw->nchw")}),
			node("Relu", "relu", []string{"e"}, []string{"r"}),
		},
		Output: []*onnxpb.ValueInfoProto{vi("r", onnxpb.TensorProto_FLOAT, "N", 4, 8, 8)},
	}
	m := writeModel(t, "einsum.onnx", modelBytes(t, g, 13, nil))
	unknown := map[string]bool{}
	for _, l := range m.Layers {
		if l.ShapeSource == modelio.SourceUnknown {
			unknown[l.Output] = true
		}
	}
	if !unknown["e"] {
		t.Fatalf("test premise: modelio infers the Einsum's shape statically; layers: %+v", m.Layers)
	}
	before := slices.Clone(m.Layers)
	seen, n, err := ObserveShapes(context.Background(), m, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(m.Layers, before) {
		t.Error("ObserveShapes changed the model it was given")
	}
	if n != len(unknown) {
		t.Errorf("observed %d layers, %d were unknown", n, len(unknown))
	}
	for _, l := range seen.Layers {
		if !unknown[l.Output] {
			continue
		}
		if l.ShapeSource != modelio.SourceObserved || !slices.Equal(l.Shape.Ints(), []int64{1, 4, 8, 8}) {
			t.Errorf("layer %s: %s %s, want observed 1×4×8×8", l.Name, l.ShapeSource, l.Shape)
		}
	}
	if again, n, err := ObserveShapes(context.Background(), seen, Options{}); err != nil || n != 0 || again != seen {
		t.Errorf("second ObserveShapes: %d, %v; want 0 (nothing unknown any more)", n, err)
	}
}

// The demo models (assets/demo/parts.onnx and its unhealthy twin, made by
// assets/make_demo.py) and the stand-in of their architecture: every Conv, Relu, MaxPool, Flatten and
// Gemm output ONNX Runtime returns is reproduced by the direct reference
// from the runtime's input to that node, to 1e-4 (see
// TestActivationsMatchReference), on 3 pseudo-random images.
func TestDemoMatchesReference(t *testing.T) {
	needORT(t)
	standIn := filepath.Join(t.TempDir(), "partslike.onnx")
	if err := os.WriteFile(standIn, modelBytes(t, partsLikeCNN(), 13, nil), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, p := range []string{standIn, demoModel, filepath.Join(filepath.Dir(demoModel), "parts_unhealthy.onnx")} {
		checkFileAgainstReference(t, p)
	}
}

// checkFileAgainstReference opens the model at p, runs 3 pseudo-random
// images with every node's first output captured, and checks every node
// against refconv (see checkLayers).
func checkFileAgainstReference(t *testing.T, p string) {
	t.Helper()
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatalf("%v (the demo model is made by assets/make_demo.py)", err)
	}
	pb := &onnxpb.ModelProto{}
	if err := proto.Unmarshal(b, pb); err != nil {
		t.Fatalf("%s: %v", p, err)
	}
	var opset int64
	for _, o := range pb.GetOpsetImport() {
		if o.GetDomain() == "" || o.GetDomain() == "ai.onnx" {
			opset = o.GetVersion()
		}
	}
	g := pb.GetGraph()
	var capture []string
	for _, n := range g.GetNode() {
		capture = append(capture, n.GetOutput()[0])
	}
	m, err := modelio.Open(p)
	if err != nil {
		t.Fatal(err)
	}
	s := newSession(t, m, Options{Capture: capture})
	dims, err := s.ImageDims()
	if err != nil {
		t.Fatal(err)
	}
	per := int64(1)
	for _, d := range dims {
		per *= d
	}
	x := randn(21, 3*int(per), 1)
	r, err := s.Run(context.Background(), x, 3)
	if err != nil {
		t.Fatal(err)
	}
	vals := map[string]refconv.Tensor{m.Inputs[0].Name: {Shape: append([]int64{3}, dims...), Data: x}}
	for name, tt := range r.Maps {
		vals[name] = refconv.Tensor{Shape: tt.Shape, Data: tt.Data}
	}
	n := checkLayers(t, filepath.Base(p), g, opset, vals)
	if n != len(g.GetNode()) {
		t.Errorf("%s: the reference checked %d of %d nodes", filepath.Base(p), n, len(g.GetNode()))
	}
	t.Logf("%s: %d nodes checked against the reference", filepath.Base(p), n)
}

// Declared shapes are checked before ONNX Runtime sees the model: an input
// claiming 10^6 × 10^6 pixels is refused by NewSession with modelio's limit
// error (ONNX Runtime could spend minutes on it or abort the process).
func TestAbsurdDeclaredShapeRefused(t *testing.T) {
	needORT(t)
	g := tinyCNN(0, false)
	g.Input[0] = vi("image", onnxpb.TensorProto_FLOAT, 1, 3, 1000000, 1000000)
	m := writeModel(t, "huge.onnx", modelBytes(t, g, 13, nil))
	_, err := NewSession(m, Options{})
	if !errors.Is(err, modelio.ErrLimit) || !strings.Contains(err.Error(), "huge.onnx") {
		t.Errorf("got %v, want modelio.ErrLimit naming huge.onnx", err)
	}
}

// When static inference cannot size the outputs, the memory check is
// repeated with the exact sizes after the first chunk, before the Result
// for all images is allocated: images whose output (an Einsum, which
// modelio has no rule for, after a Tile to a million values) is 4 MB each,
// as many as need twice the memory available on this machine.
func TestMemoryCheckAfterFirstChunk(t *testing.T) {
	g := &onnxpb.GraphProto{
		Name:        "grow",
		Input:       []*onnxpb.ValueInfoProto{vi("x", onnxpb.TensorProto_FLOAT, "N", 1)},
		Initializer: []*onnxpb.TensorProto{i64("reps", 1, 1000000)},
		Node: []*onnxpb.NodeProto{
			node("Tile", "tile", []string{"x", "reps"}, []string{"t"}),
			node("Einsum", "same", []string{"t"}, []string{"y"}, &onnxpb.AttributeProto{Name: "equation", Type: onnxpb.AttributeProto_STRING, S: []byte("ij->ij")}),
		},
		Output: []*onnxpb.ValueInfoProto{vi("y", onnxpb.TensorProto_FLOAT, "N", nil)},
	}
	s := newSession(t, writeModel(t, "grow.onnx", modelBytes(t, g, 13, nil)), Options{Batch: 2})
	// The premise, whatever the machine: n images need twice the memory
	// available now (4 MB each), so the run must be refused.
	avail := availableMemory()
	if avail <= 0 {
		t.Fatalf("available memory unknown (%d); /proc/meminfo is expected on Linux", avail)
	}
	n := int(2*avail/4_000_000) + 1000
	_, err := s.Run(context.Background(), make([]float32, n), n)
	var me *MemoryError
	if !errors.As(err, &me) || me.Need < int64(n)*4_000_000 || me.Need <= avail {
		t.Errorf("%d images of 4 MB with %d bytes available: got %v, want a MemoryError for at least %d bytes", n, avail, err, int64(n)*4_000_000)
	}
	if r, err := s.Run(context.Background(), []float32{1, 2}, 2); err != nil || !slices.Equal(r.Outputs[0].Shape, []int64{2, 1000000}) {
		t.Errorf("two images: %v", err)
	}
}

// TestKeep: Keep makes a value once per key, does not keep a failed one,
// closes what it holds when the session closes, and refuses after Close
// (common practice for a cache owned by a resource).
func TestKeep(t *testing.T) {
	needORT(t)
	s, err := NewSession(openTiny(t, 0, false), Options{})
	if err != nil {
		t.Fatal(err)
	}
	sub, err := NewSession(openTiny(t, 0, false), Options{})
	if err != nil {
		t.Fatal(err)
	}
	made := 0
	for range 2 {
		v, err := s.Keep("sub", func() (any, error) { made++; return sub, nil })
		if err != nil || v != any(sub) {
			t.Fatalf("Keep: %v, %v", v, err)
		}
	}
	if made != 1 {
		t.Errorf("made %d times, want once", made)
	}
	boom := errors.New("boom")
	if _, err := s.Keep("bad", func() (any, error) { return nil, boom }); !errors.Is(err, boom) {
		t.Errorf("failed make: %v", err)
	}
	if v, err := s.Keep("bad", func() (any, error) { return 7, nil }); err != nil || v != any(7) {
		t.Errorf("after a failed make: %v, %v (want the second make's 7)", v, err)
	}
	if _, err := sub.Run(context.Background(), images(1), 1); err != nil {
		t.Fatalf("the kept session before its owner's Close: %v", err)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	if _, err := sub.Run(context.Background(), images(1), 1); !errors.Is(err, ErrClosed) {
		t.Errorf("the kept session after its owner's Close: %v, want ErrClosed", err)
	}
	if _, err := s.Keep("sub", func() (any, error) { return sub, nil }); !errors.Is(err, ErrClosed) {
		t.Errorf("Keep after Close: %v, want ErrClosed", err)
	}
}

// TestRelease: a session opened with Release no longer holds its model and
// still runs, giving the same outputs bit for bit as one that holds it
// (the same model in the same runtime: common practice).
func TestRelease(t *testing.T) {
	m := openTiny(t, 0, false)
	held := newSession(t, m, Options{})
	rel := newSession(t, m, Options{Release: true})
	if rel.Model() != nil {
		t.Errorf("Model() = %v after Release, want nil", rel.Model())
	}
	in := images(3)
	want, err := held.Run(context.Background(), in, 3)
	if err != nil {
		t.Fatal(err)
	}
	got, err := rel.Run(context.Background(), in, 3)
	if err != nil {
		t.Fatal(err)
	}
	for i := range 3 {
		w, g := want.Scores(i), got.Scores(i)
		if len(w) == 0 || len(w) != len(g) {
			t.Fatalf("image %d: %d scores, want %d", i, len(g), len(w))
		}
		for j := range w {
			if math.Float32bits(w[j]) != math.Float32bits(g[j]) {
				t.Errorf("image %d score %d: %v, want %v", i, j, g[j], w[j])
			}
		}
	}
}
