package viz

import (
	"fmt"
	"image"
	"math"
	"strconv"

	xdraw "golang.org/x/image/draw"
)

// HeatOptions control RenderOcclusion. The zero value is usable: automatic
// zoom, a scale shared by the panels, lines at half the scale over the
// image in colour, no captions.
type HeatOptions struct {
	// Scale is the score drawn at the ends of the colour map (±Scale); 0
	// means the largest |score| of all panels, so that they compare.
	Scale float64
	// Level is the score at which the lines over the image are drawn (±Level);
	// 0 means half the scale.
	Level float64
	// Grey draws the image under the lines in grey (BT.601 luma) instead of
	// in colour. Colour is the default: it can be the very cue that decides
	// between two classes.
	Grey bool
	// Captions writes each panel's class label and probability under it.
	Captions bool
	// NoCaution leaves the package's Caution out of the notes under the
	// picture, for a caller that shows it once beside the picture (the
	// window does); a picture that is saved or shared keeps it.
	NoCaution bool
	// Zoom enlarges the image by this whole factor (nearest neighbour, so
	// the model's pixels stay visible); 0 picks the smallest factor that
	// makes the larger side at least 256 pixels.
	Zoom int
}

// Layout of the occlusion picture, in pixels.
const (
	heatMargin  = 12
	heatGap     = 16
	heatBarH    = 56
	heatMinSide = 256
	heatMinBar  = 240
)

var (
	heatLabelStyle = TextStyle{Size: 14, Bold: true}
	heatProbStyle  = TextStyle{Size: 12}
	heatNoteStyle  = TextStyle{Size: 11, Color: inkMuted}
)

// RenderOcclusion draws occlusion results side by side, one pair of
// pictures per result: on the left the heatmap alone, each pixel exactly
// the colour of its score on the colour bar (HeatScores), on the right the
// image the model saw, in colour unless Grey, with lines where the score
// reaches ±Level (ContourScores: solid orange for +Level, dashed blue for
// −Level). All heatmaps share one scale; one colour bar in the scores' unit
// ("drop in probability", …) lies below them, then a line saying where the
// lines are drawn, the settings and the package's Caution (a heatmap is easy
// to over-read). Two targets side by side answer "why this class and not
// that one".
//
// base must be the image the model saw (prep.Fit's result): occ[i].Width ×
// occ[i].Height pixels. It panics, naming the problem, when occ is empty,
// when base's size differs from the results', or when the results mix
// score kinds, sizes or positions that cannot share a picture: mistakes of
// the caller, not conditions of the data.
func RenderOcclusion(base image.Image, occ []*Occlusion, o HeatOptions) *image.NRGBA {
	img, _ := renderOcclusion(base, occ, o)
	return img
}

// renderOcclusion is RenderOcclusion returning also where each panel lies
// in the picture: the heatmaps first (one per result), then the images
// with lines, in the same order.
func renderOcclusion(base image.Image, occ []*Occlusion, o HeatOptions) (*image.NRGBA, []image.Rectangle) {
	if len(occ) == 0 {
		panic("viz: RenderOcclusion: no occlusion results")
	}
	if base == nil {
		panic("viz: RenderOcclusion: nil image")
	}
	w, h := base.Bounds().Dx(), base.Bounds().Dy()
	var grids [][][]float64
	for i, r := range occ {
		if r == nil {
			panic(fmt.Sprintf("viz: RenderOcclusion: result %d is nil", i))
		}
		if r.Width != w || r.Height != h {
			panic(fmt.Sprintf("viz: RenderOcclusion: image is %d×%d but result %d was computed on %d×%d", w, h, i, r.Width, r.Height))
		}
		if r.Score != occ[0].Score {
			panic(fmt.Sprintf("viz: RenderOcclusion: results mix %q and %q scores, which share no scale", occ[0].Score, r.Score))
		}
		grids = append(grids, r.Scores)
	}
	scale := o.Scale
	if !(scale > 0) {
		scale = ScoreScale(grids...)
	}
	level := o.Level
	if !(level > 0) {
		level = scale / 2
	}
	zoom := o.Zoom
	if zoom <= 0 {
		zoom = max(1, (heatMinSide+max(w, h)-1)/max(w, h))
	}
	pw, ph := w*zoom, h*zoom
	if int64(pw)*int64(ph)*int64(len(occ)) > MaxPixels {
		panic(fmt.Sprintf("viz: RenderOcclusion: %d panels of %d×%d exceed %d pixels", len(occ), pw, ph, MaxPixels))
	}

	// The image enlarged once; each panel overlays its own scores on it,
	// with positions scaled alike: a patch centre y + (p−1)/2 in the model's
	// pixels lies at zoom·y + (zoom·p − 1)/2 in the enlarged ones.
	big := flatten(base, Light)
	if zoom > 1 {
		big = image.NewNRGBA(image.Rect(0, 0, pw, ph))
		xdraw.NearestNeighbor.Scale(big, big.Rect, base, base.Bounds(), xdraw.Src, nil)
	}
	scaled := func(p []int) []int {
		out := make([]int, len(p))
		for i, v := range p {
			out[i] = v * zoom
		}
		return out
	}

	_, labelH := TextSize("Ag", heatLabelStyle)
	_, probH := TextSize("Ag", heatProbStyle)
	_, noteH := TextSize("Ag", heatNoteStyle)
	captionH := 0
	if o.Captions {
		captionH = 6 + labelH + 2 + probH
	}
	// One pair per result: heatmap, a small gap, the image with lines.
	const pairGap = 6
	pairW := 2*pw + pairGap
	width := 2*heatMargin + len(occ)*pairW + (len(occ)-1)*heatGap
	width = max(width, 2*heatMargin+heatMinBar)
	inner := width - 2*heatMargin
	r0 := occ[0]
	text := fmt.Sprintf("Left of each pair: the %s, each colour read on the bar. Right: the image the model saw, with lines where it reaches %s (solid) and %s (dashed). Patch %d px, stride %d px, %s fill.",
		r0.Unit(), levelLabel(level, scale), levelLabel(-level, scale), r0.Patch, r0.Stride, r0.Fill)
	if !o.NoCaution {
		text += " " + Caution
	}
	for _, r := range occ {
		// Beside the heatmap it concerns: a saturated probability says
		// little, and the note says what to score instead.
		if note := r.SaturationNote(); note != "" {
			text = note + " " + text
			break
		}
	}
	notes := wrapText(text, inner, heatNoteStyle)
	height := heatMargin + ph + captionH + heatGap + heatBarH + 8 + len(notes)*noteH + heatMargin
	img := mustCanvas("occlusion picture", width, height, Light)

	x0 := heatMargin + (inner-(len(occ)*pairW+(len(occ)-1)*heatGap))/2
	rects := make([]image.Rectangle, 2*len(occ))
	for i, r := range occ {
		ys, xs, p := scaled(r.Ys), scaled(r.Xs), r.Patch*zoom
		at := image.Pt(x0+i*(pairW+heatGap), heatMargin)
		paste(img, HeatScores(pw, ph, r.Scores, ys, xs, p, scale), at)
		rects[i] = image.Rectangle{at, at.Add(image.Pt(pw, ph))}
		on := at.Add(image.Pt(pw+pairGap, 0))
		paste(img, ContourScores(big, r.Scores, ys, xs, p, level, max(3, zoom), o.Grey), on)
		rects[len(occ)+i] = image.Rectangle{on, on.Add(image.Pt(pw, ph))}
		if o.Captions {
			label := r.Label
			if label == "" {
				label = "class " + strconv.Itoa(r.Target)
			} else {
				label += " (" + strconv.Itoa(r.Target) + ")"
			}
			y := heatMargin + ph + 6
			DrawText(img, at.X, y, fitText(label, pairW, heatLabelStyle), heatLabelStyle)
			ps := formatProbability(r.Probability)
			prob := "p = " + ps
			if ps[0] == '<' || ps[0] == '>' {
				prob = "p " + ps // "p < 0.001", not "p = < 0.001"
			}
			switch r.Score {
			case ScoreLogit:
				prob += ", logit " + fmtG(r.Base)
			case ScoreLogProb:
				prob += ", log p " + fmtG(r.Base)
			}
			DrawText(img, at.X, y+labelH+2, fitText(prob, pairW, heatProbStyle), heatProbStyle)
		}
	}
	y := heatMargin + ph + captionH + heatGap
	paste(img, ColorBar(inner, heatBarH, -scale, scale, r0.Unit(), Diverging), image.Pt(heatMargin, y))
	y += heatBarH + 8
	for _, line := range notes {
		DrawText(img, heatMargin, y, line, heatNoteStyle)
		y += noteH
	}
	return img, rects
}

// levelLabel writes a line level in the colour bar's number format.
func levelLabel(v, scale float64) string {
	if math.Abs(v) >= 1e5 || math.Abs(v) < 1e-3 {
		return sciLabel(v, 2)
	}
	dec := 2 - int(math.Floor(math.Log10(math.Abs(scale))))
	return formatFixed(v, max(dec, 0))
}

// OcclusionPair draws one result the way RenderOcclusion draws each: the
// heatmap alone (HeatScores at ±scale) and, 6 pixels to its right, base
// with lines at ±scale/2 (ContourScores, in colour unless grey), both
// enlarged zoom times (nearest neighbour; zoom < 1 means 1). base must be
// the image the model saw, r.Width × r.Height pixels; scale ≤ 0 means the
// result's largest |score|. It panics on the mistakes RenderOcclusion
// panics on.
func OcclusionPair(base image.Image, r *Occlusion, scale float64, zoom int, grey bool) *image.NRGBA {
	if r == nil || base == nil {
		panic("viz: OcclusionPair: nil result or image")
	}
	zoom = max(1, zoom)
	w, h := base.Bounds().Dx(), base.Bounds().Dy()
	if r.Width != w || r.Height != h {
		panic(fmt.Sprintf("viz: OcclusionPair: image is %d×%d but the result was computed on %d×%d", w, h, r.Width, r.Height))
	}
	if !(scale > 0) {
		scale = ScoreScale(r.Scores)
	}
	pw, ph := w*zoom, h*zoom
	big := flatten(base, Light)
	if zoom > 1 {
		big = image.NewNRGBA(image.Rect(0, 0, pw, ph))
		xdraw.NearestNeighbor.Scale(big, big.Rect, base, base.Bounds(), xdraw.Src, nil)
	}
	scaled := func(p []int) []int {
		out := make([]int, len(p))
		for i, v := range p {
			out[i] = v * zoom
		}
		return out
	}
	ys, xs, p := scaled(r.Ys), scaled(r.Xs), r.Patch*zoom
	out := mustCanvas("occlusion pair", 2*pw+6, ph, Light)
	paste(out, HeatScores(pw, ph, r.Scores, ys, xs, p, scale), image.Point{})
	paste(out, ContourScores(big, r.Scores, ys, xs, p, scale/2, max(3, zoom), grey), image.Pt(pw+6, 0))
	return out
}
