package modelio

import (
	"strings"
	"testing"

	"fovea/modelio/onnxbuild"
	"fovea/modelio/onnxpb"
)

type opCase struct {
	name   string
	opset  int64
	inputs map[string][]any // graph inputs: name -> dims (int or symbolic string)
	ints   map[string][]int64
	floats map[string][]float32
	nodes  func(b *onnxbuild.Builder) string // adds nodes, returns the tensor to check
	want   string                            // Shape.String(), or "unknown: <substring of the note>"
	source string
}

var I = onnxbuild.Int
var Is = onnxbuild.Ints

func node(b *onnxbuild.Builder, op string, in []string, attrs ...*onnxpb.AttributeProto) string {
	return b.Op(op, in, attrs...)
}

func runOpCase(t *testing.T, c opCase) {
	t.Helper()
	b := onnxbuild.New(c.opset, onnxbuild.Zeros)
	for name, dims := range c.inputs {
		b.Input(name, onnxbuild.Float, dims...)
	}
	for name, v := range c.ints {
		b.Ints64(name, v...)
	}
	for name, v := range c.floats {
		b.Init(name, []int64{int64(len(v))}, v)
	}
	out := c.nodes(b)
	b.Output(out)
	m := build(t, b)
	info := m.g.info[out]
	if rest, ok := strings.CutPrefix(c.want, "unknown: "); ok {
		if info.static() {
			t.Fatalf("inferred %s, want unknown", info.shape)
		}
		if !strings.Contains(info.why, rest) {
			t.Fatalf("reason %q, want it to mention %q", info.why, rest)
		}
		return
	}
	if !info.static() || info.declared {
		t.Fatalf("not inferred: %s", info.why)
	}
	if got := info.shape.String(); got != c.want {
		t.Fatalf("inferred %s, want %s (%s)", got, c.want, c.source)
	}
}

func TestShapeRules(t *testing.T) {
	x := func(dims ...any) map[string][]any { return map[string][]any{"x": dims} }
	cases := []opCase{
		{name: "reshape 0 and -1", opset: 13, inputs: x(2, 3, 4), ints: map[string][]int64{"s": {0, -1}},
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Reshape", []string{"x", "s"}) },
			want:  "2×12", source: "ONNX Operators.md, Reshape: 0 copies the input dimension, -1 is inferred"},
		{name: "reshape attr opset 1", opset: 1, inputs: x(2, 3, 4),
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Reshape", []string{"x"}, Is("shape", 4, -1)) },
			want:  "4×6", source: "ONNX Operators.md, Reshape-1: shape attribute"},
		{name: "view(x.size(0), -1) chain", opset: 13, inputs: x("N", 512, 7, 7),
			ints: map[string][]int64{"zero": {0}, "minus1": {-1}},
			nodes: func(b *onnxbuild.Builder) string {
				s := node(b, "Shape", []string{"x"})
				g := node(b, "Gather", []string{s, "idx0"}, I("axis", 0))
				b.InitTensor(onnxbuild.Int64Tensor("idx0", nil, []int64{0}))
				u := node(b, "Unsqueeze", []string{g, "zero"})
				c := node(b, "Concat", []string{u, "minus1"}, I("axis", 0))
				return node(b, "Reshape", []string{"x", c})
			},
			want: "N×25088", source: "PyTorch's export of x.view(x.size(0), -1), common practice; 512·7·7 = 25088"},
		{name: "shape slice chain", opset: 13, inputs: x(1, 8, 4, 4),
			ints: map[string][]int64{"st": {0}, "en": {1}, "minus1": {-1}},
			nodes: func(b *onnxbuild.Builder) string {
				s := node(b, "Shape", []string{"x"})
				sl := node(b, "Slice", []string{s, "st", "en"})
				c := node(b, "Concat", []string{sl, "minus1"}, I("axis", 0))
				return node(b, "Reshape", []string{"x", c})
			},
			want: "1×128", source: "ONNX Operators.md, Shape/Slice/Concat/Reshape; 8·4·4 = 128"},
		{name: "reshape from input", opset: 13, inputs: map[string][]any{"x": {2, 3}, "s": {2}},
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Reshape", []string{"x", "s"}) },
			want:  "unknown: computed at run time", source: "a shape given at run time cannot be known statically"},
		{name: "squeeze attr opset 11", opset: 11, inputs: x(1, 3, 1, 5),
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Squeeze", []string{"x"}, Is("axes", 2)) },
			want:  "1×3×5", source: "ONNX Operators.md, Squeeze-11"},
		{name: "squeeze input opset 13", opset: 13, inputs: x(1, 3, 1, 5), ints: map[string][]int64{"a": {0, -2}},
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Squeeze", []string{"x", "a"}) },
			want:  "3×5", source: "ONNX Operators.md, Squeeze-13 (axes input, negative axes)"},
		{name: "squeeze all ones", opset: 13, inputs: x(1, 3, 1, 5),
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Squeeze", []string{"x"}) },
			want:  "3×5", source: "ONNX Operators.md, Squeeze: no axes removes every dimension of size 1"},
		{name: "unsqueeze attr opset 11", opset: 11, inputs: x(3, 4, 5),
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Unsqueeze", []string{"x"}, Is("axes", 0, 4)) },
			want:  "1×3×4×5×1", source: "ONNX Operators.md, Unsqueeze example: axes [0, 4] on [3,4,5]"},
		{name: "unsqueeze input opset 13", opset: 13, inputs: x(3, 4, 5), ints: map[string][]int64{"a": {0, 4}},
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Unsqueeze", []string{"x", "a"}) },
			want:  "1×3×4×5×1", source: "ONNX Operators.md, Unsqueeze-13"},
		{name: "pad input opset 11", opset: 11, inputs: x(1, 3, 4, 4), ints: map[string][]int64{"p": {0, 0, 1, 2, 0, 0, 1, 2}},
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Pad", []string{"x", "p"}) },
			want:  "1×3×6×8", source: "ONNX Operators.md, Pad: out = in + begin + end"},
		{name: "pad attr opset 2", opset: 2, inputs: x(1, 3, 4, 4),
			nodes: func(b *onnxbuild.Builder) string {
				return node(b, "Pad", []string{"x"}, Is("pads", 0, 0, 1, 1, 0, 0, 1, 1))
			},
			want: "1×3×6×6", source: "ONNX Operators.md, Pad-2"},
		{name: "transpose nhwc to nchw", opset: 13, inputs: x("N", 224, 224, 3),
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Transpose", []string{"x"}, Is("perm", 0, 3, 1, 2)) },
			want:  "N×3×224×224", source: "ONNX Operators.md, Transpose"},
		{name: "transpose default", opset: 13, inputs: x(2, 3, 4),
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Transpose", []string{"x"}) },
			want:  "4×3×2", source: "ONNX Operators.md, Transpose: default reverses the axes"},
		{name: "concat channels", opset: 13, inputs: map[string][]any{"x": {1, 2, 4, 4}, "y": {1, 3, 4, 4}},
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Concat", []string{"x", "y"}, I("axis", 1)) },
			want:  "1×5×4×4", source: "ONNX Operators.md, Concat"},
		{name: "gemm transA transB", opset: 13, inputs: map[string][]any{"x": {4, 3}, "w": {5, 4}},
			nodes: func(b *onnxbuild.Builder) string {
				return node(b, "Gemm", []string{"x", "w"}, I("transA", 1), I("transB", 1))
			},
			want: "3×5", source: "ONNX Operators.md, Gemm: A' is M×K, B' is K×N"},
		{name: "matmul batched", opset: 13, inputs: map[string][]any{"x": {2, 3, 4}, "w": {4, 5}},
			nodes: func(b *onnxbuild.Builder) string { return node(b, "MatMul", []string{"x", "w"}) },
			want:  "2×3×5", source: "numpy.matmul semantics (ONNX Operators.md, MatMul)"},
		{name: "matmul vector", opset: 13, inputs: map[string][]any{"x": {4}, "w": {4, 5}},
			nodes: func(b *onnxbuild.Builder) string { return node(b, "MatMul", []string{"x", "w"}) },
			want:  "5", source: "numpy.matmul: a 1-D first operand is promoted then its dimension removed"},
		{name: "reducemean keepdims", opset: 13, inputs: x("N", 8, 7, 7),
			nodes: func(b *onnxbuild.Builder) string { return node(b, "ReduceMean", []string{"x"}, Is("axes", 2, 3)) },
			want:  "N×8×1×1", source: "ONNX Operators.md, ReduceMean-13 (keepdims defaults to 1)"},
		{name: "reducemean axes input opset 18", opset: 18, inputs: x("N", 8, 7, 7), ints: map[string][]int64{"a": {-1, -2}},
			nodes: func(b *onnxbuild.Builder) string {
				return node(b, "ReduceMean", []string{"x", "a"}, I("keepdims", 0))
			},
			want: "N×8", source: "ONNX Operators.md, ReduceMean-18"},
		{name: "resize scales", opset: 13, inputs: x(1, 3, 4, 4), floats: map[string][]float32{"roi": {}, "sc": {1, 1, 2, 2.5}},
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Resize", []string{"x", "roi", "sc"}) },
			want:  "1×3×8×10", source: "ONNX Operators.md, Resize: floor(in × scale)"},
		{name: "resize sizes", opset: 13, inputs: x(1, 3, 4, 4), ints: map[string][]int64{"sz": {1, 3, 5, 7}},
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Resize", []string{"x", "", "", "sz"}) },
			want:  "1×3×5×7", source: "ONNX Operators.md, Resize: sizes"},
		{name: "resize opset 10", opset: 10, inputs: x(1, 3, 4, 4), floats: map[string][]float32{"sc": {1, 1, 2, 2}},
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Resize", []string{"x", "sc"}) },
			want:  "1×3×8×8", source: "ONNX Operators.md, Resize-10: inputs X and scales"},
		{name: "broadcast add", opset: 13, inputs: map[string][]any{"x": {1, 3, 4, 4}, "y": {3, 1, 1}},
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Add", []string{"x", "y"}) },
			want:  "1×3×4×4", source: "ONNX Broadcasting.md, multidirectional broadcasting"},
		{name: "broadcast both ways", opset: 13, inputs: map[string][]any{"x": {2, 1}, "y": {1, 3}},
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Mul", []string{"x", "y"}) },
			want:  "2×3", source: "ONNX Broadcasting.md"},
		{name: "broadcast mismatch", opset: 13, inputs: map[string][]any{"x": {2, 3}, "y": {4}},
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Sub", []string{"x", "y"}) },
			want:  "unknown: do not broadcast", source: "ONNX Broadcasting.md: 3 and 4 are incompatible"},
		{name: "flatten axis 2", opset: 13, inputs: x(2, 3, 4, 5),
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Flatten", []string{"x"}, I("axis", 2)) },
			want:  "6×20", source: "ONNX Operators.md, Flatten"},
		{name: "conv same upper", opset: 13, inputs: map[string][]any{"x": {1, 1, 5, 5}, "w": {1, 1, 3, 3}},
			nodes: func(b *onnxbuild.Builder) string {
				return node(b, "Conv", []string{"x", "w"}, onnxbuild.String("auto_pad", "SAME_UPPER"), Is("strides", 2, 2))
			},
			want: "1×1×3×3", source: "ONNX Operators.md, Conv: SAME_* gives ceil(in / stride)"},
		{name: "conv valid", opset: 13, inputs: map[string][]any{"x": {1, 1, 5, 5}, "w": {1, 1, 3, 3}},
			nodes: func(b *onnxbuild.Builder) string {
				return node(b, "Conv", []string{"x", "w"}, onnxbuild.String("auto_pad", "VALID"), Is("strides", 2, 2))
			},
			want: "1×1×2×2", source: "ONNX Operators.md, Conv: VALID gives ceil((5 − 3 + 1) / 2) = 2"},
		{name: "conv group", opset: 13, inputs: map[string][]any{"x": {1, 8, 5, 5}, "w": {16, 2, 3, 3}},
			nodes: func(b *onnxbuild.Builder) string {
				return node(b, "Conv", []string{"x", "w"}, I("group", 4), Is("pads", 1, 1, 1, 1))
			},
			want: "1×16×5×5", source: "ONNX Operators.md, Conv: W is M × C/group × kH × kW"},
		{name: "conv channel mismatch", opset: 13, inputs: map[string][]any{"x": {1, 3, 5, 5}, "w": {4, 2, 3, 3}},
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Conv", []string{"x", "w"}) },
			want:  "unknown: channels", source: "ONNX Operators.md, Conv: C must equal W's dim 1 × group"},
		{name: "maxpool ceil", opset: 13, inputs: x(1, 1, 4, 4),
			nodes: func(b *onnxbuild.Builder) string {
				return node(b, "MaxPool", []string{"x"}, Is("kernel_shape", 3, 3), Is("strides", 2, 2), I("ceil_mode", 1))
			},
			want: "1×1×2×2", source: "ONNX backend test maxpool_2d_ceil"},
		{name: "symbolic spatial", opset: 13, inputs: map[string][]any{"x": {"N", 3, "H", "W"}, "w": {8, 3, 3, 3}},
			nodes: func(b *onnxbuild.Builder) string { return node(b, "Conv", []string{"x", "w"}) },
			want:  "unknown: symbolic", source: "a symbolic height cannot give a number"},
		{name: "custom op", opset: 13, inputs: x(1, 3),
			nodes: func(b *onnxbuild.Builder) string {
				n := b.Node("Swish", []string{"x"}, []string{"y"})
				n.Domain = "com.example"
				return "y"
			},
			want: "unknown: no shape rule for com.example.Swish", source: "ops outside ai.onnx have no rule"},
		{name: "nonzero", opset: 13, inputs: x(3, 3),
			nodes: func(b *onnxbuild.Builder) string { return node(b, "NonZero", []string{"x"}) },
			want:  "unknown: depends on the data", source: "ONNX Operators.md, NonZero: data-dependent size"},
		{name: "elementwise chain", opset: 13, inputs: x("N", 4, 6, 6),
			nodes: func(b *onnxbuild.Builder) string {
				y := node(b, "LeakyRelu", []string{"x"})
				for _, op := range []string{"Sigmoid", "Tanh", "HardSigmoid", "HardSwish", "Elu", "Selu", "Softplus", "Clip", "Identity", "Dropout", "Softmax", "LogSoftmax"} {
					y = node(b, op, []string{y})
				}
				return y
			},
			want: "N×4×6×6", source: "ONNX Operators.md: elementwise ops keep the shape"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) { runOpCase(t, c) })
	}
}
