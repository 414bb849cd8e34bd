package modelio

import (
	"testing"

	"fovea/modelio/onnxbuild"
)

// ScoreOutput's rules (documented on it; the shapes are what common exporters
// write: torchvision-style networks returning (logits, features), SqueezeNet's
// [N,1000,1,1] head, a detector-like feature map beside the scores).
func TestScoreOutput(t *testing.T) {
	type out struct {
		name string
		dims []any
	}
	cases := []struct {
		name string
		make func(b *onnxbuild.Builder, x string) []out
		want string
	}{
		{"features first, logits computed from them", func(b *onnxbuild.Builder, x string) []out {
			f := b.Flatten(b.GlobalAveragePool(b.Conv(x, 3, 12, 3, 1, 1)))
			l := b.Gemm(f, 12, 4)
			return []out{{f, []any{"N", 12}}, {l, []any{"N", 4}}}
		}, "fc"},
		{"independent heads, names decide", func(b *onnxbuild.Builder, x string) []out {
			f := b.Flatten(b.GlobalAveragePool(b.Conv(x, 3, 6, 3, 1, 1)))
			b.Node("Identity", []string{b.Gemm(f, 6, 8)}, []string{"embedding"})
			b.Node("Identity", []string{b.Gemm(f, 6, 5)}, []string{"class_probs"})
			return []out{{"embedding", []any{"N", 8}}, {"class_probs", []any{"N", 5}}}
		}, "class_probs"},
		{"feature map beside scores", func(b *onnxbuild.Builder, x string) []out {
			c := b.Conv(x, 3, 6, 3, 1, 1)
			l := b.Gemm(b.Flatten(b.GlobalAveragePool(c)), 6, 5)
			return []out{{c, []any{"N", 6, 8, 8}}, {l, []any{"N", 5}}}
		}, "fc"},
		{"conv head [N,10,1,1] is a vector", func(b *onnxbuild.Builder, x string) []out {
			c := b.Conv(x, 3, 6, 3, 1, 1)
			h := b.GlobalAveragePool(b.Conv(c, 6, 10, 1, 1, 0))
			return []out{{c, []any{"N", 6, 8, 8}}, {h, []any{"N", 10, 1, 1}}}
		}, "globalaveragepool"},
		{"no rule applies: the first", func(b *onnxbuild.Builder, x string) []out {
			f := b.Flatten(b.GlobalAveragePool(b.Conv(x, 3, 6, 3, 1, 1)))
			b.Node("Identity", []string{b.Gemm(f, 6, 8)}, []string{"a"})
			b.Node("Identity", []string{b.Gemm(f, 6, 5)}, []string{"b"})
			return []out{{"a", []any{"N", 8}}, {"b", []any{"N", 5}}}
		}, "a"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			b := onnxbuild.New(13, onnxbuild.Zeros)
			x := b.Input("image", onnxbuild.Float, "N", 3, 8, 8)
			for _, o := range c.make(b, x) {
				b.Output(o.name, o.dims...)
			}
			m := build(t, b)
			i, why := m.ScoreOutput()
			got := m.Outputs[i].Name
			if len(got) < len(c.want) || got[:len(c.want)] != c.want || why == "" {
				t.Errorf("ScoreOutput = %q (%s), want %s…", got, why, c.want)
			}
		})
	}
}
