package prep

import (
	"testing"

	"fovea/modelio"
	"fovea/modelio/onnxbuild"
)

// Guess on a real decoded ONNX model: NHWC and NCHW inputs with fixed and symbolic
// sizes, with and without the preprocess metadata.
func TestGuessModel(t *testing.T) {
	build := func(nhwc bool, h, w any, meta string) *modelio.Model {
		t.Helper()
		b := onnxbuild.New(13, onnxbuild.Zeros)
		var x string
		if nhwc {
			x = b.Input("image", onnxbuild.Float, "N", h, w, 3)
			x = b.Op("Transpose", []string{x}, onnxbuild.Ints("perm", 0, 3, 1, 2))
		} else {
			x = b.Input("image", onnxbuild.Float, "N", 3, h, w)
		}
		x = b.Relu(b.Conv(x, 3, 4, 3, 1, 1))
		b.Output(b.Gemm(b.Flatten(b.GlobalAveragePool(x)), 4, 2))
		if meta != "" {
			b.Meta(MetadataKey, meta)
		}
		data, err := b.Bytes()
		if err != nil {
			t.Fatal(err)
		}
		m, err := modelio.Decode(data, "guess.onnx")
		if err != nil {
			t.Fatal(err)
		}
		if m.Image == nil {
			t.Fatal("modelio found no image input")
		}
		return m
	}
	m := build(false, 32, 48, `{"range":"0-1","mean":[0.485,0.456,0.406],"std":[0.229,0.224,0.225],"resize":"crop"}`)
	want := mustSet(t, Default(), "preset", "imagenet", "size", "48x32", "resize", "crop")
	if got := Guess(m); got != want {
		t.Errorf("NCHW with metadata: %v, want %v", got, want)
	}
	m = build(false, "H", "W", "")
	c, notes := GuessModel(m)
	if c != Default() || !hasNote(notes, "symbolic") {
		t.Errorf("symbolic without metadata: %v %q", c, notes)
	}
	m = build(true, 20, 20, "")
	if c := Guess(m); c.Layout != modelio.LayoutNHWC || c.Width != 20 || c.Height != 20 {
		t.Errorf("NHWC input (modelio says %q): %v", m.Image.Layout, c)
	}
}
