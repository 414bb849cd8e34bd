package modelio

import (
	"errors"
	"os"
	"runtime"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	"fovea/modelio/onnxbuild"
	"fovea/modelio/onnxpb"
)

func TestWithOutputs(t *testing.T) {
	data := tinyModel(t)
	m, err := Decode(data, "tiny.onnx")
	if err != nil {
		t.Fatal(err)
	}
	names := []string{"relu1", "conv1", "softmax1"} // softmax1 is already an output
	out, err := m.WithOutputs(names)
	if err != nil {
		t.Fatal(err)
	}
	var orig, got onnxpb.ModelProto
	if err := proto.Unmarshal(data, &orig); err != nil {
		t.Fatal(err)
	}
	if err := proto.Unmarshal(out, &got); err != nil {
		t.Fatal(err)
	}
	var outs []string
	for _, o := range got.GetGraph().GetOutput() {
		outs = append(outs, o.GetName())
	}
	if strings.Join(outs, ",") != "softmax1,relu1,conv1" {
		t.Errorf("outputs %v, want the model's own first, then relu1, conv1", outs)
	}
	extra := got.GetGraph().GetOutput()[1].GetType().GetTensorType()
	if extra.GetElemType() != dtFloat || len(extra.GetShape().GetDim()) != 4 || extra.GetShape().GetDim()[0].GetDimParam() != "N" ||
		extra.GetShape().GetDim()[1].GetDimValue() != 4 {
		t.Errorf("extra output type %v", extra)
	}
	// Everything else is unchanged.
	got.Graph.Output = orig.Graph.Output
	if !proto.Equal(&orig, &got) {
		t.Error("WithOutputs changed more than the outputs")
	}
	if _, err := Decode(out, "with.onnx"); err != nil {
		t.Errorf("result does not decode: %v", err)
	}
	if _, err := m.WithOutputs([]string{"image"}); !errors.Is(err, ErrNotFound) {
		t.Errorf("graph input as extra output: %v", err)
	}
	if _, err := m.WithOutputs([]string{"nosuch"}); !errors.Is(err, ErrNotFound) || !strings.Contains(err.Error(), "tiny.onnx") {
		t.Errorf("missing tensor: %v", err)
	}
}

// TestWithOutputsMemory: the only copy of the weights WithOutputs makes is
// the serialised result (allocation ≤ 1.2× the file size).
func TestWithOutputsMemory(t *testing.T) {
	path := bigModel(t, 16<<20)
	st, _ := os.Stat(path)
	m, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	var out []byte
	got := allocDuring(func() { out, err = m.WithOutputs([]string{"conv1"}) })
	if err != nil {
		t.Fatal(err)
	}
	runtime.KeepAlive(out)
	if ratio := float64(got) / float64(st.Size()); ratio > 1.2 {
		t.Errorf("WithOutputs allocated %.2f× the file size", ratio)
	}
}

// observeModel has a node without a shape rule in the middle.
func observeModel(t *testing.T) *Model {
	b := onnxbuild.New(13, onnxbuild.Zeros)
	x := b.Input("image", onnxbuild.Float, "N", 3, 10, 10)
	x = b.Conv(x, 3, 8, 3, 1, 0)
	n := b.Node("Mystery", []string{x}, []string{"mystery"})
	n.Domain = "com.example"
	y := b.Relu("mystery")
	y = b.Conv(y, 8, 4, 3, 1, 0)
	b.Output(y)
	return build(t, b)
}

func TestObserve(t *testing.T) {
	m := observeModel(t)
	for _, name := range []string{"mystery", "relu1", "conv2"} {
		if l := layerOf(t, m, name); l.ShapeSource != SourceUnknown || l.Note == "" {
			t.Fatalf("%s before Observe: %s %q", name, l.ShapeSource, l.Note)
		}
	}
	opened := m
	m = m.Observe(map[string][]int64{"mystery": {1, 8, 6, 6}})
	if l := layerOf(t, opened, "mystery"); l.ShapeSource != SourceUnknown {
		t.Errorf("Observe changed the model it was called on: %s %s", l.ShapeSource, l.Shape)
	}
	my := layerOf(t, m, "mystery")
	// The observed shape given above, read as N×C×H×W; 4 bytes per float32
	// (ONNX TensorProto FLOAT).
	if my.ShapeSource != SourceObserved || my.Shape.String() != "1×8×6×6" || my.WHD() != "6×6×8" || my.Bytes != 6*6*8*4 {
		t.Errorf("observed layer: %s %s %s bytes %d", my.ShapeSource, my.Shape, my.WHD(), my.Bytes)
	}
	c2 := layerOf(t, m, "conv2")
	// (6 − 3)/1 + 1 = 4; MACs 4·4·4·8·3·3 = 4608 (hand-computed).
	if c2.ShapeSource != SourceStatic || c2.WHD() != "4×4×4" || c2.MACs != 4608 || !strings.Contains(c2.Note, "observed") {
		t.Errorf("layer after the observed one: %s %s MACs %d note %q", c2.ShapeSource, c2.WHD(), c2.MACs, c2.Note)
	}
	if m.Total.MACs != layerOf(t, m, "conv1").MACs+4608 {
		t.Errorf("totals not recomputed: %+v", m.Total)
	}
	// A run disagreeing with a static shape keeps the static one, with a note.
	m = m.Observe(map[string][]int64{"conv1": {1, 8, 9, 9}})
	if c1 := layerOf(t, m, "conv1"); c1.WHD() != "8×8×8" || !strings.Contains(c1.Note, "a run gave") {
		t.Errorf("conv1 after a disagreeing run: %s %q", c1.WHD(), c1.Note)
	}
}

func TestCheckRunnable(t *testing.T) {
	mk := func(w onnxbuild.Weights, dims ...any) *Model {
		b := onnxbuild.New(13, w)
		x := b.Input("image", onnxbuild.Float, dims...)
		b.Output(b.Relu(b.Conv(x, 3, 4, 3, 1, 1)))
		return build(t, b)
	}
	if err := mk(onnxbuild.Zeros, "N", 3, 224, 224).CheckRunnable(); err != nil {
		t.Errorf("ordinary model: %v", err)
	}
	for _, tc := range []struct {
		m    *Model
		want error
		msg  string
	}{
		{mk(onnxbuild.Zeros, 1, 3, 1<<21, 8), ErrLimit, "dimension 2 is 2097152"},
		{mk(onnxbuild.Zeros, 1, 3, 40000, 40000), ErrLimit, "per image"},
		{mk(onnxbuild.ArchitectureOnly, 1, 3, 8, 8), ErrUnsupported, "architecture-only"},
	} {
		err := tc.m.CheckRunnable()
		if !errors.Is(err, tc.want) || !strings.Contains(err.Error(), tc.msg) || !strings.HasPrefix(err.Error(), "modelio: test.onnx: ") {
			t.Errorf("CheckRunnable: %v, want %v mentioning %q", err, tc.want, tc.msg)
		}
	}
}

func TestActivationLayers(t *testing.T) {
	m := build(t, nhwcModel(t))
	var got []string
	for _, l := range m.ActivationLayers() {
		got = append(got, l.Op)
	}
	// Transpose is layout only; Sub and Div normalise the image (receptive
	// field 1: not feature maps); global pooling leaves 1×1 maps and
	// Flatten vectors.
	if strings.Join(got, ",") != "Conv,Relu,Conv" {
		t.Errorf("activation layers %v", got)
	}
}

// TestConcurrentReads: a Model serves concurrent readers (run with -race).
func TestConcurrentReads(t *testing.T) {
	m := build(t, nhwcModel(t))
	done := make(chan error, 8)
	for i := range 8 {
		go func() {
			var err error
			switch i % 4 {
			case 0:
				_, err = m.Kernels("")
			case 1:
				_, err = m.WithOutputs([]string{"c1"})
			case 2:
				_, _, err = m.Weights("w1")
			case 3:
				err = m.CheckRunnable()
				_ = m.ActivationLayers()
			}
			done <- err
		}()
	}
	for range 8 {
		if err := <-done; err != nil {
			t.Error(err)
		}
	}
}
