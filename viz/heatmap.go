package viz

// The data an occlusion heatmap is drawn from. The analysis that computes it
// (package fovea/viz/analysis, which drives a model session) fills these
// values; RenderOcclusion draws them. They live here, with the drawing, so
// that drawing needs no model runtime.

// Occlusion fills: what replaces the pixels under the patch. The values are
// chosen on the 0–1 pixel scale, before the model's own normalisation (range,
// mean/std, channel order), so "grey" means the same picture whatever the
// model expects.
const (
	// FillGrey is 0.5 in every channel: a mid-grey square, as in Zeiler &
	// Fergus 2014 ("occluding ... with a grey square").
	FillGrey = "grey"
	// FillMean is the per-channel mean of the whole image (not of the patch),
	// so the patch carries no edge and no texture but the image's own colour.
	FillMean = "mean"
	// FillBlur is the same region of a Gaussian-blurred copy of the image,
	// sigma = Patch/4 pixels (imaging.Blur; edges extended): detail smaller
	// than the patch is removed while colour and coarse shading stay.
	FillBlur = "blur"
	// FillZero is 0 on the 0–1 pixel scale, that is black, before
	// normalisation (after it, the value is -Mean/Std, not necessarily 0).
	FillZero = "zero"
)

// Occlusion scores: what is compared with and without the patch.
const (
	// ScoreProbability compares the target's softmax probability (or the
	// model's own output when that already is a probability distribution).
	ScoreProbability = "probability"
	// ScoreLogit compares the model's raw output for the target. It is
	// refused when the model's output is already a probability distribution.
	ScoreLogit = "logit"
)

// OcclusionSettings are the knobs of an occlusion run. The zero Fill means
// FillGrey and the zero Score means ScoreProbability; Patch and Stride have no
// default and must be positive.
type OcclusionSettings struct {
	Patch, Stride int    // side of the square patch and step between positions, in input pixels
	Fill          string // FillGrey, FillMean, FillBlur or FillZero
	Score         string // ScoreProbability or ScoreLogit
}

// Occlusion is the result of one occlusion run for one target class.
type Occlusion struct {
	OcclusionSettings
	Target int
	Label  string // the target's label; Occlude leaves it empty (the session knows no labels), callers fill it from Model.Labels
	// Base is the target's score (probability or logit, per Score) on the
	// unoccluded image.
	Base float64
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
}

// Unit is the unit of the scores, for legends: "drop in probability" or
// "drop in logit".
func (o *Occlusion) Unit() string {
	if o.Score == ScoreLogit {
		return "drop in logit"
	}
	return "drop in probability"
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
