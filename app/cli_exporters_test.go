package main

// Models from other exporters: graphs shaped the way other exporters write them
// (tf2onnx/Keras NHWC, opset-9 era fixed-batch models, MobileNet-style
// blocks, SAME padding with even kernels, weights in Constant nodes and
// float16, grayscale, symbolic image sizes, several outputs with odd names,
// external data, PyTorch's view(x.size(0), -1) chain, and inputs Fovea
// cannot feed). Each one goes through every subcommand in-process; each run
// must either succeed with sensible output or exit 2 with one line naming
// the model file and the problem. Never a panic, a hang or exit 1 for a
// problem of the input. Reference values beside each check name their source.

import (
	"encoding/binary"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"fovea/modelio"
	"fovea/modelio/onnxbuild"
	"fovea/modelio/onnxpb"

	"google.golang.org/protobuf/proto"
)

// exModel is one generated model shaped like another exporter's.
type exModel struct {
	name string // file name (spaces and non-ASCII letters on purpose in some)
	make func(b *onnxbuild.Builder, dir string)
	// opset of the builder.
	opset int64
	// fails: the model cannot be fed (exit 2 expected for every command that
	// runs it; layers works).
	fails bool
	// noFilters: no Conv reads the image input, so filters exits 2.
	noFilters bool
	check     func(t *testing.T, r *exRuns)
}

// exRuns holds what every subcommand printed for one model.
type exRuns struct {
	path      string
	imagePath string // the picture classify ran on
	layers    layersDoc
	table     string
	top       classifyDoc
	all       classifyDoc // classify --k 100
	scan      scanDoc
	filt      filtersDoc
	maps      map[string]mapsDoc // by layer name
	occ       occDoc
	codes     map[string]int
	b         *onnxbuild.Builder
}

// exResult is one in-process run; a panic is caught and reported as such.
type exResult struct {
	stdout, stderr string
	code           int
	panicked       any
}

func exRun(args ...string) (r exResult) {
	done := make(chan struct{})
	go func() {
		defer close(done)
		defer func() {
			if p := recover(); p != nil {
				r.panicked = p
			}
		}()
		var out, errb strings.Builder
		r.code = newCLI(&out, &errb, false).run(args)
		r.stdout, r.stderr = out.String(), errb.String()
	}()
	select {
	case <-done:
	case <-time.After(60 * time.Second):
		r.panicked = "hang: no answer after 60 s"
		r.code = -1
	}
	return r
}

// f16 converts a float32 that float16 holds exactly (normal range, at
// most 10 fraction bits) to its IEEE 754 binary16 bits.
func f16(v float32) uint16 {
	if v == 0 {
		return 0
	}
	b := math.Float32bits(v)
	sign := uint16(b>>16) & 0x8000
	exp := int((b>>23)&0xff) - 127 + 15
	frac := uint16((b >> 13) & 0x3ff)
	if exp <= 0 || exp >= 31 || b&0x1fff != 0 {
		panic(fmt.Sprintf("f16: %g is not exact in float16", v))
	}
	return sign | uint16(exp)<<10 | frac
}

// eighths returns n values k/64 for k cycling through -24..24: exact in
// float16 and in float32, small enough to keep activations finite.
func eighths(n int, seed int) []float32 {
	v := make([]float32, n)
	for i := range v {
		v[i] = float32((i*7+seed*13)%49-24) / 64
	}
	return v
}

func f16Tensor(name string, dims []int64, data []float32) *onnxpb.TensorProto {
	raw := make([]byte, 2*len(data))
	for i, v := range data {
		binary.LittleEndian.PutUint16(raw[2*i:], f16(v))
	}
	return &onnxpb.TensorProto{Name: name, Dims: dims, DataType: onnxbuild.Float16, RawData: raw}
}

// constNode puts a float tensor into a Constant node and returns its output.
func constNode(b *onnxbuild.Builder, name string, dims []int64, data []float32) string {
	b.Node("Constant", nil, []string{name}, onnxbuild.TensorAttr("value", onnxbuild.FloatTensor(name, dims, data)))
	return name
}

// matmulHead adds MatMul + Add (as tf2onnx writes Dense) from in to out.
func matmulHead(b *onnxbuild.Builder, x string, in, out int) string {
	w := b.Weight(b.Name("dense_kernel"), int64(in), int64(out))
	bias := b.Weight(b.Name("dense_bias"), int64(out))
	return b.Op("Add", []string{b.Op("MatMul", []string{x, w}), bias})
}

var exModels = []exModel{
	{
		// (a) tf2onnx from Keras: NHWC input, Transpose to NCHW, convs,
		// ReduceMean over the spatial axes, Dense as MatMul+Add, Softmax.
		name: "keras nhwc ü.onnx", opset: 13,
		make: func(b *onnxbuild.Builder, dir string) {
			b.Model.ProducerName, b.Model.ProducerVersion = "tf2onnx", "1.16.1 15c810"
			x := b.Input("input_1", onnxbuild.Float, "unk__12", 32, 32, 3)
			x = b.Op("Transpose", []string{x}, onnxbuild.Ints("perm", 0, 3, 1, 2))
			x = b.Relu(b.Conv(x, 3, 8, 3, 1, 1))
			x = b.Relu(b.Conv(x, 8, 16, 3, 2, 1))
			x = b.Op("ReduceMean", []string{x}, onnxbuild.Ints("axes", 2, 3), onnxbuild.Int("keepdims", 0))
			x = matmulHead(b, x, 16, 10)
			p := b.Softmax(x)
			b.Node("Identity", []string{p}, []string{"dense_1"})
			b.Output("dense_1", "unk__13", 10)
		},
		check: func(t *testing.T, r *exRuns) {
			im := r.layers.Image
			if im == nil || im.Layout != "nhwc" || im.Channels != 3 || im.Height != 32 || im.Width != 32 {
				t.Errorf("image input %+v, want nhwc 3 channels 32×32 (the input is [N,32,32,3])", im)
			}
			// The first layer is the Conv after the Transpose: 8 filters 3×3×3.
			if r.filt.Filters != 8 || r.filt.Channels != 3 || r.filt.Height != 3 {
				t.Errorf("filters: %d of %d×%d, want 8 of 3×3 over 3 channels", r.filt.Filters, r.filt.Channels, r.filt.Height)
			}
			if r.top.SoftmaxApplied {
				t.Errorf("classify applied softmax to an output that already ends in Softmax")
			}
			checkNorms(t, r, "conv1_w")
		},
	},
	{
		// (b) opset 9, fixed batch 1: BatchNormalization with 5 inputs,
		// Dropout, Clip with attributes, Flatten, Reshape with a constant
		// shape initializer.
		name: "opset9 fixed.onnx", opset: 9,
		make: func(b *onnxbuild.Builder, dir string) {
			x := b.Input("data", onnxbuild.Float, 1, 3, 24, 24)
			x = b.Conv(x, 3, 6, 3, 1, 0) // 22
			x = b.BatchNorm(x, 6)
			x = b.Op("Clip", []string{x}, onnxbuild.FloatAttr("min", 0), onnxbuild.FloatAttr("max", 6))
			x = b.MaxPool(x, 2, 2, 0) // 11
			x = b.Op("Dropout", []string{x}, onnxbuild.FloatAttr("ratio", 0.5))
			x = b.Op("Reshape", []string{x, b.Ints64("shape_const", 1, -1)})
			x = b.Gemm(x, 6*11*11, 20)
			x = b.Relu(x)
			x = b.Flatten(x)
			b.Output(b.Gemm(x, 20, 5))
			// IR version 3 exporters list every initializer as a graph input too.
			b.Model.IrVersion = 3
			for _, t := range b.Graph.Initializer {
				b.Input(t.GetName(), t.GetDataType(), dimsAny(t.GetDims())...)
			}
		},
		check: func(t *testing.T, r *exRuns) {
			// ONNX Operators.md, Conv (no padding): 24-3+1 = 22; MaxPool 2/2: 11.
			wantVol(t, r, "MaxPool", "11×11×6")
			if len(r.top.Top) != 5 {
				t.Errorf("classify: %d classes, want 5", len(r.top.Top))
			}
		},
	},
	{
		// (c) MobileNet-like: depthwise and grouped convs, Clip(0,6) with
		// min/max inputs, HardSwish, an Add residual, a Concat of branches.
		name: "mobile like.onnx", opset: 14,
		make: func(b *onnxbuild.Builder, dir string) {
			lo := b.Init("clip_min", nil, []float32{0})
			hi := b.Init("clip_max", nil, []float32{6})
			relu6 := func(x string) string { return b.Op("Clip", []string{x, lo, hi}) }
			x := b.Input("pixel_values", onnxbuild.Float, "batch", 3, 32, 32)
			x = relu6(b.ConvWith(x, onnxbuild.ConvSpec{In: 3, Out: 16, K: 3, Stride: 2, Pad: 1})) // 16
			d := relu6(b.ConvWith(x, onnxbuild.ConvSpec{In: 16, Out: 16, K: 3, Pad: 1, Group: 16}))
			d = b.ConvWith(d, onnxbuild.ConvSpec{In: 16, Out: 16, K: 1, NoBias: true})
			x = b.Add(x, d)
			g := b.Op("HardSwish", []string{b.ConvWith(x, onnxbuild.ConvSpec{In: 16, Out: 8, K: 3, Pad: 1, Group: 4})})
			m := b.ConvWith(x, onnxbuild.ConvSpec{In: 16, Out: 32, K: 3, Pad: 1, Group: 16}) // depth multiplier 2
			x = b.Op("Concat", []string{g, m}, onnxbuild.Int("axis", 1))                     // 40 channels
			x = b.Flatten(b.GlobalAveragePool(x))
			b.Output(b.Gemm(x, 40, 7))
		},
		check: func(t *testing.T, r *exRuns) {
			wantVol(t, r, "Concat", "16×16×40")
			// Parameters of a grouped conv: M·(C/group)·kH·kW + M
			// (ONNX Operators.md, Conv, W's shape): 8·4·9+8 = 296.
			wantParams(t, r, "Conv", 296)
		},
	},
	{
		// (d) auto_pad SAME_UPPER with even kernels, MaxPool ceil_mode.
		name: "same upper.onnx", opset: 13,
		make: func(b *onnxbuild.Builder, dir string) {
			x := b.Input("x", onnxbuild.Float, "N", 3, 30, 30)
			x = b.Relu(b.ConvWith(x, onnxbuild.ConvSpec{In: 3, Out: 4, K: 4, Stride: 2, AutoPad: "SAME_UPPER"})) // 15
			x = b.Relu(b.ConvWith(x, onnxbuild.ConvSpec{In: 4, Out: 4, K: 2, AutoPad: "SAME_UPPER"}))            // 15
			x = b.Op("MaxPool", []string{x}, onnxbuild.Ints("kernel_shape", 2, 2), onnxbuild.Ints("strides", 2, 2),
				onnxbuild.Int("ceil_mode", 1)) // ceil((15-2)/2)+1 = 8
			x = b.Flatten(x)
			b.Output(b.Gemm(x, 4*8*8, 3))
		},
		check: func(t *testing.T, r *exRuns) {
			// ONNX Operators.md, Conv auto_pad SAME_UPPER: out = ceil(in/stride):
			// 30/2 = 15, then 15; MaxPool ceil_mode: ceil((15-2)/2)+1 = 8.
			wantVol(t, r, "MaxPool", "8×8×4")
			if l := layerByOp(r, "Conv"); l == nil || l.Volume != "15×15×4" {
				t.Errorf("first Conv: %+v, want 15×15×4", l)
			}
		},
	},
	{
		// (e) weights in Constant nodes; float16 initializers through Cast.
		name: "constants fp16.onnx", opset: 13,
		make: func(b *onnxbuild.Builder, dir string) {
			x := b.Input("input", onnxbuild.Float, "N", 3, 16, 16)
			w := constNode(b, "conv_w_const", []int64{4, 3, 3, 3}, eighths(4*3*3*3, 1))
			bias := b.Op("Cast", []string{b.InitTensor(f16Tensor("conv_b_half", []int64{4}, eighths(4, 2)))}, onnxbuild.Int("to", 1))
			x = b.Relu(b.Op("Conv", []string{x, w, bias}, onnxbuild.Ints("kernel_shape", 3, 3), onnxbuild.Ints("pads", 1, 1, 1, 1)))
			w2 := b.Op("Cast", []string{b.InitTensor(f16Tensor("conv2_w_half", []int64{6, 4, 3, 3}, eighths(6*4*9, 3)))}, onnxbuild.Int("to", 1))
			x = b.Relu(b.Op("Conv", []string{x, w2}, onnxbuild.Ints("kernel_shape", 3, 3), onnxbuild.Ints("strides", 2, 2)))
			x = b.Flatten(b.GlobalAveragePool(x))
			fw := b.Op("Cast", []string{b.InitTensor(f16Tensor("fc_w_half", []int64{6, 4}, eighths(24, 4)))}, onnxbuild.Int("to", 1))
			b.Output(b.Op("MatMul", []string{x, fw}))
		},
		check: func(t *testing.T, r *exRuns) {
			// conv_w_const above is [4, 3, 3, 3]: M × C × kH × kW (ONNX Operators.md, Conv).
			if r.filt.Filters != 4 || r.filt.Channels != 3 || r.filt.Height != 3 {
				t.Errorf("filters of the Constant-node conv: %+v, want 4 of 3×3×3", r.filt)
			}
			// 16-3+0 over stride 2: floor(13/2)+1 = 7 (ONNX Operators.md, Conv).
			if l := lastOp(r, "Conv"); l == nil || l.Volume != "7×7×6" {
				t.Errorf("second Conv: %+v, want 7×7×6", l)
			}
		},
	},
	{
		// (f) grayscale 28×28, LeNet-like.
		name: "gray 28.onnx", opset: 13,
		make: func(b *onnxbuild.Builder, dir string) {
			x := b.Input("Input3", onnxbuild.Float, 1, 1, 28, 28)
			x = b.MaxPool(b.Relu(b.Conv(x, 1, 4, 5, 1, 0)), 2, 2, 0) // 12
			x = b.MaxPool(b.Relu(b.Conv(x, 4, 8, 5, 1, 0)), 2, 2, 0) // 4
			b.Output(b.Gemm(b.Flatten(x), 8*4*4, 10))
		},
		check: func(t *testing.T, r *exRuns) {
			im := r.layers.Image
			if im == nil || im.Channels != 1 || im.Height != 28 || im.Width != 28 {
				t.Errorf("image input %+v, want 1 channel 28×28", im)
			}
			// As built above: Conv(x, 1, 4, 5, ...), 4 filters of 5×5 on 1 channel.
			if r.filt.Channels != 1 || r.filt.Filters != 4 || r.filt.Height != 5 {
				t.Errorf("filters %+v, want 4 of 5×5×1", r.filt)
			}
			// (28-5+1)/2 = 12, (12-5+1)/2 = 4 (ONNX Operators.md, Conv, MaxPool).
			if l := lastOp(r, "MaxPool"); l == nil || l.Volume != "4×4×8" {
				t.Errorf("last MaxPool: %+v, want 4×4×8", l)
			}
		},
	},
	{
		// (g) symbolic height and width.
		name: "any size.onnx", opset: 13,
		make: func(b *onnxbuild.Builder, dir string) {
			x := b.Input("images", onnxbuild.Float, "batch", 3, "height", "width")
			x = b.Relu(b.Conv(x, 3, 8, 3, 2, 1))
			x = b.Relu(b.Conv(x, 8, 8, 3, 1, 1))
			b.Output(b.Gemm(b.Flatten(b.GlobalAveragePool(x)), 8, 4))
		},
		check: func(t *testing.T, r *exRuns) {
			// The layer table observed the shapes on a run at the guessed
			// size; the maps of the same layers have them too, and the
			// stride-2 conv halves the side: floor((S+2-3)/2)+1 (ONNX
			// Operators.md, Conv) of the second conv's S.
			c1, c2 := r.maps["conv1"], r.maps["conv2"]
			if len(c1.Shape) != 4 || len(c2.Shape) != 4 || c1.Shape[2] != c2.Shape[2] || c1.Shape[1] != 8 {
				t.Fatalf("maps of conv1 %v, conv2 %v", c1.Shape, c2.Shape)
			}
			if l := layerByOp(r, "Conv"); l == nil || l.ShapeSource != "observed" || l.Shape[2] != c1.Shape[2] {
				t.Errorf("layer table conv1 %+v, maps %v", l, c1.Shape)
			}
		},
	},
	{
		// (h) two outputs (logits and features), names with spaces,
		// unicode and slashes.
		name: "two outputs.onnx", opset: 13,
		make: func(b *onnxbuild.Builder, dir string) {
			x := b.Input("input/image 0", onnxbuild.Float, "N", 3, 20, 20)
			x = b.Relu(b.ConvWith(x, onnxbuild.ConvSpec{In: 3, Out: 6, K: 3, Pad: 1, WeightName: "stem/conv weight é"}))
			f := b.Flatten(b.GlobalAveragePool(x))
			b.Node("Identity", []string{f}, []string{"features/pooled ✓"})
			logits := b.Gemm(f, 6, 9)
			b.Node("Identity", []string{logits}, []string{"logits / Klassen ü"})
			b.Output("logits / Klassen ü")
			b.Output("features/pooled ✓")
		},
		check: func(t *testing.T, r *exRuns) {
			if len(r.top.Top) != 5 {
				t.Errorf("classify: %d rows, want 5", len(r.top.Top))
			}
			for _, p := range r.top.Top {
				if p.Index >= 9 {
					t.Errorf("classify read the features output: class %d of a 9-class logits output", p.Index)
				}
			}
		},
	},
	{
		// (h) as above with the features first and the logits second.
		name: "features first.onnx", opset: 13,
		make: func(b *onnxbuild.Builder, dir string) {
			x := b.Input("input", onnxbuild.Float, "N", 3, 20, 20)
			x = b.Relu(b.Conv(x, 3, 12, 3, 1, 1))
			f := b.Flatten(b.GlobalAveragePool(x))
			b.Output(f, "N", 12)
			b.Output(b.Gemm(f, 12, 4), "N", 4)
		},
		// Both outputs are [N,k]; the scores are the one computed from the
		// other (modelio.Model.ScoreOutput, rule 2): the 4-class Gemm, not
		// the 12 pooled features. --output reads the other one on request,
		// and an unknown --output is bad input.
		check: func(t *testing.T, r *exRuns) {
			m, err := modelio.Open(r.path)
			if err != nil {
				t.Fatal(err)
			}
			feats, logits := m.Outputs[0].Name, m.Outputs[1].Name
			if len(r.top.Top) != 4 {
				t.Errorf("classify: %d rows, want the 4 classes of %q", len(r.top.Top), logits)
			}
			for _, p := range r.top.Top {
				if p.Index >= 4 {
					t.Errorf("classify read the features output: class %d of a 4-class logits output", p.Index)
				}
			}
			res := exRun("classify", "--json", "--k", "100", "--verbose", "--model", r.path, "--image", r.imagePath, "--output", feats)
			var doc classifyDoc
			if res.code != exitOK {
				t.Fatalf("--output %s: exit %d: %s", feats, res.code, res.stderr)
			}
			decodeJSON(t, res.stdout, &doc)
			if len(doc.Top) != 12 || !strings.Contains(res.stderr, fmt.Sprintf("scores:        output %q (named by --output)", feats)) {
				t.Errorf("--output %s: %d classes, want 12; stderr %s", feats, len(doc.Top), res.stderr)
			}
			res = exRun("classify", "--verbose", "--model", r.path, "--image", r.imagePath)
			if !strings.Contains(res.stderr, fmt.Sprintf("scores:        output %q (the other vector outputs are computed into it", logits)) {
				t.Errorf("--verbose does not say which output is scored: %s", res.stderr)
			}
			res = exRun("classify", "--model", r.path, "--image", r.imagePath, "--output", "nosuch")
			if res.code != exitUsage || !strings.Contains(res.stderr, `no output named "nosuch"`) || !strings.Contains(res.stderr, "features first") {
				t.Errorf("--output nosuch: exit %d: %s", res.code, res.stderr)
			}
		},
	},
	{
		// A convolutional head, as SqueezeNet exports: scores [N,10,1,1],
		// with a labels file of 10 lines beside the model.
		name: "conv head.onnx", opset: 13,
		make: func(b *onnxbuild.Builder, dir string) {
			x := b.Input("data_0", onnxbuild.Float, "N", 3, 24, 24)
			x = b.MaxPool(b.Relu(b.Conv(x, 3, 8, 3, 2, 0)), 3, 2, 0)
			x = b.Relu(b.Conv(x, 8, 10, 1, 1, 0))
			x = b.GlobalAveragePool(x)
			b.Node("Softmax", []string{x}, []string{"softmaxout_1"}, onnxbuild.Int("axis", 1))
			b.Output("softmaxout_1", "N", 10, 1, 1)
			writeLabels(dir, "conv head.txt", 10)
		},
		check: func(t *testing.T, r *exRuns) {
			if len(r.top.Top) != 5 || r.top.Top[0].Label == "" || r.top.SoftmaxApplied {
				t.Errorf("classify: %+v, want 5 of 10 labelled classes, no softmax applied", r.top)
			}
		},
	},
	{
		// Fixed batch 1 whose scores lost the batch axis: output [6].
		name: "no batch axis.onnx", opset: 13,
		make: func(b *onnxbuild.Builder, dir string) {
			x := b.Input("input", onnxbuild.Float, 1, 3, 16, 16)
			x = b.Relu(b.Conv(x, 3, 4, 3, 1, 1))
			x = b.Gemm(b.Flatten(b.GlobalAveragePool(x)), 4, 6)
			b.Output(b.Op("Reshape", []string{x, b.Ints64("to_1d", 6)}), 6)
		},
		check: func(t *testing.T, r *exRuns) {
			if len(r.top.Top) != 5 {
				t.Errorf("classify: %d rows, want 5 of 6 classes", len(r.top.Top))
			}
		},
	},
	{
		// Fixed batch 4 (an exporter's dummy input of 4 images).
		name: "batch four.onnx", opset: 13,
		make: func(b *onnxbuild.Builder, dir string) {
			x := b.Input("input", onnxbuild.Float, 4, 3, 16, 16)
			x = b.Relu(b.Conv(x, 3, 4, 3, 1, 1))
			b.Output(b.Gemm(b.Flatten(b.GlobalAveragePool(x)), 4, 3), 4, 3)
		},
	},
	{
		// tf2onnx with Keras Rescaling before the Transpose, a named
		// input "input_1:0", opset 18 (ReduceMean's axes as an input).
		name: "keras rescale.onnx", opset: 18,
		make: func(b *onnxbuild.Builder, dir string) {
			x := b.Input("input_1:0", onnxbuild.Float, "unk__7", 28, 28, 3)
			x = b.Op("Mul", []string{x, b.Init("scale", nil, []float32{1.0 / 127.5})})
			x = b.Op("Add", []string{x, b.Init("offset", nil, []float32{-1})})
			x = b.Op("Transpose", []string{x}, onnxbuild.Ints("perm", 0, 3, 1, 2))
			x = b.Relu(b.Conv(x, 3, 6, 3, 1, 1))
			x = b.Op("ReduceMean", []string{x, b.Ints64("axes", 2, 3)}, onnxbuild.Int("keepdims", 0))
			x = b.Softmax(matmulHead(b, x, 6, 3))
			b.Node("Identity", []string{x}, []string{"dense:0"})
			b.Output("dense:0", "unk__8", 3)
		},
		check: func(t *testing.T, r *exRuns) {
			if im := r.layers.Image; im == nil || im.Layout != "nhwc" || im.Name != "input_1:0" {
				t.Errorf("image input %+v, want input_1:0 in nhwc", im)
			}
			// As built above: Conv(x, 3, 6, 3, 1, 1) after the Transpose.
			if r.filt.Filters != 6 || r.filt.Channels != 3 {
				t.Errorf("filters %+v, want 6 of 3 channels (through Mul, Add, Transpose)", r.filt)
			}
		},
	},
	{
		// (i) weights in an external data file beside the model.
		name: "external data.onnx", opset: 13,
		make: func(b *onnxbuild.Builder, dir string) {
			x := b.Input("input", onnxbuild.Float, "N", 3, 16, 16)
			x = b.Relu(b.Conv(x, 3, 4, 3, 1, 1))
			b.Output(b.Gemm(b.Flatten(b.GlobalAveragePool(x)), 4, 3))
			var blob []byte
			for _, t := range b.Graph.Initializer {
				off := len(blob)
				blob = append(blob, t.RawData...)
				for len(blob)%64 != 0 {
					blob = append(blob, 0)
				}
				t.ExternalData = []*onnxpb.StringStringEntryProto{
					{Key: "location", Value: "weights ü.bin"},
					{Key: "offset", Value: fmt.Sprint(off)},
					{Key: "length", Value: fmt.Sprint(len(t.RawData))},
				}
				t.DataLocation = onnxpb.TensorProto_EXTERNAL
				t.RawData = nil
			}
			if err := os.WriteFile(filepath.Join(dir, "weights ü.bin"), blob, 0o644); err != nil {
				panic(err)
			}
		},
	},
	{
		// (j) x.view(x.size(0), -1) as PyTorch exports it.
		name: "torch view.onnx", opset: 13,
		make: func(b *onnxbuild.Builder, dir string) {
			x := b.Input("input.1", onnxbuild.Float, "batch_size", 3, 16, 16)
			x = b.MaxPool(b.Relu(b.Conv(x, 3, 4, 3, 1, 1)), 2, 2, 0) // 8
			s := b.Op("Shape", []string{x})
			g := b.Op("Gather", []string{s, b.InitTensor(onnxbuild.Int64Tensor("zero", nil, []int64{0}))}, onnxbuild.Int("axis", 0))
			u := b.Op("Unsqueeze", []string{g, b.Ints64("axes0", 0)})
			c := b.Op("Concat", []string{u, b.Ints64("minus1", -1)}, onnxbuild.Int("axis", 0))
			x = b.Op("Reshape", []string{x, c})
			b.Output(b.Gemm(x, 4*8*8, 6))
		},
		check: func(t *testing.T, r *exRuns) {
			// K·N weights + N biases, K = 4·8·8 (ONNX Operators.md, Gemm: B is N×K with
			// transB = 1, as onnxbuild.Builder.Gemm stores it; the bias C has N).
			if l := layerByOp(r, "Gemm"); l == nil || l.Params != 4*8*8*6+6 {
				t.Errorf("Gemm after the view chain: %+v, want %d params", l, 4*8*8*6+6)
			}
		},
	},
	{
		// (k) an integer image input.
		name: "uint8 input.onnx", opset: 13, fails: true, noFilters: true, // no float image input
		make: func(b *onnxbuild.Builder, dir string) {
			x := b.Input("image_uint8", onnxbuild.Uint8, "N", 3, 16, 16)
			x = b.Op("Cast", []string{x}, onnxbuild.Int("to", 1))
			x = b.Relu(b.Conv(x, 3, 4, 3, 1, 1))
			b.Output(b.Gemm(b.Flatten(b.GlobalAveragePool(x)), 4, 3))
		},
	},
	{
		// (k) two float 4-D inputs.
		name: "two images.onnx", opset: 13, fails: true,
		make: func(b *onnxbuild.Builder, dir string) {
			x := b.Input("left", onnxbuild.Float, "N", 3, 16, 16)
			y := b.Input("right", onnxbuild.Float, "N", 3, 16, 16)
			x = b.Relu(b.Conv(b.Add(x, y), 3, 4, 3, 1, 1))
			b.Output(b.Gemm(b.Flatten(b.GlobalAveragePool(x)), 4, 3))
		},
	},
}

func dimsAny(d []int64) []any {
	out := []any{}
	for _, v := range d {
		out = append(out, int(v))
	}
	return out
}

// writeLabels writes n labels "part 0" … into dir/name.
func writeLabels(dir, name string, n int) {
	var b strings.Builder
	for i := range n {
		fmt.Fprintf(&b, "part %d\n", i)
	}
	if err := os.WriteFile(filepath.Join(dir, name), []byte(b.String()), 0o644); err != nil {
		panic(err)
	}
}

func layerByOp(r *exRuns, op string) *layerDoc {
	for i := range r.layers.Layers {
		if r.layers.Layers[i].Op == op {
			return &r.layers.Layers[i]
		}
	}
	return nil
}

func lastOp(r *exRuns, op string) *layerDoc {
	var l *layerDoc
	for i := range r.layers.Layers {
		if r.layers.Layers[i].Op == op {
			l = &r.layers.Layers[i]
		}
	}
	return l
}

// checkNorms compares the filter norms `filters` printed with the L2 norms
// of the weights the test wrote into the initializer named w (tolerance
// 1e-6 relative: float32 sums in another order).
func checkNorms(t *testing.T, r *exRuns, w string) {
	t.Helper()
	for _, init := range r.b.Graph.Initializer {
		if init.GetName() != w {
			continue
		}
		raw, per := init.GetRawData(), 1
		for _, d := range init.GetDims()[1:] {
			per *= int(d)
		}
		if len(r.filt.Tiles) != int(init.GetDims()[0]) {
			t.Fatalf("%d tiles for %d filters", len(r.filt.Tiles), init.GetDims()[0])
		}
		for _, tile := range r.filt.Tiles {
			sum := 0.0
			for k := range per {
				v := float64(math.Float32frombits(binary.LittleEndian.Uint32(raw[4*(tile.Index*per+k):])))
				sum += v * v
			}
			if want := math.Sqrt(sum); math.Abs(tile.Norm-want) > 1e-6*want {
				t.Errorf("filter %d: norm %g, the weights written have %g", tile.Index, tile.Norm, want)
			}
		}
		return
	}
	t.Fatalf("no initializer %q", w)
}

func wantVol(t *testing.T, r *exRuns, op, vol string) {
	t.Helper()
	if l := lastOp(r, op); l == nil || l.Volume != vol {
		t.Errorf("last %s: %+v, want volume %s", op, l, vol)
	}
}

func wantParams(t *testing.T, r *exRuns, op string, n int64) {
	t.Helper()
	for _, l := range r.layers.Layers {
		if l.Op == op && l.Params == n {
			return
		}
	}
	t.Errorf("no %s layer with %d parameters", op, n)
}

// exImages writes a few small generated PNGs (colour bars and a disc) into a
// new folder and returns the folder and the files.
func exImages(t *testing.T) (string, []string) {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "probe ü")
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	var files []string
	for k := range 3 {
		img := image.NewNRGBA(image.Rect(0, 0, 40+8*k, 36))
		for y := range 36 {
			for x := range 40 + 8*k {
				dx, dy := x-20, y-18
				c := color.NRGBA{uint8(x * 6 * (k + 1)), uint8(y * 7), uint8(90 * k), 255}
				if dx*dx+dy*dy < 100 {
					c = color.NRGBA{250, 250, uint8(40 * k), 255}
				}
				img.SetNRGBA(x, y, c)
			}
		}
		p := filepath.Join(dir, fmt.Sprintf("part %d.png", k))
		f, err := os.Create(p)
		if err != nil {
			t.Fatal(err)
		}
		if err := png.Encode(f, img); err != nil {
			t.Fatal(err)
		}
		f.Close()
		files = append(files, p)
	}
	return dir, files
}

// tpWant gives the exit status each command must end with on a model:
// exitOK, or exitUsage when the model cannot do what the command asks (one
// line on stderr naming the file). what is the command as exExercise names
// it: "layers", "filters", "classify", "maps <layer>", "occlude", "scan",
// "report".
type tpWant func(what string) int

// runsModel reports whether the command what runs the model (layers and
// filters only read the file).
func runsModel(what string) bool {
	return what != "layers" && what != "filters"
}

// wantFor is the expectation of a generated model: a model that cannot be
// fed fails every command that runs it; noFilters fails filters.
func (tm exModel) wantFor(what string) int {
	switch {
	case tm.fails && runsModel(what), tm.noFilters && what == "filters":
		return exitUsage
	}
	return exitOK
}

// exExercise runs every subcommand on the model at path, checks each exit
// status against want and decodes what the successful runs wrote: JSON
// documents, the scan's flags against the README's definitions and the
// report's page size. It returns what they printed.
func exExercise(t *testing.T, path string, probe string, image string, want tpWant) *exRuns {
	t.Helper()
	r := &exRuns{path: path, imagePath: image, maps: map[string]mapsDoc{}, codes: map[string]int{}}
	out := t.TempDir()
	base := filepath.Base(path)
	try := func(what string, v any, args ...string) bool {
		t.Helper()
		res := exRun(args...)
		r.codes[what] = res.code
		if os.Getenv("TPDEBUG") != "" { // TPDEBUG=1 go test -v: every exit status and message
			t.Logf("%s %s: %d %s", base, what, res.code, strings.TrimSpace(res.stderr))
		}
		if res.panicked != nil {
			t.Errorf("%s %s: %v", base, what, res.panicked)
			return false
		}
		key := strings.Fields(what)[0]
		if key == "maps" {
			key = what
		}
		if w := want(key); res.code != w {
			t.Errorf("%s %s: exit %d, want %d: %s", base, what, res.code, w, strings.TrimSpace(res.stderr))
			return false
		}
		switch res.code {
		case exitOK:
			if res.stdout == "" && v != nil {
				t.Errorf("%s %s: exit 0 with nothing on stdout", base, what)
			}
			if v != nil {
				decodeJSON(t, res.stdout, v)
			}
			return true
		case exitUsage:
			msg := strings.TrimRight(res.stderr, "\n")
			if strings.Contains(msg, "\n") || msg == "" {
				t.Errorf("%s %s: want one line on stderr, got %q", base, what, res.stderr)
			}
			if !strings.Contains(msg, base) && !strings.Contains(msg, strings.TrimSuffix(base, ".onnx")) {
				t.Errorf("%s %s: message does not name the model: %q", base, what, msg)
			}
		}
		return false
	}
	m := []string{"--model", path}
	try("layers --json", &r.layers, append([]string{"layers", "--json"}, m...)...)
	if res := exRun(append([]string{"layers"}, m...)...); res.panicked != nil || res.code != want("layers") {
		t.Errorf("%s layers: exit %d %v: %s", base, res.code, res.panicked, res.stderr)
	} else if res.code == exitOK {
		r.table = res.stdout
	}
	try("filters", &r.filt, append([]string{"filters", "--json", "--out", filepath.Join(out, "filters.png")}, m...)...)
	all := &r.all
	if try("classify --k 100", all, append([]string{"classify", "--json", "--k", "100", "--image", image}, m...)...) {
		sum := 0.0
		for _, p := range all.Top {
			sum += p.Probability
		}
		// Probabilities (softmax or the model's own) sum to 1 over all
		// classes (definition; 1e-5 for float32 rounding), to at most 1 over
		// the top 100.
		if sum > 1+1e-5 || len(all.Top) < 100 && math.Abs(sum-1) > 1e-5 {
			t.Errorf("%s classify: probabilities sum to %g over %d classes", base, sum, len(all.Top))
		}
	}
	try("classify", &r.top, append([]string{"classify", "--json", "--image", image}, m...)...)
	if mod, err := modelio.Open(path); err == nil {
		for i, l := range mod.ActivationLayers() {
			var d mapsDoc
			if try("maps "+l.Name, &d, append([]string{"maps", "--json", "--image", image, "--layer", l.Name,
				"--out", filepath.Join(out, fmt.Sprintf("maps%d.png", i))}, m...)...) {
				r.maps[l.Name] = d
				if len(d.Shape) == 4 && len(d.Channels) != int(d.Shape[1]) {
					t.Errorf("%s maps %s: %d channels for shape %v", base, l.Name, len(d.Channels), d.Shape)
				}
			}
		}
	}
	try("occlude", &r.occ, append([]string{"occlude", "--json", "--image", image}, m...)...)
	if try("scan", &r.scan, append([]string{"scan", "--json", "--probe", probe}, m...)...) {
		checkScanDoc(t, base, &r.scan, probe)
	}
	report := filepath.Join(out, "report.png")
	if try("report", nil, append([]string{"report", "--image", image, "--out", report}, m...)...) {
		// One A4 page at 150 dpi: 210 × 297 mm (ISO 216) is 1240 × 1754
		// pixels (210/25.4·150 = 1240.2, 297/25.4·150 = 1753.9).
		if pg := readPNG(t, report); pg.Bounds().Dx() != 1240 || pg.Bounds().Dy() != 1754 {
			t.Errorf("%s report: page %v, want 1240×1754 (A4 at 150 dpi)", base, pg.Bounds())
		}
	}
	return r
}

// checkScanDoc checks a scan's JSON against the README's definitions: one
// entry per probe image read, each channel's firing fraction in 0..1 and a
// multiple of 1/images, "dead" exactly when it never fired, "rare" exactly
// when it fired on fewer than 1 % of the images but did fire, the mean
// activation at most the largest, flags from the documented set.
func checkScanDoc(t *testing.T, base string, d *scanDoc, probe string) {
	t.Helper()
	files, _ := filepath.Glob(filepath.Join(probe, "*.png"))
	if d.Images != len(files) || len(d.Layers) == 0 {
		t.Errorf("%s scan: %d images and %d layers, want %d images", base, d.Images, len(d.Layers), len(files))
		return
	}
	known := map[string]bool{"dead": true, "rare": true, "constant": true, "zero_kernel": true, "duplicate": true, "not_finite": true}
	for _, l := range d.Layers {
		for _, c := range l.Channels {
			has := map[string]bool{}
			for _, f := range c.Flags {
				if !known[f] {
					t.Errorf("%s scan %s channel %d: unknown flag %q", base, l.Name, c.Index, f)
				}
				has[f] = true
			}
			k := c.Fires * float64(d.Images)
			if c.Fires < 0 || c.Fires > 1 || math.Abs(k-math.Round(k)) > 1e-9 {
				t.Errorf("%s scan %s channel %d: fires %v is not a fraction of %d images", base, l.Name, c.Index, c.Fires, d.Images)
			}
			if has["not_finite"] {
				continue
			}
			if has["dead"] != (c.Fires == 0) || has["rare"] != (c.Fires > 0 && c.Fires < 0.01) {
				t.Errorf("%s scan %s channel %d: fires %v with flags %v", base, l.Name, c.Index, c.Fires, c.Flags)
			}
			if c.Mean > c.Max+1e-6*math.Abs(c.Max) {
				t.Errorf("%s scan %s channel %d: mean %v above max %v", base, l.Name, c.Index, c.Mean, c.Max)
			}
		}
	}
}

func TestCLIOtherExportersModels(t *testing.T) {
	startRuntime(t)
	probe, images := exImages(t)
	for _, tm := range exModels {
		t.Run(tm.name, func(t *testing.T) {
			dir := filepath.Join(t.TempDir(), "models é")
			if err := os.MkdirAll(dir, 0o755); err != nil {
				t.Fatal(err)
			}
			b := exNew(tm.opset)
			tm.make(b, dir)
			path := filepath.Join(dir, tm.name)
			if err := b.Write(path); err != nil {
				t.Fatal(err)
			}
			r := exExercise(t, path, probe, images[0], tm.wantFor)
			r.b = b
			if tm.check != nil && !t.Failed() {
				tm.check(t, r)
			}
		})
	}
}

// exNew starts a model for the other-exporter tests: onnxbuild with its
// Xorshift weights, IR version 7 and producer "fovea-test" (the values
// these tests were written with; some models override them).
func exNew(opset int64) *onnxbuild.Builder {
	b := onnxbuild.New(opset, onnxbuild.Xorshift)
	b.Model.IrVersion, b.Model.ProducerName = 7, "fovea-test"
	return b
}

// The PyTorch-exported conformance models (Debian libonnx-testdata) that
// take one 4-D float input: single layers with fixed batch 2 and tiny or
// odd sizes, whose output is a feature map rather than class scores. Which
// commands must succeed on each is decided from the model file itself, read
// with the protobuf types (conformanceWant), and the successful runs'
// output is decoded: classify lists every value of the stored expected
// output's per-image shape (the conformance data's output_0.pb) as a class.
func TestCLIConformanceModels(t *testing.T) {
	startRuntime(t)
	probe, images := exImages(t)
	files, _ := filepath.Glob(filepath.Join(conformanceDir, "pytorch-converted", "*", "model.onnx"))
	if len(files) == 0 {
		t.Fatalf("no conformance models under %s (Debian package libonnx-testdata; `make test` installs it)", conformanceDir)
	}
	n, ran := 0, 0
	for _, f := range files {
		m, err := modelio.Open(f)
		if err != nil || m.Image == nil {
			continue
		}
		in := 0
		for _, v := range m.Inputs {
			if !v.Weight {
				in++
			}
		}
		if in != 1 || len(m.Image.Name) == 0 {
			continue
		}
		n++
		t.Run(filepath.Base(filepath.Dir(f)), func(t *testing.T) {
			want, classes := conformanceWant(t, f)
			r := exExercise(t, f, probe, images[0], want)
			if r.codes["classify --k 100"] == exitOK {
				ran++
				if len(r.all.Top) != min(100, classes) {
					t.Errorf("classify --k 100: %d rows, want min(100, %d) (the expected output's values per image)", len(r.all.Top), classes)
				}
			}
		})
	}
	if n < 20 {
		t.Errorf("only %d conformance models with one 4-D float input, expected about 30", n)
	}
	if ran < 10 {
		t.Errorf("only %d conformance models ran: the expectations decide little", ran)
	}
}

// conformanceWant decides from the file alone (the ONNX protobuf, not
// modelio) which commands must succeed on a conformance model, and returns
// the number of values per image of its stored expected output:
//
//   - layers always (any valid model);
//   - filters when a Conv reads the graph input (README: the filters are the
//     first layer's, the Conv reading the image);
//   - the commands that run the model when the input has 1 or 3 channels
//     (README: colour or luminance pictures) and no node needs a kernel ONNX
//     Runtime does not have: AveragePool, BatchNormalization and PRelu
//     before opset 7 (ONNX Runtime's OperatorKernels.md registers them from
//     version 7; from memory, and the runtime here says "Could not find an
//     implementation" for them);
//   - scan besides needs a ReLU-like activation (README: the channels after
//     an activation; the scan reads Relu, LeakyRelu, Clip and the like).
func conformanceWant(t *testing.T, path string) (tpWant, int) {
	t.Helper()
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var pb onnxpb.ModelProto
	if err := proto.Unmarshal(raw, &pb); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	g := pb.GetGraph()
	opset := int64(0)
	for _, o := range pb.GetOpsetImport() {
		if o.GetDomain() == "" || o.GetDomain() == "ai.onnx" {
			opset = o.GetVersion()
		}
	}
	inits := map[string]bool{}
	for _, i := range g.GetInitializer() {
		inits[i.GetName()] = true
	}
	var input *onnxpb.ValueInfoProto
	for _, v := range g.GetInput() {
		if !inits[v.GetName()] {
			input = v
		}
	}
	dims := input.GetType().GetTensorType().GetShape().GetDim()
	if len(dims) != 4 {
		t.Fatalf("%s: input %q has %d dims", path, input.GetName(), len(dims))
	}
	channels := dims[1].GetDimValue()
	runs := channels == 1 || channels == 3
	convReads, reluLike := false, false
	for _, nd := range g.GetNode() {
		switch nd.GetOpType() {
		case "AveragePool", "BatchNormalization", "PRelu":
			if opset < 7 {
				runs = false
			}
		case "Conv":
			if len(nd.GetInput()) > 0 && nd.GetInput()[0] == input.GetName() {
				convReads = true
			}
		case "Relu", "LeakyRelu", "Clip":
			reluLike = true
		}
	}
	var out onnxpb.TensorProto
	b, err := os.ReadFile(filepath.Join(filepath.Dir(path), "test_data_set_0", "output_0.pb"))
	if err != nil {
		t.Fatal(err)
	}
	if err := proto.Unmarshal(b, &out); err != nil {
		t.Fatalf("%s: expected output: %v", path, err)
	}
	classes := 1
	for _, d := range out.GetDims()[1:] {
		classes *= int(d)
	}
	code := func(ok bool) int {
		if ok {
			return exitOK
		}
		return exitUsage
	}
	return func(what string) int {
		switch what {
		case "layers":
			return exitOK
		case "filters":
			return code(convReads)
		case "scan":
			return code(runs && reluLike)
		}
		return code(runs)
	}, classes
}

const conformanceDir = "/usr/share/libonnx-testdata/data"
