package infer

import (
	"context"
	"path/filepath"
	"strings"
	"testing"

	"fovea/modelio"
	"fovea/modelio/onnxbuild"
)

// A model that returns its pooled features first and its 4 class scores
// second: Result.Score is the scores (the output computed from the other,
// modelio.Model.ScoreOutput), Options.Output overrides it by name, and an
// unknown name is refused with the outputs listed.
func TestScoreOutputChoice(t *testing.T) {
	needORT(t)
	b := onnxbuild.New(13, onnxbuild.Random)
	x := b.Input("input", onnxbuild.Float, "N", 3, 8, 8)
	f := b.Flatten(b.GlobalAveragePool(b.Relu(b.Conv(x, 3, 12, 3, 1, 1))))
	b.Node("Identity", []string{f}, []string{"pooled"})
	b.Node("Identity", []string{b.Gemm(f, 12, 4)}, []string{"head"})
	b.Output("pooled", "N", 12)
	b.Output("head", "N", 4)
	path := filepath.Join(t.TempDir(), "two heads.onnx")
	if err := b.Write(path); err != nil {
		t.Fatal(err)
	}
	m, err := modelio.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	in := make([]float32, 2*3*8*8)
	for i := range in {
		in[i] = float32(i%7) / 7
	}
	for _, c := range []struct {
		output, want string
		n            int
	}{{"", "head", 4}, {"pooled", "pooled", 12}, {"head", "head", 4}} {
		s, err := NewSession(m, Options{Threads: 1, Output: c.output})
		if err != nil {
			t.Fatal(err)
		}
		res, err := s.Run(context.Background(), in, 2)
		s.Close()
		if err != nil {
			t.Fatal(err)
		}
		if got := res.Outputs[res.Score].Name; got != c.want || len(res.Scores(1)) != c.n {
			t.Errorf("Output %q: scores from %q (%d values), want %q (%d)", c.output, got, len(res.Scores(1)), c.want, c.n)
		}
	}
	if _, err := NewSession(m, Options{Output: "logits"}); err == nil || !strings.Contains(err.Error(), `no float32 output named "logits"`) || !strings.Contains(err.Error(), "pooled, head") {
		t.Errorf("unknown output: %v", err)
	}
}
