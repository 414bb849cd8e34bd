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
	// Two panels with uniform scores 0.5 and 0.25 at full opacity: with the
	// shared scale (the largest |score|, 0.5) the first is Diverging(1) and
	// the second Diverging(0.5) everywhere; each colour is the documented
	// blend (1−a)·image + a·colour with a = 1.
	base := uniformImage(32, 24, color.NRGBA{90, 120, 150, 255})
	occ := []*Occlusion{fakeOcclusion(32, 24, 8, 4, 0.5, 2, "hex nut"), fakeOcclusion(32, 24, 8, 4, 0.25, 4, "")}
	img, rects := renderOcclusion(base, occ, HeatOptions{Opacity: 1, Captions: true})
	if len(rects) != 2 {
		t.Fatalf("%d panels", len(rects))
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
	if rects[0].Overlaps(rects[1]) || rects[0].Min.Y != rects[1].Min.Y || rects[1].Min.X <= rects[0].Max.X {
		t.Errorf("panels not side by side: %v %v", rects[0], rects[1])
	}
	checkPanel(t, "first panel", img, rects[0], Diverging(1))
	checkPanel(t, "second panel", img, rects[1], Diverging(0.5))

	// A fixed scale of 1 makes them Diverging(0.5) at full weight and
	// Diverging(0.25) at weight smoothstep(2·0.25/1) = 0.5 over the grey
	// image.
	img, rects = renderOcclusion(base, occ, HeatOptions{Opacity: 1, Scale: 1})
	checkPanel(t, "first panel, scale 1", img, rects[0], Diverging(0.5))
	checkPanel(t, "second panel, scale 1", img, rects[1], overlayPixel(color.NRGBA{90, 120, 150, 255}, 0.25, 1, 1))

	// Negative scores take the other side of the map.
	occ[0] = fakeOcclusion(32, 24, 8, 4, -0.5, 2, "")
	img, rects = renderOcclusion(base, occ, HeatOptions{Opacity: 1})
	checkPanel(t, "negative panel", img, rects[0], Diverging(-1))
}

// overlayPixel is the colour OverlayScores documents for an image pixel p
// under score v: the map's colour from its definition (refDiverging)
// composited over the grey by Porter–Duff over (refOver), within one 8-bit
// step in checkPanel: out = (1 − a)·grey + a·Diverging(v/scale), a = opacity ·
// smoothstep(min(1, 2|v|/scale)), grey the BT.601 luma 0.299 R + 0.587 G +
// 0.114 B, each channel rounded.
func overlayPixel(p color.NRGBA, v, scale, opacity float64) color.NRGBA {
	grey := uint8(math.Round(0.299*float64(p.R) + 0.587*float64(p.G) + 0.114*float64(p.B)))
	t := math.Min(1, 2*math.Abs(v)/scale)
	a := opacity * t * t * (3 - 2*t)
	return refOver(color.NRGBA{grey, grey, grey, 255}, refDiverging(v/scale), a)
}

func TestRenderOcclusionImage(t *testing.T) {
	// Uniform scores at opacity 0.5 over a two-colour image: each pixel
	// follows the documented blend (overlayPixel), and the enlargement
	// (zoom 4 on 64×48) keeps the left half left.
	base := uniformImage(64, 48, color.NRGBA{200, 40, 10, 255})
	fill(base, image.Rect(32, 0, 64, 48), color.NRGBA{10, 40, 200, 255})
	for _, v := range []float64{0, 0.1, -0.3} {
		occ := []*Occlusion{fakeOcclusion(64, 48, 16, 8, v, 0, "")}
		img, rects := renderOcclusion(base, occ, HeatOptions{Opacity: 0.5, Scale: 0.4})
		r := rects[0]
		if r.Dx() != 256 || r.Dy() != 192 {
			t.Fatalf("panel %v, want 256×192 (zoom 4)", r)
		}
		left := overlayPixel(color.NRGBA{200, 40, 10, 255}, v, 0.4, 0.5)
		right := overlayPixel(color.NRGBA{10, 40, 200, 255}, v, 0.4, 0.5)
		checkPanel(t, fmt.Sprintf("score %g, left half", v), img, image.Rect(r.Min.X, r.Min.Y, r.Min.X+128, r.Max.Y), left)
		checkPanel(t, fmt.Sprintf("score %g, right half", v), img, image.Rect(r.Min.X+128, r.Min.Y, r.Max.X, r.Max.Y), right)
	}
	occ := []*Occlusion{fakeOcclusion(64, 48, 16, 8, 0.2, 0, "")}
	img := RenderOcclusion(base, occ, HeatOptions{Opacity: 0.5})

	// The same call draws the same bytes.
	again := RenderOcclusion(base, occ, HeatOptions{Opacity: 0.5})
	if !bytes.Equal(img.Pix, again.Pix) || img.Rect != again.Rect {
		t.Error("two renderings of the same result differ")
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
		{"opacity", base, []*Occlusion{ok}, HeatOptions{Opacity: 1.5}, "opacity 1.5"},
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
// the second class, captions on, logit and probability in the captions;
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
	checkGolden(t, "occlusion_render.png", RenderOcclusion(goldenBase(), []*Occlusion{first, &second}, HeatOptions{Captions: true, Opacity: 0.85}))
}
