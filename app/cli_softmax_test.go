package main

import (
	"path/filepath"
	"strings"
	"testing"

	"fovea/modelio/onnxbuild"
)

// TestCLIOccludeBehindSoftmax: on a model ending in a Softmax over the
// classes, `occlude --score logit` scores the Softmax's input and says so in
// "score_source"; the probability score names the output; a model whose
// output is a distribution without such a node has its logit score refused
// (exit 2) with the reason, and logprob works on it.
func TestCLIOccludeBehindSoftmax(t *testing.T) {
	startRuntime(t)
	_, images := exImages(t)
	dir := t.TempDir()
	build := func(name string, head func(b *onnxbuild.Builder, z string) string) string {
		b := onnxbuild.New(13, onnxbuild.Random)
		x := b.Input("image", onnxbuild.Float, "N", 3, 16, 16)
		z := b.Gemm(b.Flatten(b.GlobalAveragePool(b.Relu(b.Conv(x, 3, 4, 3, 1, 1)))), 4, 5)
		b.Node("Identity", []string{head(b, z)}, []string{"prob"})
		b.Output("prob")
		p := filepath.Join(dir, name)
		if err := b.Write(p); err != nil {
			t.Fatal(err)
		}
		return p
	}
	sm := func(b *onnxbuild.Builder, z string) string { return b.Softmax(z) }
	withSoftmax := build("softmax.onnx", sm)
	noLogits := build("nologits.onnx", func(b *onnxbuild.Builder, z string) string {
		return b.Op("Mul", []string{sm(b, z), b.Init("one", []int64{1}, []float32{1})})
	})
	type doc struct {
		Score  string `json:"score"`
		Source string `json:"score_source"`
		Note   string `json:"score_source_note"`
	}
	for _, c := range []struct {
		model, score, source string
	}{
		{withSoftmax, "logit", "fc1"}, // the Gemm's output, the Softmax's input (onnxbuild names it fc1)
		{withSoftmax, "logprob", "fc1"},
		{withSoftmax, "probability", "prob"},
		{noLogits, "logprob", "prob"},
		{noLogits, "probability", "prob"},
	} {
		var d doc
		decodeJSON(t, mustRun(t, "occlude", "--model", c.model, "--image", images[0], "--json", "--score", c.score), &d)
		if d.Score != c.score || d.Source != c.source || d.Note == "" {
			t.Errorf("%s --score %s: %+v, want score_source %q", filepath.Base(c.model), c.score, d, c.source)
		}
	}
	_, stderr, code := runCLI(t, "occlude", "--model", noLogits, "--image", images[0], "--json", "--score", "logit")
	if code != 2 || !strings.Contains(stderr, "no logits") || !strings.Contains(stderr, "Mul") {
		t.Errorf("logit of a model without logits: exit %d, %q", code, stderr)
	}
}
