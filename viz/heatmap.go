package viz

import (
	"fmt"
	"math"
)

// The data an occlusion heatmap is drawn from. The analysis that computes it
// (package fovea/viz/analysis, which drives a model session) fills these
// values; RenderOcclusion draws them. They live here, with the drawing, so
// that drawing needs no model runtime.

// Fill is what replaces the pixels under the patch. The values are chosen on
// the 0–1 pixel scale, before the model's own normalisation (range,
// mean/std, channel order), so "grey" means the same picture whatever the
// model expects. The string is the spelling on the command line and in JSON.
type Fill string

// The fills.
const (
	// FillGrey is 0.5 in every channel: a mid-grey square, as in Zeiler &
	// Fergus 2014 ("occluding ... with a grey square").
	FillGrey Fill = "grey"
	// FillMean is the per-channel mean of the whole image (not of the patch),
	// so the patch carries no edge and no texture but the image's own colour.
	FillMean Fill = "mean"
	// FillBlur is the same region of a Gaussian-blurred copy of the image,
	// sigma = Patch/4 pixels (imaging.Blur; edges extended): detail smaller
	// than the patch is removed while colour and coarse shading stay.
	FillBlur Fill = "blur"
	// FillZero is 0 on the 0–1 pixel scale, that is black, before
	// normalisation (after it, the value is -Mean/Std, not necessarily 0).
	FillZero Fill = "zero"
)

// Fills lists the fills in the order a menu shows them.
var Fills = []Fill{FillGrey, FillMean, FillBlur, FillZero}

// Score is what is compared with and without the patch. The string is the
// spelling on the command line and in JSON.
type Score string

// The scores.
const (
	// ScoreProbability compares the target's softmax probability (or the
	// model's own output when that already is a probability distribution).
	// Bounded to 0–1, it reads directly as "how sure", but saturates: a
	// model that is 99.99 % sure moves it by millionths.
	ScoreProbability Score = "probability"
	// ScoreLogit compares the target's logit: the model's raw output, or,
	// when the output is made by a Softmax (or LogSoftmax) over the classes,
	// that node's input. It is refused only when the model has no such
	// tensor (its output is already a distribution and no class softmax
	// produces it).
	ScoreLogit Score = "logit"
	// ScoreLogProb compares the target's log-probability, log p: the
	// log-softmax of the logits in float64 when the model has logits, the
	// logarithm of its output probabilities otherwise. Defined for every
	// model; it stays readable near 0 and near 1, and unlike the logit it
	// also counts what the patch did to the other classes.
	ScoreLogProb Score = "logprob"
)

// Scores lists the scores in the order a menu shows them.
var Scores = []Score{ScoreProbability, ScoreLogit, ScoreLogProb}

// OcclusionSettings are the knobs of an occlusion run. The zero Fill means
// FillGrey and the zero Score means ScoreProbability; Patch and Stride have no
// default and must be positive.
type OcclusionSettings struct {
	Patch, Stride int   // side of the square patch and step between positions, in input pixels
	Fill          Fill  // FillGrey, FillMean, FillBlur or FillZero
	Score         Score // ScoreProbability, ScoreLogit or ScoreLogProb
	// NoReuse runs every occluded image through the whole model even where
	// incremental occlusion (which reuses the clean image's activations
	// and gives the same scores) would be faster.
	NoReuse bool
}

// Occlusion methods (Occlusion.Method).
const (
	// MethodEveryImage runs every occluded image through the whole model.
	MethodEveryImage = "every-image"
	// MethodIncremental runs the clean image once and, for each position,
	// recomputes only the part of the early activation maps that the patch
	// can change.
	MethodIncremental = "incremental"
)

// Occlusion is the result of one occlusion run for one target class.
type Occlusion struct {
	OcclusionSettings
	Target int
	Label  string // the target's label; Occlude leaves it empty (the session knows no labels), callers fill it from Model.Labels
	// Base is the target's score (probability, logit or log-probability,
	// per Score) on the unoccluded image.
	Base float64
	// Source is the tensor the score was read from: the model's score
	// output, or the logits that a class softmax turns into it.
	Source string
	// SourceNote says, for a person, how the score was computed from
	// Source: "softmax of output \"z\"", "input of Softmax node \"sm\"", ...
	SourceNote string
	// Logits names the tensor a logit score would read ("" when the model
	// has none); NoLogits says why there is none. They let a caption offer
	// the logit score when the probability saturates.
	Logits, NoLogits string
	// Probability is the target's probability on the unoccluded image,
	// whatever Score is (for captions).
	Probability float64
	// Ys and Xs are the top-left corners of the patch positions in input
	// pixels, increasing. The last one of each is clamped so that the patch
	// ends at the image's border: every pixel is covered by some position.
	Ys, Xs []int
	// Scores[i][j] is Base minus the score with the patch at (Ys[i], Xs[j]):
	// positive where hiding the region lowered the target's score, negative
	// where it raised it.
	Scores        [][]float64
	Width, Height int // the image's size in pixels (the model's input size)
	// Method is how the scores were computed (MethodEveryImage or
	// MethodIncremental; both give the same scores) and MethodWhy why.
	Method, MethodWhy string
}

// Unit is the unit of the scores, for legends: "drop in probability",
// "drop in logit" or "drop in log-probability".
func (o *Occlusion) Unit() string {
	switch o.Score {
	case ScoreLogit:
		return "drop in logit"
	case ScoreLogProb:
		return "drop in log-probability"
	}
	return "drop in probability"
}

// Saturation thresholds: a probability this close to 0 or 1 is saturated,
// and drops below a hundredth of the probability's 0–1 range show nothing a
// person can read (common practice; the softmax's slope p(1−p) is below
// 0.001 there).
const (
	SaturatedAbove = 0.999
	SaturatedBelow = 0.001
	SaturatedDrop  = 0.01
)

// Saturated reports whether a probability heatmap says little because the
// model is sure: the target's probability on the clean image is above
// SaturatedAbove or below SaturatedBelow and the largest absolute drop is
// under SaturatedDrop (1 % of the 0–1 range). Other scores never saturate
// this way.
func (o *Occlusion) Saturated() bool {
	if o.Score != ScoreProbability && o.Score != "" {
		return false
	}
	if !(o.Probability > SaturatedAbove || o.Probability < SaturatedBelow) {
		return false
	}
	m := 0.0
	for _, row := range o.Scores {
		for _, v := range row {
			m = math.Max(m, math.Abs(v))
		}
	}
	return m < SaturatedDrop
}

// Suggested is the score to switch to when Saturated: the logit when the
// model has logits, else the log-probability.
func (o *Occlusion) Suggested() Score {
	if o.Logits != "" {
		return ScoreLogit
	}
	return ScoreLogProb
}

// SaturationNote is the warning shown beside a saturated heatmap, "" when
// Saturated is false.
func (o *Occlusion) SaturationNote() string {
	if !o.Saturated() {
		return ""
	}
	m := 0.0
	for _, row := range o.Scores {
		for _, v := range row {
			m = math.Max(m, math.Abs(v))
		}
	}
	how := fmt.Sprintf("score %s (the logits, tensor %q) shows what the patches change", ScoreLogit, o.Logits)
	if o.Logits == "" {
		how = fmt.Sprintf("score %s shows what the patches change (the model has no logits: %s)", ScoreLogProb, o.NoLogits)
	}
	name := fmt.Sprintf("class %d", o.Target)
	if o.Label != "" {
		name = fmt.Sprintf("%s (%d)", o.Label, o.Target)
	}
	return fmt.Sprintf("Saturated: the model gives %s probability %s, so hiding a patch moves it by at most %s; %s.",
		name, formatProbability(o.Probability), fmtG(m), how)
}

// PatchPositions returns the top-left corners of a patch of side patch moved
// by stride over a side of n pixels: 0, stride, 2·stride, ... and, when the
// last of those does not end at n, one more at n-patch. Example: n = 64,
// patch = 12, stride = 8 gives 0, 8, ..., 48, 52.
func PatchPositions(n, patch, stride int) []int {
	var p []int
	for x := 0; x+patch <= n; x += stride {
		p = append(p, x)
	}
	if last := p[len(p)-1]; last+patch < n {
		p = append(p, n-patch)
	}
	return p
}
