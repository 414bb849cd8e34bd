package analysis

import (
	"context"
	"fmt"
	"image"
	"math"

	"github.com/disintegration/imaging"

	"fovea/modelio"
	"fovea/modelio/infer"
	"fovea/modelio/prep"
	"fovea/viz"
)

// check validates the settings for an image of w×h pixels and fills in the
// defaults.
func checkSettings(set *viz.OcclusionSettings, w, h int) error {
	switch set.Fill {
	case "":
		set.Fill = viz.FillGrey
	case viz.FillGrey, viz.FillMean, viz.FillBlur, viz.FillZero:
	default:
		return fmt.Errorf("viz: occlusion: unknown fill %q (want %s, %s, %s or %s)", set.Fill, viz.FillGrey, viz.FillMean, viz.FillBlur, viz.FillZero)
	}
	switch set.Score {
	case "":
		set.Score = viz.ScoreProbability
	case viz.ScoreProbability, viz.ScoreLogit, viz.ScoreLogProb:
	default:
		return fmt.Errorf("viz: occlusion: unknown score %q (want %s, %s or %s)", set.Score, viz.ScoreProbability, viz.ScoreLogit, viz.ScoreLogProb)
	}
	if set.Patch <= 0 {
		return fmt.Errorf("viz: occlusion: patch size %d: must be at least 1 pixel", set.Patch)
	}
	if set.Stride <= 0 {
		return fmt.Errorf("viz: occlusion: stride %d: must be at least 1 pixel", set.Stride)
	}
	if set.Patch > w || set.Patch > h {
		return fmt.Errorf("viz: occlusion: patch of %d pixels is larger than the %d×%d image", set.Patch, w, h)
	}
	return nil
}

// fillPlanes returns the [3][H][W] planes (0..1) whose values replace the
// pixels under the patch.
func fillPlanes(img *image.NRGBA, planes []float32, set viz.OcclusionSettings) []float32 {
	out := make([]float32, len(planes))
	n := len(planes) / 3
	switch set.Fill {
	case viz.FillGrey:
		for i := range out {
			out[i] = 0.5
		}
	case viz.FillMean:
		for c := 0; c < 3; c++ {
			var sum float64
			for _, v := range planes[c*n : (c+1)*n] {
				sum += float64(v)
			}
			m := float32(sum / float64(n))
			for i := c * n; i < (c+1)*n; i++ {
				out[i] = m
			}
		}
	case viz.FillBlur:
		out = prep.Planes(imaging.Blur(img, float64(set.Patch)/4))
	case viz.FillZero:
		// already zero
	}
	return out
}

// layoutCopier copies the patch region of one image from src to dst, both
// single images in the model's input layout.
type layoutCopier struct {
	nhwc    bool
	c, h, w int
	patch   int
}

func (lc layoutCopier) copy(dst, src []float32, y0, x0 int) {
	p := lc.patch
	if lc.nhwc {
		for y := y0; y < y0+p; y++ {
			o := (y*lc.w + x0) * lc.c
			copy(dst[o:o+p*lc.c], src[o:o+p*lc.c])
		}
		return
	}
	for ch := 0; ch < lc.c; ch++ {
		for y := y0; y < y0+p; y++ {
			o := ch*lc.h*lc.w + y*lc.w + x0
			copy(dst[o:o+p], src[o:o+p])
		}
	}
}

// Occlude measures how much the model's score for each target class drops
// when a square patch hides part of img (Zeiler & Fergus, "Visualizing and
// Understanding Convolutional Networks", ECCV 2014, section 4.2).
//
// img must already be fitted to the model's input (prep.Fit with c). The
// unoccluded tensor is built once; every occluded image is that tensor with
// only the patch region overwritten by the fill's normalised values, so the
// fill goes through exactly the same normalisation as the image. Images go
// through s in batches of s.BatchSize(); all targets share the same runs.
// A target of -1 means the class the model predicts for the unoccluded
// image; nil targets mean {-1}.
//
// progress, when not nil, is called with the number of images run so far
// (the unoccluded one included) and the total. When ctx is cancelled Occlude
// returns ctx.Err() promptly (after the batch in flight); it starts no
// goroutines.
//
// The result is evidence about one model on one image, not proof of what the
// model "looks at" in general.
func Occlude(ctx context.Context, s *infer.Session, c prep.Config, img *image.NRGBA, set viz.OcclusionSettings,
	targets []int, progress func(done, total int)) ([]*viz.Occlusion, error) {
	if img == nil {
		return nil, fmt.Errorf("viz: occlusion: no image")
	}
	if err := c.Validate(); err != nil {
		return nil, fmt.Errorf("viz: occlusion: %w", err)
	}
	w, h := img.Bounds().Dx(), img.Bounds().Dy()
	if w != c.Width || h != c.Height {
		return nil, fmt.Errorf("viz: occlusion: image is %d×%d but the model's input is %d×%d (fit it with prep.Fit first)", w, h, c.Width, c.Height)
	}
	if err := checkSettings(&set, w, h); err != nil {
		return nil, err
	}
	if len(targets) == 0 {
		targets = []int{-1}
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}

	size := c.Channels * h * w
	planes := prep.Planes(img)
	base := make([]float32, size)
	c.Tensor(planes, base)
	fill := make([]float32, size)
	c.Tensor(fillPlanes(img, planes, set), fill)

	ys := viz.PatchPositions(h, set.Patch, set.Stride)
	xs := viz.PatchPositions(w, set.Patch, set.Stride)
	total := len(ys)*len(xs) + 1
	report := func(done int) {
		if progress != nil {
			progress(done, total)
		}
	}
	report(0)

	// The unoccluded image runs alone first: its scores resolve "predicted"
	// and let bad targets fail before the long part.
	res, err := s.Run(ctx, base, 1)
	if err != nil {
		if ctx.Err() != nil {
			return nil, ctx.Err()
		}
		return nil, fmt.Errorf("viz: occlusion: %w", err)
	}
	rows, err := scoreRows(res, 1)
	if err != nil {
		return nil, err
	}
	k := len(rows[0])
	sc, err := newScorer(s.Model(), res, set.Score)
	if err != nil {
		return nil, err
	}
	probs := sc.probs(res, 0)
	scores := sc.score(res, 0)
	out := make([]*viz.Occlusion, len(targets))
	for i, t := range targets {
		if t == -1 {
			t = argmax(rows[0])
		}
		if t < 0 || t >= k {
			return nil, fmt.Errorf("viz: occlusion: target class %d out of range: the model has %d classes (0..%d)", targets[i], k, k-1)
		}
		o := &viz.Occlusion{OcclusionSettings: set, Target: t, Probability: probs[t], Base: scores[t],
			Source: sc.source, SourceNote: sc.note, Logits: sc.logitName, NoLogits: sc.noLogit,
			Ys: ys, Xs: xs, Width: w, Height: h, Scores: make([][]float64, len(ys))}
		for r := range o.Scores {
			o.Scores[r] = make([]float64, len(xs))
		}
		out[i] = o
	}
	report(1)

	// score records the scores of position p from image i of a run.
	score := func(p int, res *infer.Result, i int) error {
		if row := res.Scores(i); len(row) != k {
			return fmt.Errorf("viz: occlusion: the model returned %d scores for an occluded image but %d for the original", len(row), k)
		}
		v := sc.score(res, i)
		for _, o := range out {
			o.Scores[p/len(xs)][p%len(xs)] = o.Base - v[o.Target]
		}
		return nil
	}

	// Dispatch: incremental occlusion where the model has something to
	// gain and its graph can be cut, every occluded image otherwise.
	method, why := viz.MethodEveryImage, "asked for (no reuse)"
	if !set.NoReuse {
		inc, reason, err := newIncremental(ctx, s, set, base, fill, ys, xs)
		if err != nil {
			return nil, err
		}
		if inc != nil {
			defer inc.close()
			if err := inc.rows(ctx, score, func(done int) { report(1 + done) }); err != nil {
				if ctx.Err() != nil {
					return nil, ctx.Err()
				}
				return nil, fmt.Errorf("viz: occlusion: %w", err)
			}
			method, why = viz.MethodIncremental, inc.why
			if inc.k == 0 {
				method = viz.MethodEveryImage
			}
			for _, o := range out {
				o.Method, o.MethodWhy = method, why
			}
			return out, nil
		}
		why = reason
	}
	for _, o := range out {
		o.Method, o.MethodWhy = method, why
	}

	// Batch slots hold the base tensor with at most one patch applied; the
	// previous patch is restored from base before the next one is written,
	// so each image costs two patch copies instead of a full tensor.
	bs := max(1, s.BatchSize())
	npos := len(ys) * len(xs)
	bs = min(bs, npos)
	buf := make([]float32, bs*size)
	for i := 0; i < bs; i++ {
		copy(buf[i*size:(i+1)*size], base)
	}
	prev := make([][2]int, bs)
	for i := range prev {
		prev[i] = [2]int{-1, -1}
	}
	lc := layoutCopier{nhwc: c.Layout == modelio.LayoutNHWC, c: c.Channels, h: h, w: w, patch: set.Patch}
	for start := 0; start < npos; start += bs {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		n := min(bs, npos-start)
		for i := 0; i < n; i++ {
			slot := buf[i*size : (i+1)*size]
			if prev[i][0] >= 0 {
				lc.copy(slot, base, prev[i][0], prev[i][1])
			}
			p := start + i
			y, x := ys[p/len(xs)], xs[p%len(xs)]
			lc.copy(slot, fill, y, x)
			prev[i] = [2]int{y, x}
		}
		res, err = s.RunInto(ctx, buf[:n*size], n, res)
		if err != nil {
			if ctx.Err() != nil {
				return nil, ctx.Err()
			}
			return nil, fmt.Errorf("viz: occlusion: %w", err)
		}
		rows, err := scoreRows(res, n)
		if err != nil {
			return nil, err
		}
		for i := range rows {
			if err := score(start+i, res, i); err != nil {
				return nil, err
			}
		}
		report(1 + start + n)
	}
	return out, nil
}

// scoreRows returns the class scores of each of the n images of a run
// (Result.Scores: the model's score output).
func scoreRows(res *infer.Result, n int) ([][]float32, error) {
	rows := make([][]float32, n)
	for i := range rows {
		rows[i] = res.Scores(i)
		if len(rows[i]) == 0 {
			return nil, fmt.Errorf("viz: occlusion: the model returned no class scores")
		}
	}
	return rows, nil
}

// softmax returns exp(v_i - max v) / sum_j exp(v_j - max v), in float64.
func softmax(v []float32) []float64 {
	m := math.Inf(-1)
	for _, x := range v {
		m = math.Max(m, float64(x))
	}
	p := make([]float64, len(v))
	var sum float64
	for i, x := range v {
		p[i] = math.Exp(float64(x) - m)
		sum += p[i]
	}
	for i := range p {
		p[i] /= sum
	}
	return p
}

func argmax(v []float32) int {
	best := 0
	for i, x := range v {
		if x > v[best] || math.IsNaN(float64(v[best])) {
			best = i
		}
	}
	return best
}
