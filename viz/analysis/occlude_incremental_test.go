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
	"encoding/binary"
	"image"
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

// occlusionPair runs Occlude both ways and compares them.
func occlusionPair(t *testing.T, m *modelio.Model, set viz.OcclusionSettings, targets []int, force int) {
	t.Helper()
	s := newSession(t, m, infer.Options{Capture: OcclusionCapture(m)})
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
	// Twice: the second call runs the sub-models' sessions the first kept
	// with s (infer.Session.Keep), and must give the same heatmap.
	for call := range 2 {
		if call == 1 {
			t.Logf("%s: second call, on the kept sub-model sessions", m.Name)
		}
		compareIncremental(t, m, s, cfg, img, set, targets, force, ref)
	}
}

// compareIncremental runs Occlude incrementally and compares it with ref.
func compareIncremental(t *testing.T, m *modelio.Model, s *infer.Session, cfg prep.Config, img *image.NRGBA,
	set viz.OcclusionSettings, targets []int, force int, ref []*viz.Occlusion) {
	t.Helper()
	ctx := context.Background()
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
	if got[0].Method != viz.MethodIncremental && force > 0 {
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

// heScale rescales the builder's uniform [-0.5, 0.5) weights of
// convolutions ([out, in, kh, kw]) and fully connected layers ([out, in])
// to He et al.'s uniform initialisation, bound sqrt(6 / fan-in) ("Delving
// Deep into Rectifiers", ICCV 2015), and biases to a tenth, so that
// normalisation scales near 1, so that activations stay near 1 through a
// deep network, as in a trained one.
// Unscaled, a ResNet-18 reaches logits near 1e7, where float32 rounds to
// whole units and any two correct ways to sum differ by more than the
// heatmap's own tolerance.
func heScale(b *onnxbuild.Builder) {
	for _, t := range b.Graph.Initializer {
		d := t.GetDims()
		raw := t.GetRawData()
		if t.GetDataType() != onnxbuild.Float || len(raw) == 0 {
			continue
		}
		var f float64
		switch len(d) {
		case 4:
			f = 2 * math.Sqrt(6/float64(d[1]*d[2]*d[3]))
		case 2:
			f = 2 * math.Sqrt(6/float64(d[1]))
		case 1:
			switch {
			case strings.HasSuffix(t.GetName(), "_var"):
				continue
			case strings.HasSuffix(t.GetName(), "_scale"):
				// A normalisation's scale near 1: 1 + v/5.
				for i := 0; i+4 <= len(raw); i += 4 {
					v := math.Float32frombits(binary.LittleEndian.Uint32(raw[i:]))
					binary.LittleEndian.PutUint32(raw[i:], math.Float32bits(1+v/5))
				}
				continue
			}
			f = 0.2
		default:
			continue
		}
		for i := 0; i+4 <= len(raw); i += 4 {
			v := math.Float32frombits(binary.LittleEndian.Uint32(raw[i:]))
			binary.LittleEndian.PutUint32(raw[i:], math.Float32bits(float32(float64(v)*f)))
		}
	}
}

// calmLogits scales the last fully connected layer by f, so that a random
// network's class scores are a few units apart, as a trained classifier's
// are, instead of saturating the softmax.
func calmLogits(b *onnxbuild.Builder, f float32) {
	last := b.Graph.Node[len(b.Graph.Node)-1]
	for _, t := range b.Graph.Initializer {
		if len(last.Input) < 2 || (t.GetName() != last.Input[1] && (len(last.Input) < 3 || t.GetName() != last.Input[2])) {
			continue
		}
		raw := t.GetRawData()
		for i := 0; i+4 <= len(raw); i += 4 {
			v := math.Float32frombits(binary.LittleEndian.Uint32(raw[i:]))
			binary.LittleEndian.PutUint32(raw[i:], math.Float32bits(v*f))
		}
	}
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
	testkit.NeedRuntime(t)
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

// The random ResNet-18 and VGG-16 are far less sensitive to a patch than a
// trained network: their heatmaps are a few hundredths where a trained
// network's reach tenths, and float32 rounding of the class scores
// (identical ways of summing differ in the last bit, 6e-8 near 0.5) would
// then approach the tolerance. A large black patch gives them a heatmap of
// the size a trained network has.

func TestIncrementalResNet18(t *testing.T) {
	testkit.NeedRuntime(t)
	b := onnxbuild.ResNet18(onnxbuild.Random, "N", 10)
	heScale(b)
	calmLogits(b, 0.03)
	m := buildModel(t, b, "resnet18")
	occlusionPair(t, m, viz.OcclusionSettings{Patch: 80, Stride: 72, Fill: viz.FillZero}, []int{-1}, 99)
	occlusionPair(t, m, viz.OcclusionSettings{Patch: 75, Stride: 70, Fill: viz.FillZero}, []int{-1}, 3)
}

func TestIncrementalVGG16(t *testing.T) {
	testkit.NeedRuntime(t)
	b := onnxbuild.VGG16(onnxbuild.Random, "N", 10)
	heScale(b)
	calmLogits(b, 0.03)
	m := buildModel(t, b, "vgg16")
	occlusionPair(t, m, viz.OcclusionSettings{Patch: 80, Stride: 72, Fill: viz.FillZero}, []int{-1}, 99)
}

// TestIncrementalDepthwise: depthwise (one group per channel) and dilated
// convolutions, as in MobileNet (Howard et al. 2017).
func TestIncrementalDepthwise(t *testing.T) {
	testkit.NeedRuntime(t)
	b := onnxbuild.New(13, onnxbuild.Random)
	x := b.Input("image", onnxbuild.Float, "N", 3, 48, 48)
	x = b.Relu(b.Conv(x, 3, 8, 3, 1, 1))
	x = b.Relu(b.ConvWith(x, onnxbuild.ConvSpec{In: 8, Out: 8, K: 3, Stride: 2, Pad: 1, Group: 8}))
	x = b.Relu(b.Conv(x, 8, 16, 1, 1, 0))
	x = b.Relu(b.ConvWith(x, onnxbuild.ConvSpec{In: 16, Out: 16, K: 3, Pad: 2, Dilation: 2, Group: 16}))
	x = b.MaxPool(x, 2, 2, 0)
	x = b.Relu(b.Conv(x, 16, 16, 3, 1, 1))
	b.Output(b.Gemm(b.Flatten(b.GlobalAveragePool(x)), 16, 5))
	heScale(b)
	m := buildModel(t, b, "depthwise")
	occlusionPair(t, m, viz.OcclusionSettings{Patch: 6, Stride: 5, Score: viz.ScoreLogit}, []int{-1, 2}, 99)
	// The measured choice (crops on the first chunk, full maps on the
	// second, then the cheaper mix), whichever it picks, is exact too.
	defer func(old float64) { incrementalMinSaved = old }(incrementalMinSaved)
	incrementalMinSaved = 0
	occlusionPair(t, m, viz.OcclusionSettings{Patch: 4, Stride: 1, Score: viz.ScoreLogit}, []int{-1}, -1)
}

// TestIncrementalConcat: branches concatenated along the channels, as in
// an Inception module (Szegedy et al. 2015).
func TestIncrementalConcat(t *testing.T) {
	testkit.NeedRuntime(t)
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
	// A final Softmax: the logit and log-probability scores read the
	// logits before it, which the rest of the network must return too.
	b.Output(b.Softmax(b.Gemm(b.Flatten(b.GlobalAveragePool(x)), 16, 5)))
	heScale(b)
	m := buildModel(t, b, "concat")
	occlusionPair(t, m, viz.OcclusionSettings{Patch: 5, Stride: 3, Fill: viz.FillMean, Score: viz.ScoreLogit}, nil, 99)
	occlusionPair(t, m, viz.OcclusionSettings{Patch: 5, Stride: 3, Score: viz.ScoreLogProb}, nil, 1)
}

// TestIncrementalNHWC: an input in height-width-channel order, transposed
// by the model, on a non-square image with odd sizes.
func TestIncrementalNHWC(t *testing.T) {
	testkit.NeedRuntime(t)
	b := onnxbuild.New(13, onnxbuild.Random)
	x := b.Input("image", onnxbuild.Float, "N", 37, 45, 3)
	x = b.Op("Transpose", []string{x}, onnxbuild.Ints("perm", 0, 3, 1, 2))
	x = b.Relu(b.Conv(x, 3, 8, 5, 2, 2))
	x = b.Relu(b.Conv(x, 8, 8, 3, 1, 1))
	x = b.MaxPool(x, 2, 2, 0)
	x = b.Relu(b.Conv(x, 8, 8, 3, 1, 1))
	b.Output(b.Gemm(b.Flatten(b.GlobalAveragePool(x)), 8, 5))
	heScale(b)
	m := buildModel(t, b, "nhwc")
	if m.Image == nil || m.Image.Layout != "nhwc" {
		t.Fatalf("the test model's input is not read as NHWC: %+v", m.Image)
	}
	occlusionPair(t, m, viz.OcclusionSettings{Patch: 7, Stride: 5, Fill: viz.FillBlur, Score: viz.ScoreLogit}, nil, 99)
}
