package analysis

import (
	"context"
	"errors"
	"math"
	"strings"
	"testing"

	"fovea/modelio"
	"fovea/modelio/infer"
	"fovea/modelio/onnxbuild"
	"fovea/modelio/prep"
	"fovea/modelio/testkit"
	"fovea/viz"
)

// headNet builds image [N,3,8,8] → Conv 3→4 (3×3, pad 1) → Relu →
// GlobalAveragePool → Flatten → Gemm 4→5 → head → output "out", with the
// builder's seeded weights: every head gets the same network before it, so
// the tensors before the head are the same numbers. A nil head leaves the
// Gemm's logits as the output.
func headNet(t *testing.T, head func(b *onnxbuild.Builder, z string) string) *modelio.Model {
	t.Helper()
	b := onnxbuild.New(13, onnxbuild.Random)
	x := b.Input("image", onnxbuild.Float, "N", 3, 8, 8)
	z := b.Gemm(b.Flatten(b.GlobalAveragePool(b.Relu(b.Conv(x, 3, 4, 3, 1, 1)))), 4, 5)
	if head != nil {
		z = head(b, z)
	}
	b.Node("Identity", []string{z}, []string{"out"})
	b.Output("out")
	data, err := b.Bytes()
	if err != nil {
		t.Fatal(err)
	}
	m, err := modelio.Decode(data, "head.onnx")
	if err != nil {
		t.Fatal(err)
	}
	return m
}

func softmaxHead(op string) func(b *onnxbuild.Builder, z string) string {
	return func(b *onnxbuild.Builder, z string) string { return b.Op(op, []string{z}, onnxbuild.Int("axis", 1)) }
}

var headCfg = prep.Config{Width: 8, Height: 8, Channels: 3, Resize: "stretch", Range: "0-1", Std: [3]float32{1, 1, 1}, Layout: "nchw"}

// occludeAll runs Occlude on m for every one of its 5 classes, with a
// session that captures what OcclusionCapture asks for, as the app does.
func occludeAll(t *testing.T, m *modelio.Model, score viz.Score) ([]*viz.Occlusion, error) {
	t.Helper()
	s := newSession(t, m, infer.Options{Capture: OcclusionCapture(m)})
	set := viz.OcclusionSettings{Patch: 3, Stride: 2, Score: score}
	return Occlude(context.Background(), s, headCfg, testImage(8, 8, 7), set, []int{0, 1, 2, 3, 4}, nil)
}

// TestOcclusionLogitsBehindSoftmax: the logit heatmap of a network followed
// by a Softmax (or LogSoftmax) over the classes is the logit heatmap of the
// same network without it, bit for bit: both read the same Gemm output of
// ONNX Runtime, once as the model's output, once captured before the
// softmax. The log-probability heatmap is the drop in log-softmax of those
// logits, log p_i = z_i − log Σ_j exp z_j (Goodfellow, Bengio & Courville,
// Deep Learning, 2016, §6.2.2.3, from memory), computed here in float64
// without the max shift (these logits are below 10 in size, so no
// exponential overflows); tolerance 1e-12, float64 rounding of sums of five
// terms of size ≤ 10.
func TestOcclusionLogitsBehindSoftmax(t *testing.T) {
	testkit.NeedRuntime(t)
	plain := headNet(t, nil)
	ref, err := occludeAll(t, plain, viz.ScoreLogit)
	if err != nil {
		t.Fatal(err)
	}
	if ref[0].Source != "out" {
		t.Errorf("plain network scored %q, want its output", ref[0].Source)
	}
	// z[c][i][j]: the logit of class c with the patch at (i, j); base[c]
	// without a patch.
	z := func(c, i, j int) float64 { return ref[c].Base - ref[c].Scores[i][j] }
	logp := func(zs []float64, t int) float64 {
		var sum float64
		for _, v := range zs {
			sum += math.Exp(v)
		}
		return zs[t] - math.Log(sum)
	}
	for _, op := range []string{"Softmax", "LogSoftmax"} {
		m := headNet(t, softmaxHead(op))
		cs, err := m.ClassSoftmax("out")
		if err != nil {
			t.Fatalf("%s: %v", op, err)
		}
		got, err := occludeAll(t, m, viz.ScoreLogit)
		if err != nil {
			t.Fatalf("%s: %v", op, err)
		}
		for c := range got {
			if got[c].Source != cs.Logits || got[c].Logits != cs.Logits {
				t.Errorf("%s: scored %q (logits %q), want %q", op, got[c].Source, got[c].Logits, cs.Logits)
			}
			if got[c].Base != ref[c].Base {
				t.Errorf("%s class %d: base logit %v, without the %s %v", op, c, got[c].Base, op, ref[c].Base)
			}
			for i, row := range got[c].Scores {
				for j, v := range row {
					if v != ref[c].Scores[i][j] {
						t.Errorf("%s class %d at (%d,%d): drop %v, without the %s %v", op, c, i, j, v, op, ref[c].Scores[i][j])
					}
				}
			}
		}
		lp, err := occludeAll(t, m, viz.ScoreLogProb)
		if err != nil {
			t.Fatalf("%s logprob: %v", op, err)
		}
		base := []float64{ref[0].Base, ref[1].Base, ref[2].Base, ref[3].Base, ref[4].Base}
		for c := range lp {
			if want := logp(base, c); math.Abs(lp[c].Base-want) > 1e-12 {
				t.Errorf("%s class %d: base log p %v, want %v", op, c, lp[c].Base, want)
			}
			if !strings.Contains(lp[c].SourceNote, "log-softmax") || lp[c].Source != cs.Logits {
				t.Errorf("%s: logprob scored %q (%s)", op, lp[c].Source, lp[c].SourceNote)
			}
			for i, row := range lp[c].Scores {
				for j, v := range row {
					zs := []float64{z(0, i, j), z(1, i, j), z(2, i, j), z(3, i, j), z(4, i, j)}
					if want := logp(base, c) - logp(zs, c); math.Abs(v-want) > 1e-12 {
						t.Errorf("%s class %d at (%d,%d): drop in log p %v, want %v", op, c, i, j, v, want)
					}
				}
			}
		}
	}
}

// TestOcclusionNoLogits: a model whose output is a distribution made by
// something other than a class softmax (here a Softmax followed by a Mul by
// 1, which is not a shape-only step) has no logits: the logit score is
// refused with the reason, and logprob is the log of the output's
// probabilities, checked against the log of the probability heatmap's
// values (p = base − drop; tolerance 1e-9: p is recovered from a float64
// difference, and these probabilities are above 1e-3).
func TestOcclusionNoLogits(t *testing.T) {
	testkit.NeedRuntime(t)
	m := headNet(t, func(b *onnxbuild.Builder, z string) string {
		return b.Op("Mul", []string{softmaxHead("Softmax")(b, z), b.Init("one", []int64{1}, []float32{1})})
	})
	_, err := occludeAll(t, m, viz.ScoreLogit)
	if !errors.Is(err, ErrNoLogits) || !strings.Contains(err.Error(), "Mul") {
		t.Errorf("logit of a model without logits: %v", err)
	}
	p, err := occludeAll(t, m, viz.ScoreProbability)
	if err != nil {
		t.Fatal(err)
	}
	lp, err := occludeAll(t, m, viz.ScoreLogProb)
	if err != nil {
		t.Fatal(err)
	}
	for c := range lp {
		if lp[c].Source != "out" || !strings.Contains(lp[c].SourceNote, "log of output") || p[c].Logits != "" || p[c].NoLogits == "" {
			t.Errorf("class %d: logprob scored %q (%s); logits %q, %q", c, lp[c].Source, lp[c].SourceNote, p[c].Logits, p[c].NoLogits)
		}
		for i, row := range lp[c].Scores {
			for j, v := range row {
				want := math.Log(p[c].Base) - math.Log(p[c].Base-p[c].Scores[i][j])
				if math.Abs(v-want) > 1e-9 {
					t.Errorf("class %d at (%d,%d): drop in log p %v, want %v", c, i, j, v, want)
				}
			}
		}
	}
}

// TestOcclusionSaturation: a bias of 12 on class 0's logit makes the model
// sure (p > 0.999): the probability heatmap is flagged as saturated and
// suggests the logit score, whose heatmap is not flagged and shows drops
// at least 100 times larger (the softmax's slope p(1−p) < 1e-3 there).
func TestOcclusionSaturation(t *testing.T) {
	testkit.NeedRuntime(t)
	m := headNet(t, func(b *onnxbuild.Builder, z string) string {
		z = b.Add(z, b.Init("bias", []int64{5}, []float32{12, 0, 0, 0, 0}))
		return softmaxHead("Softmax")(b, z)
	})
	p, err := occludeAll(t, m, viz.ScoreProbability)
	if err != nil {
		t.Fatal(err)
	}
	if p[0].Probability <= 0.999 {
		t.Fatalf("the test model is not sure: p = %v", p[0].Probability)
	}
	if !p[0].Saturated() || p[0].Suggested() != viz.ScoreLogit || !strings.Contains(p[0].SaturationNote(), p[0].Logits) {
		t.Errorf("saturated %v, suggests %q: %q", p[0].Saturated(), p[0].Suggested(), p[0].SaturationNote())
	}
	l, err := occludeAll(t, m, viz.ScoreLogit)
	if err != nil {
		t.Fatal(err)
	}
	if l[0].Saturated() || l[0].SaturationNote() != "" {
		t.Errorf("logit heatmap flagged as saturated")
	}
	if lm, pm := viz.ScoreScale(l[0].Scores), viz.ScoreScale(p[0].Scores); !(lm > 100*pm) {
		t.Errorf("largest logit drop %g, probability drop %g", lm, pm)
	}
}
