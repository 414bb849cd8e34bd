package analysis

import (
	"context"
	"errors"
	"fmt"
	"image"
	"math"
	"runtime"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/disintegration/imaging"

	"fovea/modelio"
	"fovea/modelio/infer"
	"fovea/modelio/prep"
	"fovea/viz"
)

func TestOcclusionPositions(t *testing.T) {
	// Positions step by the stride from 0 and the last one is clamped so the
	// patch ends at the border (common practice for sliding windows; the
	// 64/12/8 case is the example of the task).
	for _, c := range []struct {
		n, patch, stride int
		want             []int
	}{
		{64, 12, 8, []int{0, 8, 16, 24, 32, 40, 48, 52}},
		{20, 5, 4, []int{0, 4, 8, 12, 15}},
		{12, 4, 4, []int{0, 4, 8}}, // fits exactly: nothing added
		{10, 3, 3, []int{0, 3, 6, 7}},
		{16, 16, 3, []int{0}}, // patch as large as the image
		{5, 1, 1, []int{0, 1, 2, 3, 4}},
		{9, 2, 20, []int{0, 7}}, // stride larger than the image
	} {
		got := viz.PatchPositions(c.n, c.patch, c.stride)
		if !slices.Equal(got, c.want) {
			t.Errorf("viz.PatchPositions(%d, %d, %d) = %v, want %v", c.n, c.patch, c.stride, got, c.want)
		}
	}
}

// Test model for occlusion: the score of class k is
//
//	s_k = bias_k + sum over the pixels (c, y, x) of class k's square of w_k(c, y, x)·in(c, y, x)
//
// where in is the normalised input tensor: a weighted sum of the pixels
// inside a known square, as Flatten + Gemm (ONNX Operators.md, Gemm:
// Y = A·B + C) with hand-set weights. Class 2 has no weights at all.
const (
	occW, occH, occK = 20, 16, 3
)

type square struct{ y0, x0, side int }

var occSquares = [occK]square{{4, 6, 6}, {10, 1, 4}, {0, 0, 0}}
var occBias = [occK]float64{0.5, -0.25, -3}

// occWeight is w_k(c, y, x): zero outside class k's square, a small
// pattern of positive and negative values inside it.
func occWeight(k, c, y, x int) float64 {
	s := occSquares[k]
	if y < s.y0 || y >= s.y0+s.side || x < s.x0 || x >= s.x0+s.side {
		return 0
	}
	return 0.01 * float64((y*7+x*3+c*5+k)%9-3)
}

// occModel builds the model in the given layout ("nchw" or "nhwc").
func occModel(t *testing.T, layout string) *modelio.Model {
	dims := []int64{1, 3, occH, occW}
	if layout == "nhwc" {
		dims = []int64{1, occH, occW, 3}
	}
	b := newGraph("occlusion_" + layout)
	b.input("image", dims...)
	weights := make([]float32, 3*occH*occW*occK)
	for c := 0; c < 3; c++ {
		for y := 0; y < occH; y++ {
			for x := 0; x < occW; x++ {
				row := c*occH*occW + y*occW + x
				if layout == "nhwc" {
					row = (y*occW+x)*3 + c
				}
				for k := 0; k < occK; k++ {
					weights[row*occK+k] = float32(occWeight(k, c, y, x))
				}
			}
		}
	}
	b.init("w", weights, 3*occH*occW, occK)
	b.init("b", []float32{float32(occBias[0]), float32(occBias[1]), float32(occBias[2])}, occK)
	b.node("Flatten", "flatten", []string{"image"}, []string{"flat"}, attrInt("axis", 1))
	b.node("Gemm", "gemm", []string{"flat", "w", "b"}, []string{"scores"})
	b.output("scores", 1, occK)
	return b.model(t)
}

func occConfig(layout string) prep.Config {
	return prep.Config{Width: occW, Height: occH, Channels: 3, Resize: "stretch", Range: "0-1",
		Mean: [3]float32{0.1, 0.2, 0.3}, Std: [3]float32{0.5, 0.25, 2}, Layout: modelio.Layout(layout)}
}

// testImage is a deterministic w×h picture with varied colours (a linear
// congruential generator, Numerical Recipes constants).
func testImage(w, h int, seed uint32) *image.NRGBA {
	img := image.NewNRGBA(image.Rect(0, 0, w, h))
	v := seed
	for i := 0; i < len(img.Pix); i += 4 {
		for j := 0; j < 3; j++ {
			v = v*1664525 + 1013904223
			img.Pix[i+j] = uint8(v >> 24)
		}
		img.Pix[i+3] = 255
	}
	return img
}

// expectedScores computes, with plain loops and without the code under
// test, the class scores of the model for img with a patch of the given fill
// at (py, px); py < 0 means no patch. The normalisation is prep's documented
// one for Range "0-1": out = (p - Mean[c]) / Std[c], p = sample/255.
func expectedScores(img *image.NRGBA, cfg prep.Config, set viz.OcclusionSettings, py, px int) [occK]float64 {
	pix := func(im *image.NRGBA, c, y, x int) float64 {
		return float64(im.Pix[y*im.Stride+x*4+c]) / 255
	}
	var mean [3]float64
	for c := 0; c < 3; c++ {
		for y := 0; y < occH; y++ {
			for x := 0; x < occW; x++ {
				mean[c] += pix(img, c, y, x)
			}
		}
		mean[c] /= occW * occH
	}
	var blurred *image.NRGBA
	if set.Fill == viz.FillBlur {
		// The documented blur: Gaussian, sigma = patch/4, by imaging.Blur.
		blurred = imaging.Blur(img, float64(set.Patch)/4)
	}
	var s [occK]float64
	for k := 0; k < occK; k++ {
		s[k] = occBias[k]
		for c := 0; c < 3; c++ {
			for y := 0; y < occH; y++ {
				for x := 0; x < occW; x++ {
					p := pix(img, c, y, x)
					if py >= 0 && y >= py && y < py+set.Patch && x >= px && x < px+set.Patch {
						switch set.Fill {
						case viz.FillGrey:
							p = 0.5
						case viz.FillZero:
							p = 0
						case viz.FillMean:
							p = mean[c]
						case viz.FillBlur:
							p = pix(blurred, c, y, x)
						}
					}
					in := (p - float64(cfg.Mean[c])) / float64(cfg.Std[c])
					s[k] += occWeight(k, c, y, x) * in
				}
			}
		}
	}
	return s
}

func softmax64(s [occK]float64) [occK]float64 {
	m := math.Max(s[0], math.Max(s[1], s[2]))
	var sum float64
	var p [occK]float64
	for k := range s {
		p[k] = math.Exp(s[k] - m)
		sum += p[k]
	}
	for k := range p {
		p[k] /= sum
	}
	return p
}

func TestOcclusionWeightedSquare(t *testing.T) {
	img := testImage(occW, occH, 7)
	for _, layout := range []string{"nchw", "nhwc"} {
		m := occModel(t, layout)
		s := newSession(t, m, infer.Options{})
		cfg := occConfig(layout)
		for _, set := range []viz.OcclusionSettings{
			{Patch: 5, Stride: 4, Fill: viz.FillGrey, Score: viz.ScoreLogit},
			{Patch: 3, Stride: 2, Fill: viz.FillZero, Score: viz.ScoreLogit},
			{Patch: 4, Stride: 3, Fill: viz.FillMean, Score: viz.ScoreLogit},
			{Patch: 6, Stride: 5, Fill: viz.FillBlur, Score: viz.ScoreLogit},
			{Patch: 5, Stride: 4, Fill: viz.FillGrey, Score: viz.ScoreProbability},
			{Patch: 16, Stride: 1, Fill: viz.FillGrey, Score: viz.ScoreProbability},
		} {
			name := fmt.Sprintf("%s/%+v", layout, set)
			var calls, lastDone, lastTotal int
			occ, err := Occlude(context.Background(), s, cfg, img, set, []int{0, 1, 2, -1}, func(done, total int) {
				calls++
				if done < lastDone {
					t.Errorf("%s: progress went back from %d to %d", name, lastDone, done)
				}
				lastDone, lastTotal = done, total
			})
			if err != nil {
				t.Fatalf("%s: %v", name, err)
			}
			if len(occ) != 4 {
				t.Fatalf("%s: %d results for 4 targets", name, len(occ))
			}
			base := expectedScores(img, cfg, set, -1, -1)
			pred := 0
			for k := range base {
				if base[k] > base[pred] {
					pred = k
				}
			}
			if occ[3].Target != pred {
				t.Errorf("%s: target -1 resolved to %d, the highest score is class %d", name, occ[3].Target, pred)
			}
			// One run for the unoccluded image and one per position, shared
			// by all four targets.
			npos := len(occ[0].Ys) * len(occ[0].Xs)
			if lastDone != lastTotal || lastTotal != npos+1 {
				t.Errorf("%s: progress ended at %d/%d, want %d/%d", name, lastDone, lastTotal, npos+1, npos+1)
			}
			for i, o := range occ {
				k := o.Target
				if o.Width != occW || o.Height != occH || o.Patch != set.Patch || o.Fill != set.Fill || o.Score != set.Score {
					t.Errorf("%s: result settings %+v, size %dx%d", name, o.OcclusionSettings, o.Width, o.Height)
				}
				if !slices.Equal(o.Ys, viz.PatchPositions(occH, set.Patch, set.Stride)) || !slices.Equal(o.Xs, viz.PatchPositions(occW, set.Patch, set.Stride)) {
					t.Errorf("%s: positions %v × %v", name, o.Ys, o.Xs)
				}
				wantBase, wantProb := base[k], softmax64(base)[k]
				if set.Score == viz.ScoreProbability {
					wantBase = wantProb
				}
				if math.Abs(o.Base-wantBase) > 1e-5 || math.Abs(o.Probability-wantProb) > 1e-5 {
					t.Errorf("%s target %d: base %g probability %g, want %g %g", name, k, o.Base, o.Probability, wantBase, wantProb)
				}
				if len(o.Scores) != len(o.Ys) {
					t.Fatalf("%s: %d score rows for %d ys", name, len(o.Scores), len(o.Ys))
				}
				for yi, y := range o.Ys {
					if len(o.Scores[yi]) != len(o.Xs) {
						t.Fatalf("%s: row %d has %d scores for %d xs", name, yi, len(o.Scores[yi]), len(o.Xs))
					}
					for xi, x := range o.Xs {
						occl := expectedScores(img, cfg, set, y, x)
						want := base[k] - occl[k]
						if set.Score == viz.ScoreProbability {
							want = softmax64(base)[k] - softmax64(occl)[k]
						}
						// Tolerance 1e-5: float32 arithmetic in the runtime
						// over at most 108 products of magnitude < 0.2.
						if got := o.Scores[yi][xi]; math.Abs(got-want) > 1e-5 {
							t.Errorf("%s target %d (#%d) at y=%d x=%d: %.7f, want %.7f", name, k, i, y, x, got, want)
						}
					}
				}
			}
			// A patch that never touches class 0's square leaves its logit
			// alone: the drop is 0 (Zeiler & Fergus 2014: only occluding the
			// evidence changes the score). Checked without the reference.
			if set.Score == viz.ScoreLogit {
				sq := occSquares[0]
				o := occ[0]
				touched := 0
				for yi, y := range o.Ys {
					for xi, x := range o.Xs {
						disjoint := y+set.Patch <= sq.y0 || y >= sq.y0+sq.side || x+set.Patch <= sq.x0 || x >= sq.x0+sq.side
						if !disjoint {
							touched++
							continue
						}
						if v := o.Scores[yi][xi]; math.Abs(v) > 1e-5 {
							t.Errorf("%s: patch at y=%d x=%d misses the square but scores %g", name, y, x, v)
						}
					}
				}
				if touched == 0 {
					t.Errorf("%s: no position touches the square: the check above proved nothing", name)
				}
				// Class 2 has no weights: no patch changes its logit.
				for _, row := range occ[2].Scores {
					for _, v := range row {
						if math.Abs(v) > 1e-5 {
							t.Errorf("%s: class without weights scores %g", name, v)
						}
					}
				}
			}
		}
	}
}

func TestOcclusionErrors(t *testing.T) {
	m := occModel(t, "nchw")
	s := newSession(t, m, infer.Options{})
	cfg := occConfig("nchw")
	img := testImage(occW, occH, 3)
	for _, c := range []struct {
		set     viz.OcclusionSettings
		targets []int
		img     *image.NRGBA
		want    string
	}{
		{viz.OcclusionSettings{Patch: 17, Stride: 1}, nil, img, "larger than the 20×16 image"},
		{viz.OcclusionSettings{Patch: 21, Stride: 1}, nil, img, "larger than"},
		{viz.OcclusionSettings{Patch: 4, Stride: 0}, nil, img, "stride 0"},
		{viz.OcclusionSettings{Patch: 4, Stride: -2}, nil, img, "stride -2"},
		{viz.OcclusionSettings{Patch: 0, Stride: 2}, nil, img, "patch size 0"},
		{viz.OcclusionSettings{Patch: 4, Stride: 2}, []int{3}, img, "target class 3 out of range: the model has 3 classes"},
		{viz.OcclusionSettings{Patch: 4, Stride: 2}, []int{0, -2}, img, "target class -2 out of range"},
		{viz.OcclusionSettings{Patch: 4, Stride: 2, Fill: "pink"}, nil, img, `unknown fill "pink"`},
		{viz.OcclusionSettings{Patch: 4, Stride: 2, Score: "odds"}, nil, img, `unknown score "odds"`},
		{viz.OcclusionSettings{Patch: 4, Stride: 2}, nil, testImage(occW+1, occH, 3), "image is 21×16 but the model's input is 20×16"},
		{viz.OcclusionSettings{Patch: 4, Stride: 2}, nil, nil, "no image"},
	} {
		occ, err := Occlude(context.Background(), s, cfg, c.img, c.set, c.targets, nil)
		if err == nil || !strings.Contains(err.Error(), c.want) || !strings.HasPrefix(err.Error(), "viz: ") {
			t.Errorf("%+v targets %v: error %v, want one containing %q", c.set, c.targets, err, c.want)
		}
		if occ != nil {
			t.Errorf("%+v: result beside the error", c.set)
		}
	}
}

// TestOcclusionLogitOfProbabilities: a model ending in Softmax has its
// logits before the Softmax; a session that did not capture them
// (OcclusionCapture) cannot score them, and says so rather than scoring a
// probability silently.
func TestOcclusionLogitOfProbabilities(t *testing.T) {
	b := newGraph("softmax_out")
	b.input("image", 1, 3, 4, 4)
	b.init("w", make([]float32, 48*2), 48, 2)
	b.init("b", []float32{0.3, -0.3}, 2)
	b.node("Flatten", "flatten", []string{"image"}, []string{"flat"}, attrInt("axis", 1))
	b.node("Gemm", "gemm", []string{"flat", "w", "b"}, []string{"logits"})
	b.node("Softmax", "softmax", []string{"logits"}, []string{"prob"}, attrInt("axis", 1))
	b.output("prob", 1, 2)
	m := b.model(t)
	s := newSession(t, m, infer.Options{})
	cfg := prep.Config{Width: 4, Height: 4, Channels: 3, Resize: "stretch", Range: "0-1", Std: [3]float32{1, 1, 1}, Layout: "nchw"}
	img := testImage(4, 4, 1)
	_, err := Occlude(context.Background(), s, cfg, img, viz.OcclusionSettings{Patch: 2, Stride: 2, Score: viz.ScoreLogit}, nil, nil)
	if !errors.Is(err, ErrNoLogits) || !strings.Contains(err.Error(), "not captured") {
		t.Errorf("logit of a softmax output: error %v", err)
	}
	// Probability mode takes the model's probabilities as they are: the
	// weights are zero, so every drop is 0 and the base is softmax(0.3,
	// -0.3)[0] = 1/(1+e^-0.6) (by hand).
	occ, err := Occlude(context.Background(), s, cfg, img, viz.OcclusionSettings{Patch: 2, Stride: 2}, []int{0}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if want := 1 / (1 + math.Exp(-0.6)); math.Abs(occ[0].Base-want) > 1e-6 {
		t.Errorf("base %g, want %g", occ[0].Base, want)
	}
	for _, row := range occ[0].Scores {
		for _, v := range row {
			if math.Abs(v) > 1e-6 {
				t.Errorf("zero weights, drop %g", v)
			}
		}
	}
}

// waitGoroutines polls until the number of goroutines is back to at most n
// (the runtime may take a moment to retire finished ones).
func waitGoroutines(t *testing.T, n int) {
	t.Helper()
	deadline := time.Now().Add(3 * time.Second)
	for runtime.NumGoroutine() > n {
		if time.Now().After(deadline) {
			buf := make([]byte, 1<<16)
			t.Fatalf("%d goroutines, want at most %d:\n%s", runtime.NumGoroutine(), n, buf[:runtime.Stack(buf, true)])
		}
		time.Sleep(10 * time.Millisecond)
	}
}

func TestOcclusionCancel(t *testing.T) {
	m := occModel(t, "nchw")
	s := newSession(t, m, infer.Options{})
	cfg := occConfig("nchw")
	img := testImage(occW, occH, 5)
	// Warm the session up so that anything it keeps for good exists before
	// the goroutines are counted.
	if _, err := Occlude(context.Background(), s, cfg, img, viz.OcclusionSettings{Patch: 8, Stride: 8}, nil, nil); err != nil {
		t.Fatal(err)
	}
	before := runtime.NumGoroutine()

	// Cancelled before the start: nothing runs.
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := Occlude(ctx, s, cfg, img, viz.OcclusionSettings{Patch: 2, Stride: 1}, nil, nil); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled before the start: %v", err)
	}

	// Cancelled from the progress callback after the first batch: the run
	// stops at the next batch boundary, far from the end.
	ctx, cancel = context.WithCancel(context.Background())
	defer cancel()
	var after, total int
	occ, err := Occlude(ctx, s, cfg, img, viz.OcclusionSettings{Patch: 2, Stride: 1}, nil, func(done, n int) {
		total = n
		if done > 1 && ctx.Err() == nil {
			cancel()
		}
		if ctx.Err() != nil {
			after++
		}
	})
	if !errors.Is(err, context.Canceled) || occ != nil {
		t.Errorf("cancelled run: %v, %v", occ, err)
	}
	if after > 1 {
		t.Errorf("%d progress calls after the cancel (of %d images): not prompt", after, total)
	}
	waitGoroutines(t, before)
}
