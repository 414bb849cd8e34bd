package analysis

// Exactness of incremental occlusion. The expected heatmap is the one every
// occluded image run through the whole model gives (Occlude with NoReuse,
// whose scores TestOcclusionWeightedSquare checks against values worked out
// by hand from the weights); the method of Nakandala, Kumar &
// Papakonstantinou (SIGMOD 2019) is exact, so the two must agree within
// float32 rounding: 1e-5 of the map's largest absolute value (the
// tolerance the project set for this method). The target class and the
// unoccluded score must be the same bits.

import (
	"context"
	"math"
	"testing"

	"fovea/modelio"
	"fovea/modelio/infer"
	"fovea/modelio/onnxbuild"
	"fovea/modelio/prep"
	"fovea/viz"
)

// occlusionPair runs Occlude both ways and compares them.
func occlusionPair(t *testing.T, m *modelio.Model, set viz.OcclusionSettings, targets []int, force int) {
	t.Helper()
	s := newSession(t, m, infer.Options{})
	cfg := prep.Guess(m)
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	img := prep.Fit(testImage(cfg.Width, cfg.Height, 7), cfg)
	ctx := context.Background()
	refSet := set
	refSet.NoReuse = true
	ref, err := Occlude(ctx, s, cfg, img, refSet, targets, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer func(old int) { incrementalForce = old }(incrementalForce)
	incrementalForce = force
	var calls, last int
	got, err := Occlude(ctx, s, cfg, img, set, targets, func(done, total int) {
		calls++
		if done < last || done > total {
			t.Errorf("progress %d of %d after %d", done, total, last)
		}
		last = done
	})
	if err != nil {
		t.Fatal(err)
	}
	if want := len(ref[0].Ys)*len(ref[0].Xs) + 1; last != want {
		t.Errorf("progress ended at %d, want %d", last, want)
	}
	if ref[0].Method != viz.MethodEveryImage {
		t.Errorf("NoReuse ran %q", ref[0].Method)
	}
	if got[0].Method != viz.MethodIncremental {
		t.Fatalf("%s: method %q (%s), want incremental", m.Name, got[0].Method, got[0].MethodWhy)
	}
	t.Logf("%s: %s", m.Name, got[0].MethodWhy)
	for i := range ref {
		r, g := ref[i], got[i]
		if r.Target != g.Target || math.Float64bits(r.Base) != math.Float64bits(g.Base) ||
			math.Float64bits(r.Probability) != math.Float64bits(g.Probability) {
			t.Errorf("target %d/%d base %v/%v probability %v/%v: must be the same bits", r.Target, g.Target, r.Base, g.Base, r.Probability, g.Probability)
		}
		var big, worst float64
		for _, row := range r.Scores {
			for _, v := range row {
				big = math.Max(big, math.Abs(v))
			}
		}
		for y := range r.Scores {
			for x := range r.Scores[y] {
				worst = math.Max(worst, math.Abs(r.Scores[y][x]-g.Scores[y][x]))
			}
		}
		if big == 0 {
			t.Errorf("%s: the reference heatmap is all zero: the test shows nothing", m.Name)
		}
		if worst > 1e-5*big {
			t.Errorf("%s target %d: largest difference %.3g, above 1e-5 of the map's largest |value| %.3g", m.Name, r.Target, worst, big)
		}
		t.Logf("%s fill %s: largest difference %.3g of max %.3g", m.Name, set.Fill, worst, big)
	}
}

// withoutSoftmax removes a final Softmax so that logits can be scored.
func withoutSoftmax(b *onnxbuild.Builder) {
	g := b.Graph
	last := g.Node[len(g.Node)-1]
	if last.GetOpType() != "Softmax" {
		return
	}
	g.Node = g.Node[:len(g.Node)-1]
	g.Output[0].Name = last.Input[0]
}

func buildModel(t *testing.T, b *onnxbuild.Builder, name string) *modelio.Model {
	t.Helper()
	path := t.TempDir() + "/" + name + ".onnx"
	if err := b.Write(path); err != nil {
		t.Fatal(err)
	}
	m, err := modelio.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

func TestIncrementalDemo(t *testing.T) {
	initRuntime(t)
	m, err := modelio.Open(benchDemoFile)
	if err != nil {
		t.Fatal(err)
	}
	for _, fill := range []viz.Fill{viz.FillGrey, viz.FillMean, viz.FillBlur, viz.FillZero} {
		occlusionPair(t, m, viz.OcclusionSettings{Patch: 8, Stride: 4, Fill: fill}, []int{-1, 3}, 99)
	}
	// Odd patch and stride: the last positions are clamped to the border.
	occlusionPair(t, m, viz.OcclusionSettings{Patch: 7, Stride: 5}, nil, 99)
	occlusionPair(t, m, viz.OcclusionSettings{Patch: 11, Stride: 9, Score: viz.ScoreLogit}, nil, 1)
}

func TestIncrementalResNet18(t *testing.T) {
	initRuntime(t)
	b := onnxbuild.ResNet18(onnxbuild.Random, "N", 10)
	m := buildModel(t, b, "resnet18")
	occlusionPair(t, m, viz.OcclusionSettings{Patch: 32, Stride: 64, Score: viz.ScoreLogit}, []int{-1}, 99)
	occlusionPair(t, m, viz.OcclusionSettings{Patch: 29, Stride: 61, Score: viz.ScoreLogit}, []int{-1}, 3)
}

func TestIncrementalVGG16(t *testing.T) {
	if testing.Short() {
		t.Skip("builds a 553 MB model")
	}
	initRuntime(t)
	b := onnxbuild.VGG16(onnxbuild.Random, "N", 10)
	withoutSoftmax(b)
	m := buildModel(t, b, "vgg16")
	occlusionPair(t, m, viz.OcclusionSettings{Patch: 32, Stride: 64, Score: viz.ScoreLogit}, []int{-1}, 99)
}

// TestIncrementalDepthwise: depthwise (one group per channel) and dilated
// convolutions, as in MobileNet (Howard et al. 2017).
func TestIncrementalDepthwise(t *testing.T) {
	initRuntime(t)
	b := onnxbuild.New(13, onnxbuild.Random)
	x := b.Input("image", onnxbuild.Float, "N", 3, 48, 48)
	x = b.Relu(b.Conv(x, 3, 8, 3, 1, 1))
	x = b.Relu(b.ConvWith(x, onnxbuild.ConvSpec{In: 8, Out: 8, K: 3, Stride: 2, Pad: 1, Group: 8}))
	x = b.Relu(b.Conv(x, 8, 16, 1, 1, 0))
	x = b.Relu(b.ConvWith(x, onnxbuild.ConvSpec{In: 16, Out: 16, K: 3, Pad: 2, Dilation: 2, Group: 16}))
	x = b.MaxPool(x, 2, 2, 0)
	x = b.Relu(b.Conv(x, 16, 16, 3, 1, 1))
	b.Output(b.Gemm(b.Flatten(b.GlobalAveragePool(x)), 16, 5))
	m := buildModel(t, b, "depthwise")
	occlusionPair(t, m, viz.OcclusionSettings{Patch: 6, Stride: 5, Score: viz.ScoreLogit}, []int{-1, 2}, 99)
}

// TestIncrementalConcat: branches concatenated along the channels, as in
// an Inception module (Szegedy et al. 2015).
func TestIncrementalConcat(t *testing.T) {
	initRuntime(t)
	b := onnxbuild.New(13, onnxbuild.Random)
	x := b.Input("image", onnxbuild.Float, "N", 3, 40, 40)
	a := b.Relu(b.Conv(x, 3, 8, 3, 1, 1))
	b1 := b.Relu(b.Conv(a, 8, 4, 1, 1, 0))
	b2 := b.Relu(b.Conv(a, 8, 4, 3, 1, 1))
	b3 := b.MaxPool(a, 3, 1, 1)
	x = b.Op("Concat", []string{b1, b2, b3}, onnxbuild.Int("axis", 1))
	x = b.Relu(b.Conv(x, 16, 16, 3, 2, 1))
	x = b.AveragePool(x, 2, 2, 0)
	x = b.Relu(b.Conv(x, 16, 16, 3, 1, 1))
	b.Output(b.Gemm(b.Flatten(b.GlobalAveragePool(x)), 16, 5))
	m := buildModel(t, b, "concat")
	occlusionPair(t, m, viz.OcclusionSettings{Patch: 5, Stride: 3, Fill: viz.FillMean, Score: viz.ScoreLogit}, nil, 99)
}

// TestIncrementalNHWC: an input in height-width-channel order, transposed
// by the model, on a non-square image with odd sizes.
func TestIncrementalNHWC(t *testing.T) {
	initRuntime(t)
	b := onnxbuild.New(13, onnxbuild.Random)
	x := b.Input("image", onnxbuild.Float, "N", 37, 45, 3)
	x = b.Op("Transpose", []string{x}, onnxbuild.Ints("perm", 0, 3, 1, 2))
	x = b.Relu(b.Conv(x, 3, 8, 5, 2, 2))
	x = b.Relu(b.Conv(x, 8, 8, 3, 1, 1))
	x = b.MaxPool(x, 2, 2, 0)
	x = b.Relu(b.Conv(x, 8, 8, 3, 1, 1))
	b.Output(b.Gemm(b.Flatten(b.GlobalAveragePool(x)), 8, 5))
	m := buildModel(t, b, "nhwc")
	if m.Image == nil || m.Image.Layout != "nhwc" {
		t.Fatalf("the test model's input is not read as NHWC: %+v", m.Image)
	}
	occlusionPair(t, m, viz.OcclusionSettings{Patch: 7, Stride: 5, Fill: viz.FillBlur, Score: viz.ScoreLogit}, nil, 99)
}
