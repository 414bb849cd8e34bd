package viz

import (
	"fmt"
	"image"
	"strconv"

	xdraw "golang.org/x/image/draw"
)

// HeatOptions control RenderOcclusion. The zero value is usable: automatic
// zoom, opacity 0.6, a scale shared by the panels, no captions.
type HeatOptions struct {
	// Opacity of the colours over the image, in [0, 1]; 0 means 0.6.
	Opacity float64
	// Scale is the score drawn at the ends of the colour map (±Scale); 0
	// means the largest |score| of all panels, so that they compare.
	Scale float64
	// Captions writes each panel's class label and probability under it.
	Captions bool
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

// RenderOcclusion draws occlusion results side by side over the image they
// were computed on: each panel is base, enlarged, with the scores upsampled
// bilinearly and coloured by OverlayScores, all panels on one scale, one
// colour bar in the scores' unit ("drop in probability" or "drop in logit")
// below them, then the settings and the package's Caution (a heatmap is
// easy to over-read). Two targets side by side
// answer "why this class and not that one".
//
// base must be the image the model saw (prep.Fit's result): occ[i].Width ×
// occ[i].Height pixels. It panics, naming the problem, when occ is empty,
// when base's size differs from the results', when the results mix score
// kinds, sizes or positions that cannot share a picture, or when Opacity is
// outside [0, 1]: mistakes of the caller, not conditions of the data.
func RenderOcclusion(base image.Image, occ []*Occlusion, o HeatOptions) *image.NRGBA {
	img, _ := renderOcclusion(base, occ, o)
	return img
}

// renderOcclusion is RenderOcclusion returning also where each panel's
// image lies in the picture.
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
	opacity := o.Opacity
	if opacity == 0 {
		opacity = 0.6
	}
	if !(opacity >= 0 && opacity <= 1) {
		panic(fmt.Sprintf("viz: RenderOcclusion: opacity %v is outside 0..1", o.Opacity))
	}
	scale := o.Scale
	if !(scale > 0) {
		scale = ScoreScale(grids...)
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
	width := 2*heatMargin + len(occ)*pw + (len(occ)-1)*heatGap
	width = max(width, 2*heatMargin+heatMinBar)
	inner := width - 2*heatMargin
	r0 := occ[0]
	text := fmt.Sprintf("Patch %d px, stride %d px, %s fill. %s", r0.Patch, r0.Stride, r0.Fill, Caution)
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

	x0 := heatMargin + (inner-(len(occ)*pw+(len(occ)-1)*heatGap))/2
	rects := make([]image.Rectangle, len(occ))
	for i, r := range occ {
		panel := OverlayScores(big, r.Scores, scaled(r.Ys), scaled(r.Xs), r.Patch*zoom, scale, opacity)
		at := image.Pt(x0+i*(pw+heatGap), heatMargin)
		paste(img, panel, at)
		rects[i] = image.Rectangle{at, at.Add(image.Pt(pw, ph))}
		if o.Captions {
			label := r.Label
			if label == "" {
				label = "class " + strconv.Itoa(r.Target)
			} else {
				label += " (" + strconv.Itoa(r.Target) + ")"
			}
			y := heatMargin + ph + 6
			DrawText(img, at.X, y, fitText(label, pw, heatLabelStyle), heatLabelStyle)
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
			DrawText(img, at.X, y+labelH+2, fitText(prob, pw, heatProbStyle), heatProbStyle)
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
