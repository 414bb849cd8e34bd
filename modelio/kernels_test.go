package modelio

import (
	"encoding/binary"
	"errors"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"fovea/modelio/onnxbuild"
	"fovea/modelio/onnxpb"
)

// nhwcModel: an NHWC image goes through Transpose, Sub (mean) and Div
// (std) before the first Conv, as TensorFlow-converted models do. The
// first Conv's weights are 0, 1, 2, ... so every position is checkable.
func nhwcModel(t testing.TB) *onnxbuild.Builder {
	b := onnxbuild.New(13, onnxbuild.Zeros)
	x := b.Input("input_1", onnxbuild.Float, "batch", 16, 16, 3)
	x = b.Op("Transpose", []string{x}, onnxbuild.Ints("perm", 0, 3, 1, 2))
	x = b.Op("Sub", []string{x, b.Init("mean", []int64{1, 3, 1, 1}, []float32{0.5, 0.5, 0.5})})
	x = b.Op("Div", []string{x, b.Init("std", []int64{1, 3, 1, 1}, []float32{0.25, 0.25, 0.25})})
	w := make([]float32, 2*3*3*3)
	for i := range w {
		w[i] = float32(i)
	}
	b.Init("w1", []int64{2, 3, 3, 3}, w)
	b.Init("b1", []int64{2}, []float32{-1, 1})
	b.Node("Conv", []string{x, "w1", "b1"}, []string{"c1"}, onnxbuild.Ints("kernel_shape", 3, 3))
	y := b.Relu("c1")
	y = b.Conv(y, 2, 4, 3, 1, 0)
	conv := b.Graph.Node[len(b.Graph.Node)-1]
	b.Node("Identity", []string{conv.Input[1]}, []string{"shared_w"})
	conv.Input[1] = "shared_w"
	// Keep the file in execution order: move the Identity before the Conv.
	nodes := b.Graph.Node
	nodes[len(nodes)-1], nodes[len(nodes)-2] = nodes[len(nodes)-2], nodes[len(nodes)-1]
	b.Output(b.Flatten(b.GlobalAveragePool(y)))
	return b
}

func TestImageLayoutAndFirstKernels(t *testing.T) {
	m := build(t, nhwcModel(t))
	want := ImageInput{Name: "input_1", Layout: "nhwc", Channels: 3, Height: 16, Width: 16, BatchFixed: 0}
	got := *m.Image
	got.Why = ""
	if got != want {
		t.Errorf("image %+v, want %+v", got, want)
	}
	k, err := m.Kernels("")
	if err != nil {
		t.Fatal(err)
	}
	// 2 filters of 3×3 over 3 channels, as nhwcModel builds c1 (W is
	// M × C/group × kH × kW, ONNX Operators.md, Conv).
	if k.Node != "c1" || k.M != 2 || k.C != 3 || k.KH != 3 || k.KW != 3 || k.Group != 1 {
		t.Errorf("kernels %+v", k)
	}
	// W[((m*C+c)*KH+y)*KW+x] is the value stored at that position (row-major
	// [M][C][kH][kW], ONNX Operators.md, Conv).
	for i, v := range k.W {
		if v != float32(i) {
			t.Fatalf("W[%d] = %v, want %d", i, v, i)
		}
	}
	if !slices.Equal(k.Bias, []float32{-1, 1}) {
		t.Errorf("bias %v", k.Bias)
	}
	l := layerOf(t, m, "c1")
	// 16 − 3 + 1 = 14 (common practice); NCHW after the Transpose.
	if l.WHD() != "14×14×2" || l.RF != 3 || l.Shape.String() != "batch×2×14×14" {
		t.Errorf("first conv %s RF %d shape %s", l.WHD(), l.RF, l.Shape)
	}
	// The Transpose of the 16×16×3 input moves no pixel across positions:
	// same volume, receptive field 1 (ONNX Operators.md, Transpose).
	tr := m.Layers[0]
	if tr.Op != "Transpose" || tr.WHD() != "16×16×3" || tr.RF != 1 {
		t.Errorf("transpose layer %s %s RF %d", tr.Op, tr.WHD(), tr.RF)
	}
	// The second conv's weights pass through an Identity (shared weights,
	// as PyTorch exports them).
	k2, err := m.Kernels("conv1")
	if err != nil || k2.M != 4 || k2.C != 2 {
		t.Errorf("second conv kernels %+v %v", k2, err)
	}
	if _, err := m.Kernels("relu1"); !errors.Is(err, ErrNotFound) {
		t.Errorf("Kernels of a Relu: %v", err)
	}
	if _, err := m.Kernels("nope"); !errors.Is(err, ErrNotFound) || !strings.Contains(err.Error(), `"nope"`) {
		t.Errorf("Kernels of a missing node: %v", err)
	}
}

func TestImageLayoutFromDims(t *testing.T) {
	for _, tc := range []struct {
		dims   []any
		layout Layout
		c      int
	}{
		{[]any{1, 3, 32, 32}, "nchw", 3},   // channel-sized dim 1
		{[]any{1, 32, 32, 4}, "nhwc", 4},   // channel-sized dim 3
		{[]any{"N", 1, 28, 28}, "nchw", 1}, // grey
	} {
		b := onnxbuild.New(13, onnxbuild.Zeros)
		b.Input("x", onnxbuild.Float, tc.dims...)
		b.Output(b.Relu("x")) // no Conv: the dims decide
		m := build(t, b)
		if m.Image == nil || m.Image.Layout != tc.layout || m.Image.Channels != tc.c {
			t.Errorf("%v: image %+v, want %s with %d channels", tc.dims, m.Image, tc.layout, tc.c)
		}
	}
}

func TestLabels(t *testing.T) {
	for _, tc := range []struct{ in, want string }{
		{"bolt\nnut\nwasher\n", "bolt|nut|washer"},
		{"bolt\r\nnut\r\n", "bolt|nut"},
		{`["bolt", "hex nut", "washer"]`, "bolt|hex nut|washer"},
		{"[not json\nsecond", "[not json|second"},
		{"", ""},
	} {
		if got := strings.Join(parseLabels(tc.in), "|"); got != tc.want {
			t.Errorf("parseLabels(%q) = %q, want %q", tc.in, got, tc.want)
		}
	}
	m, err := Decode(tinyModel(t), "tiny.onnx")
	if err != nil {
		t.Fatal(err)
	}
	if strings.Join(m.Labels, ",") != "bolt,nut,washer" || m.Metadata["labels"] == "" {
		t.Errorf("labels %q", m.Labels)
	}
}

func f16bits(v float32) uint16 {
	// Exact for the small integers and halves used below (IEEE 754 binary16).
	b := math.Float32bits(v)
	sign := uint16(b>>16) & 0x8000
	if v == 0 {
		return sign
	}
	exp := int((b>>23)&0xff) - 127 + 15
	return sign | uint16(exp)<<10 | uint16((b>>13)&0x3ff)
}

// TestWeightTypes converts every supported element type, in raw_data and
// in the typed fields (onnx.proto: which field holds which type), to
// float32.
func TestWeightTypes(t *testing.T) {
	vals := []float32{-2, -1, 0, 1, 2, 3}
	le := binary.LittleEndian
	raw := func(size int, put func([]byte, float32)) []byte {
		out := make([]byte, size*len(vals))
		for i, v := range vals {
			put(out[size*i:], v)
		}
		return out
	}
	i32 := func(f func(float32) int32) []int32 {
		out := make([]int32, len(vals))
		for i, v := range vals {
			out[i] = f(v)
		}
		return out
	}
	dims := []int64{2, 3}
	tensors := []*onnxpb.TensorProto{
		{Name: "f32", DataType: dtFloat, RawData: raw(4, func(b []byte, v float32) { le.PutUint32(b, math.Float32bits(v)) })},
		{Name: "f32typed", DataType: dtFloat, FloatData: vals},
		{Name: "f64", DataType: dtDouble, RawData: raw(8, func(b []byte, v float32) { le.PutUint64(b, math.Float64bits(float64(v))) })},
		{Name: "f64typed", DataType: dtDouble, DoubleData: []float64{-2, -1, 0, 1, 2, 3}},
		{Name: "f16", DataType: dtFloat16, RawData: raw(2, func(b []byte, v float32) { le.PutUint16(b, f16bits(v)) })},
		{Name: "f16typed", DataType: dtFloat16, Int32Data: i32(func(v float32) int32 { return int32(f16bits(v)) })},
		{Name: "bf16", DataType: dtBfloat16, RawData: raw(2, func(b []byte, v float32) { le.PutUint16(b, uint16(math.Float32bits(v)>>16)) })},
		{Name: "i8", DataType: dtInt8, RawData: raw(1, func(b []byte, v float32) { b[0] = byte(int8(v)) })},
		{Name: "i8typed", DataType: dtInt8, Int32Data: i32(func(v float32) int32 { return int32(v) })},
		{Name: "i16", DataType: dtInt16, RawData: raw(2, func(b []byte, v float32) { le.PutUint16(b, uint16(int16(v))) })},
		{Name: "i32", DataType: dtInt32, RawData: raw(4, func(b []byte, v float32) { le.PutUint32(b, uint32(int32(v))) })},
		{Name: "i64", DataType: dtInt64, RawData: raw(8, func(b []byte, v float32) { le.PutUint64(b, uint64(int64(v))) })},
		{Name: "i64typed", DataType: dtInt64, Int64Data: []int64{-2, -1, 0, 1, 2, 3}},
	}
	b := onnxbuild.New(13, onnxbuild.Zeros)
	b.Input("x", onnxbuild.Float, 2, 3)
	y := "x"
	for _, tp := range tensors {
		tp.Dims = dims
		b.InitTensor(tp)
		y = b.Op("Add", []string{y, tp.Name})
	}
	b.Output(y)
	m := build(t, b)
	for _, tp := range tensors {
		got, d, err := m.Weights(tp.Name)
		if err != nil {
			t.Errorf("%s: %v", tp.Name, err)
			continue
		}
		if !slices.Equal(got, vals) || !slices.Equal(d, dims) {
			t.Errorf("%s: %v %v, want %v", tp.Name, got, d, vals)
		}
	}
	// uint8 from raw_data: 0..255 (onnx.proto: raw_data little-endian).
	b2 := onnxbuild.New(13, onnxbuild.Zeros)
	b2.Input("x", onnxbuild.Float, 3)
	b2.InitTensor(&onnxpb.TensorProto{Name: "u8", DataType: dtUint8, Dims: []int64{3}, RawData: []byte{0, 128, 255}})
	b2.Output(b2.Add("x", "u8"))
	got, _, err := build(t, b2).Weights("u8")
	if err != nil || !slices.Equal(got, []float32{0, 128, 255}) {
		t.Errorf("uint8: %v %v", got, err)
	}
}

// TestHalfToFloat against values from IEEE 754 binary16 (from memory:
// 0x3c00 = 1, 0xc000 = −2, 0x7bff = 65504, 0x0001 = 2^-24, 0x7c00 = +Inf).
func TestHalfToFloat(t *testing.T) {
	for _, tc := range []struct {
		h    uint16
		want float32
	}{{0x3c00, 1}, {0xc000, -2}, {0x7bff, 65504}, {0x0001, 1.0 / (1 << 24)}, {0x3555, 0.333251953125}, {0x8000, 0}} {
		if got := halfToFloat(tc.h); got != tc.want {
			t.Errorf("halfToFloat(%#04x) = %v, want %v", tc.h, got, tc.want)
		}
	}
	if !math.IsInf(float64(halfToFloat(0x7c00)), 1) || !math.IsNaN(float64(halfToFloat(0x7e00))) {
		t.Error("inf/nan")
	}
}

// externalModel writes a model whose conv weights live in weights.bin
// beside it, at the given location/offset/length, and returns its path.
func externalModel(t *testing.T, dir, location string, offset, length int64, weightBytes []byte) string {
	t.Helper()
	b := onnxbuild.New(13, onnxbuild.Zeros)
	x := b.Input("image", onnxbuild.Float, 1, 1, 4, 4)
	tp := &onnxpb.TensorProto{Name: "w", DataType: dtFloat, Dims: []int64{1, 1, 2, 2}, DataLocation: onnxpb.TensorProto_EXTERNAL}
	tp.ExternalData = []*onnxpb.StringStringEntryProto{{Key: "location", Value: location}, {Key: "offset", Value: itoa64(offset)}}
	if length >= 0 {
		tp.ExternalData = append(tp.ExternalData, &onnxpb.StringStringEntryProto{Key: "length", Value: itoa64(length)})
	}
	b.InitTensor(tp)
	b.Node("Conv", []string{x, "w"}, []string{"c"})
	b.Output("c")
	if weightBytes != nil {
		if err := os.WriteFile(filepath.Join(dir, "weights.bin"), weightBytes, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	path := filepath.Join(dir, "ext.onnx")
	if err := b.Write(path); err != nil {
		t.Fatal(err)
	}
	return path
}

func itoa64(v int64) string { return strconv.FormatInt(v, 10) }

func floatBytes(v ...float32) []byte {
	out := make([]byte, 4*len(v))
	for i, f := range v {
		binary.LittleEndian.PutUint32(out[4*i:], math.Float32bits(f))
	}
	return out
}

func TestExternalData(t *testing.T) {
	dir := t.TempDir()
	// 8 bytes of padding, then the four weights (ONNX ExternalData.md:
	// location, offset, length).
	data := append(make([]byte, 8), floatBytes(1, 2, 3, 4)...)
	path := externalModel(t, dir, "weights.bin", 8, 16, data)
	m, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	if !m.HasExternalData() || m.Dir() != dir {
		t.Errorf("HasExternalData %v Dir %q", m.HasExternalData(), m.Dir())
	}
	k, err := m.Kernels("")
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(k.W, []float32{1, 2, 3, 4}) {
		t.Errorf("W %v", k.W)
	}
	// Without length: the rest of the file from the offset.
	if _, err := Open(externalModel(t, t.TempDir(), "weights.bin", 0, -1, floatBytes(1, 2, 3, 4))); err != nil {
		t.Errorf("no length: %v", err)
	}
	// From memory there is no folder to read from: the weights cannot be
	// read, the error says why.
	raw, _ := os.ReadFile(path)
	if _, err := Decode(raw, "ext.onnx"); !errors.Is(err, ErrExternal) || !strings.Contains(err.Error(), "not opened from a folder") {
		t.Errorf("Decode with external data: %v", err)
	}
}
