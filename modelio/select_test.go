package modelio

import (
	"slices"
	"testing"

	"fovea/modelio/onnxbuild"
)

// Two branches written interleaved, as exporters may order an
// Inception-style block: convA, convB, then Relu(convA) and
// Relu(BatchNorm(convB)). The node just before each Relu in execution order
// is not what it reads; the graph's edges say which Conv feeds it (ONNX
// IR: a node's inputs name the tensors it reads).
func TestFeedingConvFollowsInputs(t *testing.T) {
	b := onnxbuild.New(13, onnxbuild.Zeros)
	x := b.Input("image", onnxbuild.Float, 1, 3, 16, 16)
	convA := b.Conv(x, 3, 4, 3, 1, 1)
	convB := b.Conv(x, 3, 6, 3, 1, 1)
	bnB := b.BatchNorm(convB, 6)
	reluA := b.Relu(convA)
	reluB := b.Relu(bnB)
	sum := b.Add(b.Conv(reluA, 4, 6, 1, 1, 0), reluB)
	reluC := b.Relu(sum) // fed by an Add: no Conv
	b.Output(b.Flatten(b.GlobalAveragePool(reluC)))
	m := build(t, b)

	idx := func(out string) int {
		return slices.IndexFunc(m.Layers, func(l Layer) bool { return l.Output == out })
	}
	for _, c := range []struct {
		name       string
		relu, conv string // conv "": none
	}{
		{"relu after conv", reluA, convA},
		{"relu after conv and batch norm", reluB, convB},
		{"relu after add", reluC, ""},
	} {
		t.Run(c.name, func(t *testing.T) {
			got := m.FeedingConv(idx(c.relu))
			want := -1
			if c.conv != "" {
				want = idx(c.conv)
			}
			if got != want {
				t.Errorf("FeedingConv(%s) = %d, want %d (%s)", c.relu, got, want, c.conv)
			}
		})
	}
	if got := m.Layers[idx(reluB)].Inputs; !slices.Equal(got, []string{bnB}) {
		t.Errorf("Inputs of %s = %v, want [%s]", reluB, got, bnB)
	}
	if l := m.Layers[idx(convA)]; len(l.Inputs) != 3 || l.Inputs[0] != x {
		t.Errorf("Inputs of the Conv = %v, want [image, weight, bias]", l.Inputs)
	}
	if m.LayerOf(x) != -1 || m.LayerOf("no such tensor") != -1 || m.LayerOf(sum) != idx(sum) {
		t.Errorf("LayerOf: image %d, unknown %d, add %d (want -1, -1, %d)", m.LayerOf(x), m.LayerOf("no such tensor"), m.LayerOf(sum), idx(sum))
	}
	var relus []string
	for _, l := range m.ReluLayers() {
		relus = append(relus, l.Output)
	}
	if want := []string{reluA, reluB, reluC}; !slices.Equal(relus, want) || !slices.Equal(OutputsOf(m.ReluLayers()), want) {
		t.Errorf("ReluLayers %v, OutputsOf %v, want %v", relus, OutputsOf(m.ReluLayers()), want)
	}
}
