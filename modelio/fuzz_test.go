package modelio

import (
	"bytes"
	"errors"
	"flag"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"fovea/modelio/onnxbuild"
	"fovea/modelio/onnxpb"
)

// update rewrites testdata/models from the builders in fuzz_test.go. It is
// this package's own flag, not testkit.Update: testkit imports modelio
// (through modelio/infer), and modelio's own tests cannot import it back.
var update = flag.Bool("update", false, "rewrite testdata/models from the builders in fuzz_test.go")

// modelsDir holds the small models documented in testdata/README.md.
const modelsDir = "../testdata/models"

// shapeChainModel: PyTorch's x.view(x.size(0), -1) export with a symbolic
// batch, between a convolution and a fully connected layer.
func shapeChainModel() *onnxbuild.Builder {
	b := onnxbuild.New(13, onnxbuild.Random)
	x := b.Input("image", onnxbuild.Float, "batch", 3, 8, 8)
	x = b.MaxPool(b.Relu(b.Conv(x, 3, 4, 3, 1, 1)), 2, 2, 0)
	s := b.Op("Shape", []string{x})
	g := b.Op("Gather", []string{s, b.InitTensor(onnxbuild.Int64Tensor("zero", nil, []int64{0}))}, onnxbuild.Int("axis", 0))
	u := b.Op("Unsqueeze", []string{g, b.Ints64("axes0", 0)})
	c := b.Op("Concat", []string{u, b.Ints64("minus1", -1)}, onnxbuild.Int("axis", 0))
	x = b.Op("Reshape", []string{x, c})
	b.Output(b.Gemm(x, 4*4*4, 5))
	return b
}

func opset7Model() *onnxbuild.Builder {
	b := onnxbuild.New(7, onnxbuild.Random)
	x := b.Input("image", onnxbuild.Float, 1, 1, 6, 6)
	x = b.GlobalAveragePool(b.Relu(b.Conv(x, 1, 2, 3, 1, 0)))
	b.Output(b.Op("Squeeze", []string{x}, onnxbuild.Ints("axes", 2, 3)))
	return b
}

// testdataModels are the files of testdata/models, made by the builders.
func testdataModels(t testing.TB) map[string][]byte {
	out := map[string][]byte{}
	for name, b := range map[string]*onnxbuild.Builder{
		"tiny_nchw.onnx":          nil,
		"nhwc_normalised.onnx":    nhwcModel(t),
		"vgg16_architecture.onnx": onnxbuild.VGG16(onnxbuild.ArchitectureOnly, "N", 1000),
		"shape_chain.onnx":        shapeChainModel(),
		"opset7.onnx":             opset7Model(),
	} {
		if b == nil {
			out[name] = tinyModel(t)
			continue
		}
		data, err := b.Bytes()
		if err != nil {
			t.Fatal(err)
		}
		out[name] = data
	}
	return out
}

// TestTestdataModels keeps testdata/models in step with the builders (run
// with -update to rewrite them) and checks each opens.
func TestTestdataModels(t *testing.T) {
	for name, data := range testdataModels(t) {
		path := filepath.Join(modelsDir, name)
		if *update {
			if err := onnxbuild.WriteFile(path, data); err != nil {
				t.Fatal(err)
			}
		}
		have, err := os.ReadFile(path)
		if err != nil {
			t.Fatalf("%v (run go test ./modelio -run TestTestdataModels -update)", err)
		}
		if !bytes.Equal(have, data) {
			t.Errorf("%s differs from its builder (run go test ./modelio -run TestTestdataModels -update)", name)
		}
		m, err := Open(path)
		if err != nil {
			t.Fatal(err)
		}
		for _, l := range m.Layers {
			if l.ShapeSource != SourceStatic {
				t.Errorf("%s: layer %s: %s (%s)", name, l.Name, l.ShapeSource, l.Note)
			}
		}
	}
	m, err := Open(filepath.Join(modelsDir, "shape_chain.onnx"))
	if err != nil {
		t.Fatal(err)
	}
	// 4 channels × 4 × 4 after 2×2 pooling of 8×8 (common practice).
	if l := m.Layers[len(m.Layers)-2]; l.Op != "Reshape" || l.Shape.String() != "batch×64" {
		t.Errorf("reshape layer %s %s", l.Op, l.Shape)
	}
}

// FuzzDecode decodes arbitrary bytes and, when they make a model, runs the
// layer analysis, kernels, WithOutputs and Observe on it. Errors must be
// *Error values naming the file; nothing may panic. Seeds: the models of
// testdata/models and a few built here. Run longer with
//
//	go test -run='^$' -fuzz=FuzzDecode -fuzztime=10m ./modelio
func FuzzDecode(f *testing.F) {
	files, _ := filepath.Glob(filepath.Join(modelsDir, "*.onnx"))
	for _, p := range files {
		if data, err := os.ReadFile(p); err == nil {
			f.Add(data)
		}
	}
	for _, b := range []*onnxbuild.Builder{chain(3), small(onnxbuild.Zeros), small(onnxbuild.ArchitectureOnly)} {
		data, err := b.Bytes()
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	b := small(onnxbuild.Zeros)
	b.InitTensor(&onnxpb.TensorProto{Name: "h", DataType: dtFloat16, Dims: []int64{2}, Int32Data: []int32{0x3c00, 0x4000}})
	b.Output(b.Add("relu1", "h"))
	if data, err := b.Bytes(); err == nil {
		f.Add(data)
	}
	f.Add([]byte{})
	f.Add([]byte("PK\x03\x04"))
	f.Fuzz(func(t *testing.T, data []byte) {
		m, err := Decode(data, "fuzz.onnx")
		if err != nil {
			var me *Error
			if !errors.As(err, &me) || !strings.HasPrefix(err.Error(), "modelio: fuzz.onnx: ") {
				t.Fatalf("error %T: %v", err, err)
			}
			if strings.Contains(err.Error(), "internal error") {
				t.Fatalf("recovered panic: %v", err)
			}
			return
		}
		var sum Totals
		for _, l := range m.Layers {
			sum.Params = satAdd(sum.Params, l.Params)
			sum.MACs = satAdd(sum.MACs, l.MACs)
			sum.Bytes = satAdd(sum.Bytes, l.Bytes)
			// The per-axis values summarise into RF and Jump; a centre
			// needs a receptive field.
			if l.RF != max(l.RFY, l.RFX) || l.Jump != max(l.JumpY, l.JumpX) {
				t.Fatalf("layer %s: RF %d jump %d, per axis %d×%d and %d×%d", l.Name, l.RF, l.Jump, l.RFY, l.RFX, l.JumpY, l.JumpX)
			}
			if l.HasCenter && l.RF == 0 {
				t.Fatalf("layer %s: centre (%v, %v) with RF %d×%d", l.Name, l.CenterY, l.CenterX, l.RFY, l.RFX)
			}
		}
		if sum != m.Total {
			t.Fatalf("totals %+v, sum of layers %+v", m.Total, sum)
		}
		exercise(m)
	})
}
