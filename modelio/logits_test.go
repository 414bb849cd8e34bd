package modelio_test

import (
	"strings"
	"testing"

	"fovea/modelio"
	"fovea/modelio/onnxbuild"
)

// softmaxModel builds image [N,3,4,4] → Flatten → Gemm(48→12) → Reshape to
// shape → last(...) → output "out", at the given opset, and opens it.
func softmaxModel(t *testing.T, opset int64, shape []int64, last func(b *onnxbuild.Builder, x string) string) *modelio.Model {
	t.Helper()
	b := onnxbuild.New(opset, onnxbuild.Random)
	x := b.Input("image", onnxbuild.Float, "N", 3, 4, 4)
	x = b.Gemm(b.Flatten(x), 48, 12)
	x = b.Op("Reshape", []string{x, b.Ints64("shape", shape...)})
	b.Node("Identity", []string{last(b, x)}, []string{"out"})
	b.Output("out")
	data, err := b.Bytes()
	if err != nil {
		t.Fatal(err)
	}
	m, err := modelio.Decode(data, "softmax.onnx")
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// TestClassSoftmax: the softmax over the classes of one image is found, one
// over another axis is not taken for it. Axis semantics from the ONNX
// operator spec (onnx.ai/onnx/operators/onnx__Softmax: Softmax-1/11 coerce
// the input to 2-D [a0·…·a(k−1), ak·…·a(n−1)] at axis, default 1;
// Softmax-13 normalises along axis, default −1; LogSoftmax alike).
func TestClassSoftmax(t *testing.T) {
	op := func(name string, axis ...int64) func(b *onnxbuild.Builder, x string) string {
		return func(b *onnxbuild.Builder, x string) string {
			if len(axis) == 0 {
				return b.Op(name, []string{x})
			}
			return b.Op(name, []string{x}, onnxbuild.Int("axis", axis[0]))
		}
	}
	then := func(f func(*onnxbuild.Builder, string) string, shape ...int64) func(*onnxbuild.Builder, string) string {
		return func(b *onnxbuild.Builder, x string) string {
			return b.Op("Reshape", []string{f(b, x), b.Ints64("shape2", shape...)})
		}
	}
	for _, c := range []struct {
		name  string
		opset int64
		shape []int64
		last  func(*onnxbuild.Builder, string) string
		ok    bool
		why   string
	}{
		{"[N,12] axis 1, opset 13", 13, []int64{-1, 12}, op("Softmax", 1), true, ""},
		{"[N,12] default axis, opset 13", 13, []int64{-1, 12}, op("Softmax"), true, ""},
		{"[N,12] axis -1, LogSoftmax", 13, []int64{-1, 12}, op("LogSoftmax", -1), true, ""},
		{"[N,12,1,1] axis 1 then Reshape", 13, []int64{-1, 12, 1, 1}, then(op("Softmax", 1), -1, 12), true, ""},
		{"[N,12] default axis, opset 11", 11, []int64{-1, 12}, op("Softmax"), true, ""},
		// Softmax-11 at axis 1 of [N,4,3] normalises all 12 values of an
		// image together: one distribution per image.
		{"[N,4,3] default axis, opset 11", 11, []int64{-1, 4, 3}, op("Softmax"), true, ""},
		{"[N,4,3] axis 2, opset 11", 11, []int64{-1, 4, 3}, op("Softmax", 2), false, "not the classifier's"},
		{"[N,4,3] axis 2, opset 13", 13, []int64{-1, 4, 3}, op("Softmax", 2), false, "not the classifier's"},
		{"[N,4,3] default axis, opset 13", 13, []int64{-1, 4, 3}, op("Softmax"), false, "not the classifier's"},
		{"[N,4,3] axis 2 then flattened", 13, []int64{-1, 4, 3}, then(op("Softmax", 2), -1, 12), false, "not the classifier's"},
		{"[N,4,3] axis 1, opset 13", 13, []int64{-1, 4, 3}, op("Softmax", 1), false, "not the classifier's"},
		{"axis 0 (the batch)", 13, []int64{-1, 12}, op("Softmax", 0), false, "batch"},
		{"no softmax", 13, []int64{-1, 12}, op("Relu"), false, "not by a Softmax"},
	} {
		m := softmaxModel(t, c.opset, c.shape, c.last)
		cs, err := m.ClassSoftmax("out")
		if c.ok {
			if err != nil {
				t.Errorf("%s: %v", c.name, err)
			} else if cs.Logits != "reshape1" || cs.Output != "out" {
				t.Errorf("%s: %+v, want logits reshape1", c.name, cs)
			}
			continue
		}
		if err == nil || !strings.Contains(err.Error(), c.why) {
			t.Errorf("%s: error %v, want one saying %q", c.name, err, c.why)
		}
	}
}

// TestClassSoftmaxInnerAttention: a spatial attention softmax inside the
// network (over the 16 positions of a [N,1,16] map) does not make the
// output's Gemm a class softmax.
func TestClassSoftmaxInnerAttention(t *testing.T) {
	b := onnxbuild.New(13, onnxbuild.Random)
	x := b.Input("image", onnxbuild.Float, "N", 3, 4, 4)
	f := b.Conv(x, 3, 2, 1, 1, 0) // [N,2,4,4]
	a := b.Op("Reshape", []string{b.Conv(x, 3, 1, 1, 1, 0), b.Ints64("s1", -1, 1, 16)})
	a = b.Op("Softmax", []string{a}, onnxbuild.Int("axis", 2)) // attention over positions
	a = b.Op("Reshape", []string{a, b.Ints64("s2", -1, 1, 4, 4)})
	y := b.Gemm(b.Flatten(b.GlobalAveragePool(b.Op("Mul", []string{f, a}))), 2, 5)
	b.Node("Identity", []string{y}, []string{"out"})
	b.Output("out")
	data, err := b.Bytes()
	if err != nil {
		t.Fatal(err)
	}
	m, err := modelio.Decode(data, "attention.onnx")
	if err != nil {
		t.Fatal(err)
	}
	if cs, err := m.ClassSoftmax("out"); err == nil || !strings.Contains(err.Error(), "Gemm") {
		t.Errorf("attention model: %+v, %v; want an error naming the Gemm", cs, err)
	}
}
