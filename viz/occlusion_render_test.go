package viz

import (
	"bytes"
	"fmt"
	"image"
	"image/color"
	"math"
	"strings"
	"testing"
)

// fakeOcclusion is an occlusion result over a w×h image with every score
// set to v (no model: the picture only reads the numbers).
func fakeOcclusion(w, h, patch, stride int, v float64, target int, label string) *Occlusion {
	ys, xs := PatchPositions(h, patch, stride), PatchPositions(w, patch, stride)
	o := &Occlusion{OcclusionSettings: OcclusionSettings{Patch: patch, Stride: stride, Fill: FillGrey, Score: ScoreProbability},
		Target: target, Label: label, Base: 0.5, Probability: 0.5, Ys: ys, Xs: xs, Width: w, Height: h}
	for range ys {
		row := make([]float64, len(xs))
		for j := range row {
			row[j] = v
		}
		o.Scores = append(o.Scores, row)
	}
	return o
}

func uniformImage(w, h int, c color.NRGBA) *image.NRGBA {
	img := image.NewNRGBA(image.Rect(0, 0, w, h))
	fill(img, img.Rect, c)
	return img
}

// checkPanel asserts that every pixel of r in img has colour want.
func checkPanel(t *testing.T, what string, img *image.NRGBA, r image.Rectangle, want color.NRGBA) {
	t.Helper()
	bad := 0
	for y := r.Min.Y; y < r.Max.Y; y++ {
		for x := r.Min.X; x < r.Max.X; x++ {
			if got := img.NRGBAAt(x, y); !nearColour(got, want, 1) {
				if bad == 0 {
					t.Errorf("%s: pixel (%d,%d) = %v, want %v", what, x, y, got, want)
				}
				bad++
			}
		}
	}
	if bad > 1 {
		t.Errorf("%s: %d pixels differ", what, bad)
	}
}

func TestRenderOcclusionSharedScale(t *testing.T) {
	// Two results with uniform scores 0.5 and 0.25: with the shared scale
	// (the largest |score|, 0.5) the first heatmap is Diverging(1) and the
	// second Diverging(0.5) at every pixel, with nothing of the image mixed
	// in (the documented HeatScores colour, readable on the bar).
	base := uniformImage(32, 24, color.NRGBA{90, 120, 150, 255})
	occ := []*Occlusion{fakeOcclusion(32, 24, 8, 4, 0.5, 2, "hex nut"), fakeOcclusion(32, 24, 8, 4, 0.25, 4, "")}
	img, rects := renderOcclusion(base, occ, HeatOptions{Captions: true})
	if len(rects) != 4 {
		t.Fatalf("%d panels, want 2 heatmaps and 2 images", len(rects))
	}
	// Zoom: the smallest whole factor bringing the larger side to 256 (256/32 = 8).
	for i, r := range rects {
		if r.Dx() != 256 || r.Dy() != 192 {
			t.Errorf("panel %d is %v, want 256×192", i, r)
		}
		if !r.In(img.Rect) {
			t.Errorf("panel %d at %v outside the picture %v", i, r, img.Rect)
		}
	}
	// Left to right: heatmap 0, image 0, heatmap 1, image 1, on one row.
	order := []image.Rectangle{rects[0], rects[2], rects[1], rects[3]}
	for i := 1; i < len(order); i++ {
		if order[i].Min.Y != order[0].Min.Y || order[i].Min.X <= order[i-1].Max.X {
			t.Errorf("panels not side by side in pairs: %v", order)
		}
	}
	checkPanel(t, "first heatmap", img, rects[0], refDiverging(1))
	checkPanel(t, "second heatmap", img, rects[1], refDiverging(0.5))

	// A fixed scale of 1 makes them Diverging(0.5) and Diverging(0.25).
	img, rects = renderOcclusion(base, occ, HeatOptions{Scale: 1})
	checkPanel(t, "first heatmap, scale 1", img, rects[0], refDiverging(0.5))
	checkPanel(t, "second heatmap, scale 1", img, rects[1], refDiverging(0.25))

	// Negative scores take the other side of the map.
	occ[0] = fakeOcclusion(32, 24, 8, 4, -0.5, 2, "")
	img, rects = renderOcclusion(base, occ, HeatOptions{})
	checkPanel(t, "negative heatmap", img, rects[0], refDiverging(-1))
}

func TestRenderOcclusionImage(t *testing.T) {
	// Uniform scores over a two-colour image, scale 0.4 (lines at ±0.2):
	// the image beside the heatmap keeps its colours (or turns grey, BT.601
	// luma, with Grey), and the enlargement (zoom 4 on 64×48) keeps the
	// left half left. A score of 0 or 0.1 draws no line; −0.3 covers the
	// whole image, a region with no edge inside the picture, so no line
	// either (a region is left open where it runs off the image).
	red, blue := color.NRGBA{200, 40, 10, 255}, color.NRGBA{10, 40, 200, 255}
	base := uniformImage(64, 48, red)
	fill(base, image.Rect(32, 0, 64, 48), blue)
	luma := func(c color.NRGBA) color.NRGBA { // 0.299 R + 0.587 G + 0.114 B, rounded (ITU-R BT.601)
		g := uint8(math.Round(0.299*float64(c.R) + 0.587*float64(c.G) + 0.114*float64(c.B)))
		return color.NRGBA{g, g, g, 255}
	}
	for _, grey := range []bool{false, true} {
		left, right := red, blue
		if grey {
			left, right = luma(red), luma(blue)
		}
		for _, v := range []float64{0, 0.1, -0.3} {
			occ := []*Occlusion{fakeOcclusion(64, 48, 16, 8, v, 0, "")}
			img, rects := renderOcclusion(base, occ, HeatOptions{Scale: 0.4, Grey: grey})
			r := rects[1]
			if r.Dx() != 256 || r.Dy() != 192 {
				t.Fatalf("image panel %v, want 256×192 (zoom 4)", r)
			}
			in := r
			checkPanel(t, fmt.Sprintf("grey %v, score %g, left half", grey, v), img, image.Rect(in.Min.X, in.Min.Y, r.Min.X+128, in.Max.Y), left)
			checkPanel(t, fmt.Sprintf("grey %v, score %g, right half", grey, v), img, image.Rect(r.Min.X+128, in.Min.Y, in.Max.X, in.Max.Y), right)
		}
	}
	occ := []*Occlusion{fakeOcclusion(64, 48, 16, 8, 0.2, 0, "")}
	img := RenderOcclusion(base, occ, HeatOptions{})

	// The same call draws the same bytes.
	again := RenderOcclusion(base, occ, HeatOptions{})
	if !bytes.Equal(img.Pix, again.Pix) || img.Rect != again.Rect {
		t.Error("two renderings of the same result differ")
	}
}

// TestContourScoresLine: a score grid with one cell at 1 and the rest 0
// (patch 1 at positions 0..4, so each cell is one pixel and the bilinear
// field between centres is the tent of the middle cell): at level 0.5 the
// region is the pixels where the tent reaches 0.5, here only the centre
// pixel (2, 2) (its 4-neighbours are exactly 0). With width 2 the line
// covers the edge's pixels on both sides: the centre and, at distance 1,
// its 4-neighbours; at distance 2 ((0, 2) and the like) and √2 the white
// edge; (0, 0), at √8, keeps the image.
func TestContourScoresLine(t *testing.T) {
	grid := make([][]float64, 5)
	for i := range grid {
		grid[i] = make([]float64, 5)
	}
	grid[2][2] = 1
	pos := []int{0, 1, 2, 3, 4}
	base := uniformImage(5, 5, color.NRGBA{90, 90, 90, 255})
	out := ContourScores(base, grid, pos, pos, 1, 0.5, 2, false)
	for _, p := range []image.Point{{2, 2}, {1, 2}, {3, 2}, {2, 1}, {2, 3}} {
		if got := out.NRGBAAt(p.X, p.Y); got != Diverging(1) {
			t.Errorf("pixel %v: %v, want the solid line %v", p, got, Diverging(1))
		}
	}
	for _, p := range []image.Point{{0, 2}, {2, 0}, {1, 1}, {3, 3}} {
		if got := out.NRGBAAt(p.X, p.Y); got != (color.NRGBA{255, 255, 255, 255}) {
			t.Errorf("pixel %v: %v, want the white edge", p, got)
		}
	}
	if got := out.NRGBAAt(0, 0); got != (color.NRGBA{90, 90, 90, 255}) {
		t.Errorf("far corner %v, want the image unchanged", got)
	}
}

func TestRenderOcclusionCaptions(t *testing.T) {
	// Captions add text under the panels: the picture grows and the strip
	// under the panel is no longer blank.
	base := uniformImage(32, 32, color.NRGBA{128, 128, 128, 255})
	occ := []*Occlusion{fakeOcclusion(32, 32, 8, 8, 0.1, 1, "wall plug")}
	plain, r1 := renderOcclusion(base, occ, HeatOptions{})
	capt, r2 := renderOcclusion(base, occ, HeatOptions{Captions: true})
	if capt.Rect.Dy() <= plain.Rect.Dy() || r1[0] != r2[0] {
		t.Errorf("captioned %v (panel %v), plain %v (panel %v)", capt.Rect, r2[0], plain.Rect, r1[0])
	}
	strip := image.Rect(r2[0].Min.X, r2[0].Max.Y+2, r2[0].Max.X, r2[0].Max.Y+20)
	ink := 0
	for y := strip.Min.Y; y < strip.Max.Y; y++ {
		for x := strip.Min.X; x < strip.Max.X; x++ {
			if capt.NRGBAAt(x, y) != Light {
				ink++
			}
		}
	}
	if ink == 0 {
		t.Error("no caption under the panel")
	}
}

func TestRenderOcclusionPanics(t *testing.T) {
	base := uniformImage(32, 32, color.NRGBA{128, 128, 128, 255})
	ok := fakeOcclusion(32, 32, 8, 8, 0.1, 1, "")
	logit := fakeOcclusion(32, 32, 8, 8, 0.1, 1, "")
	logit.Score = ScoreLogit
	for _, c := range []struct {
		name string
		base image.Image
		occ  []*Occlusion
		o    HeatOptions
		want string
	}{
		{"no results", base, nil, HeatOptions{}, "no occlusion results"},
		{"nil image", nil, []*Occlusion{ok}, HeatOptions{}, "nil image"},
		{"size", uniformImage(31, 32, color.NRGBA{}), []*Occlusion{ok}, HeatOptions{}, "image is 31×32 but result 0 was computed on 32×32"},
		{"mixed", base, []*Occlusion{ok, logit}, HeatOptions{}, "mix"},
	} {
		t.Run(c.name, func(t *testing.T) {
			func() {
				defer func() {
					r := recover()
					if s, _ := r.(string); !strings.Contains(s, c.want) || !strings.HasPrefix(s, "viz: RenderOcclusion") {
						t.Errorf("%s: panic %v, want one containing %q", c.name, r, c.want)
					}
				}()
				RenderOcclusion(c.base, c.occ, c.o)
			}()
		})
	}
}

// TestGoldenOcclusion: two targets side by side on goldenBase with
// goldenScores (positive peak 0.4) and the same grid halved and negated for
// the second class, captions on, logit and probability in the captions,
// each heatmap beside the image in colour with lines at half the scale;
// golden file testdata/golden/occlusion_render.png.
func TestGoldenOcclusion(t *testing.T) {
	g, pos := goldenScores()
	first := &Occlusion{OcclusionSettings: OcclusionSettings{Patch: 16, Stride: 8, Fill: FillBlur, Score: ScoreProbability},
		Target: 3, Label: "wood screw", Base: 0.62, Probability: 0.62, Ys: pos, Xs: pos, Scores: g, Width: 40, Height: 40}
	second := *first
	second.Target, second.Label, second.Base, second.Probability = 5, "cable tie", 0.21, 0.21
	second.Scores = make([][]float64, len(g))
	for i, row := range g {
		for _, v := range row {
			second.Scores[i] = append(second.Scores[i], -v/2)
		}
	}
	checkGolden(t, "occlusion_render.png", RenderOcclusion(goldenBase(), []*Occlusion{first, &second}, HeatOptions{Captions: true}))
}

// TestRenderOcclusionNoCaution: the window shows the caution once beside
// the picture, so NoCaution leaves it out of the notes; a picture made
// for saving keeps it. The caution is two lines or more at this width, so
// the picture without it is shorter.
func TestRenderOcclusionNoCaution(t *testing.T) {
	base := uniformImage(32, 32, color.NRGBA{128, 128, 128, 255})
	occ := []*Occlusion{fakeOcclusion(32, 32, 8, 8, 0.1, 1, "")}
	with := RenderOcclusion(base, occ, HeatOptions{})
	without := RenderOcclusion(base, occ, HeatOptions{NoCaution: true})
	if without.Rect.Dy() >= with.Rect.Dy() {
		t.Errorf("without the caution %v, with it %v: want shorter", without.Rect, with.Rect)
	}
}
