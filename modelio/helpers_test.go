package modelio

import (
	"testing"

	"fovea/modelio/onnxbuild"
)

// build decodes the model of b, failing the test on error.
func build(t testing.TB, b *onnxbuild.Builder) *Model {
	t.Helper()
	data, err := b.Bytes()
	if err != nil {
		t.Fatal(err)
	}
	m, err := Decode(data, "test.onnx")
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// layerOf returns the layer whose output is the tensor out.
func layerOf(t testing.TB, m *Model, out string) Layer {
	t.Helper()
	i := m.layerIndex(out)
	if i < 0 {
		t.Fatalf("no layer for %q", out)
	}
	return m.Layers[i]
}
