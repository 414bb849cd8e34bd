package modelio

import (
	"slices"
	"testing"

	"fovea/modelio/onnxbuild"
)

// A residual block written the way PyTorch exports one (He et al. 2016,
// Fig. 2: conv → BN → ReLU → conv → BN, plus the shortcut, then ReLU), after
// a stem conv → BN → ReLU → max pool. The maps a layer hands on are the
// ReLU and pooling outputs; the Conv, BatchNormalization and Add outputs
// are inner stages read only by the next step (common practice: that is
// what "the activation map of a layer" means to a practitioner).
func TestMapLayersAndCaptureEffect(t *testing.T) {
	b := onnxbuild.New(13, onnxbuild.Zeros)
	x := b.Input("image", onnxbuild.Float, "N", 3, 32, 32)
	conv1 := b.Conv(x, 3, 8, 3, 1, 1)
	bn1 := b.BatchNorm(conv1, 8)
	relu1 := b.Relu(bn1)
	pool := b.MaxPool(relu1, 2, 2, 0)
	conv2 := b.Conv(pool, 8, 8, 3, 1, 1)
	bn2 := b.BatchNorm(conv2, 8)
	add := b.Add(bn2, pool) // pool is read twice: by conv2 and here
	relu2 := b.Relu(add)
	flat := b.Flatten(b.GlobalAveragePool(relu2))
	b.Output(b.Gemm(flat, 8, 4))
	m := build(t, b)

	var got []string
	for _, l := range m.MapLayers() {
		got = append(got, l.Output)
	}
	if want := []string{relu1, pool, relu2}; !slices.Equal(got, want) {
		t.Errorf("MapLayers outputs %v, want %v", got, want)
	}
	var all []string
	for _, l := range m.ActivationLayers() {
		all = append(all, l.Output)
	}
	for _, n := range []string{conv1, bn1, conv2, bn2, add} {
		if !slices.Contains(all, n) {
			t.Errorf("ActivationLayers lacks %s (the inner stages stay available)", n)
		}
	}

	for _, c := range []struct {
		name string
		want CaptureEffect
	}{
		{conv1, CaptureShifts}, // BatchNormalization folds into the Conv's weights
		{bn1, CaptureSlows},    // Relu merges with no change of value
		{relu1, CaptureFree},   // read by MaxPool, which merges with nothing
		{pool, CaptureFree},    // read by two nodes: materialised anyway
		{bn2, CaptureShifts},   // Add may merge into the Conv chain
		{add, CaptureSlows},
		{relu2, CaptureFree},
		{"image", CaptureFree},
		{"no such tensor", CaptureFree},
	} {
		t.Run(c.name, func(t *testing.T) {
			if got := m.CaptureEffect(c.name); got != c.want {
				t.Errorf("CaptureEffect(%s) = %d, want %d", c.name, got, c.want)
			}
		})
	}
}
