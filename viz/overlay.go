package viz

import (
	"fmt"
	"image"
	"image/color"
	"math"
)

// OverlayScores draws a grid of signed scores over an image, the picture of
// an occlusion-sensitivity result.
//
// grid[i][j] is the score of the square patch of side patch whose top-left
// corner is at (xs[j], ys[i]) in base's pixel coordinates; the score is
// placed at the patch centre (xs[j] + (patch−1)/2, ys[i] + (patch−1)/2) and
// upsampled bilinearly to every pixel (positions need not be evenly spaced;
// beyond the outermost centres the edge value continues). Each pixel's score
// v is coloured with Diverging(v / scale) — zero neutral, the symmetric range
// ±scale spanning the map, beyond it clamped — and blended with the image
// shown in grey (BT.601 luma, so that every colour seen is the map's):
//
//	out = (1 − a)·grey + a·colour,  a = opacity · smoothstep(min(1, 2|v| / scale))
//
// (smoothstep(t) = 3t² − 2t³), so regions where hiding changed nothing show
// the image unchanged and those at half the scale or more are covered at the
// given opacity. scale ≤ 0 means the
// largest |score| (1 when all are zero); NaN scores count as 0.
//
// It panics, naming the problem, when the grid is empty or ragged, when its
// size differs from len(ys)×len(xs), when positions are not increasing, when
// patch < 1, when opacity is outside [0, 1], or when base is nil, empty or
// above MaxPixels: all are mistakes of the caller, never conditions of the
// data.
func OverlayScores(base image.Image, grid [][]float64, ys, xs []int, patch int, scale float64, opacity float64) *image.NRGBA {
	if base == nil {
		panic("viz: OverlayScores: nil image")
	}
	if b := base.Bounds(); b.Empty() || int64(b.Dx())*int64(b.Dy()) > MaxPixels {
		panic(fmt.Sprintf("viz: OverlayScores: image size %d×%d is empty or above %d pixels", b.Dx(), b.Dy(), MaxPixels))
	}
	if len(grid) == 0 || len(grid) != len(ys) {
		panic(fmt.Sprintf("viz: OverlayScores: grid has %d rows for %d y positions", len(grid), len(ys)))
	}
	for i, row := range grid {
		if len(row) == 0 || len(row) != len(xs) {
			panic(fmt.Sprintf("viz: OverlayScores: grid row %d has %d values for %d x positions", i, len(row), len(xs)))
		}
	}
	if patch < 1 {
		panic(fmt.Sprintf("viz: OverlayScores: patch %d is smaller than 1", patch))
	}
	if !(opacity >= 0 && opacity <= 1) {
		panic(fmt.Sprintf("viz: OverlayScores: opacity %v is outside 0..1", opacity))
	}
	half := float64(patch-1) / 2
	cy, err1 := patchCentres(ys, half)
	cx, err2 := patchCentres(xs, half)
	if err1 != nil || err2 != nil {
		panic(fmt.Sprintf("viz: OverlayScores: positions must increase: ys %v, xs %v", ys, xs))
	}
	val := func(i, j int) float64 {
		v := grid[i][j]
		if math.IsNaN(v) {
			return 0
		}
		return v
	}
	if !(scale > 0) || math.IsInf(scale, 0) {
		scale = ScoreScale(grid)
	}
	s := &sampler{cy: cy, cx: cx, val: val}
	paint := func(v float64) (color.NRGBA, float64) { return Diverging(v / scale), strength(v / scale) }
	return overlay(base, s, paint, opacity)
}

// ScoreScale is the symmetric scale OverlayScores picks when given none: the
// largest finite |score| of the grids, 1 when there is none or it is zero.
// Pass several grids to render them with one shared scale.
func ScoreScale(grids ...[][]float64) float64 {
	m := 0.0
	for _, g := range grids {
		for _, row := range g {
			for _, v := range row {
				if a := math.Abs(v); a > m && !math.IsInf(a, 0) {
					m = a
				}
			}
		}
	}
	if m == 0 {
		return 1
	}
	return m
}

func patchCentres(p []int, half float64) ([]float64, error) {
	c := make([]float64, len(p))
	for i, v := range p {
		if i > 0 && v <= p[i-1] {
			return nil, fmt.Errorf("not increasing")
		}
		c[i] = float64(v) + half
	}
	return c, nil
}

// scoreSampler checks an occlusion grid the way OverlayScores does and
// returns its sampler and the scale (scale ≤ 0: the largest |score|).
func scoreSampler(fn string, grid [][]float64, ys, xs []int, patch int, scale float64) (*sampler, float64) {
	if len(grid) == 0 || len(grid) != len(ys) {
		panic(fmt.Sprintf("viz: %s: grid has %d rows for %d y positions", fn, len(grid), len(ys)))
	}
	for i, row := range grid {
		if len(row) == 0 || len(row) != len(xs) {
			panic(fmt.Sprintf("viz: %s: grid row %d has %d values for %d x positions", fn, i, len(row), len(xs)))
		}
	}
	if patch < 1 {
		panic(fmt.Sprintf("viz: %s: patch %d is smaller than 1", fn, patch))
	}
	half := float64(patch-1) / 2
	cy, err1 := patchCentres(ys, half)
	cx, err2 := patchCentres(xs, half)
	if err1 != nil || err2 != nil {
		panic(fmt.Sprintf("viz: %s: positions must increase: ys %v, xs %v", fn, ys, xs))
	}
	if !(scale > 0) || math.IsInf(scale, 0) {
		scale = ScoreScale(grid)
	}
	val := func(i, j int) float64 {
		if v := grid[i][j]; !math.IsNaN(v) {
			return v
		}
		return 0
	}
	return &sampler{cy: cy, cx: cx, val: val}, scale
}

// HeatScores draws an occlusion grid on its own, w×h pixels, every pixel
// exactly Diverging(v / scale) of its upsampled score v (placed and
// interpolated as in [OverlayScores]), with nothing of the image mixed in:
// each colour can be read against the colour bar ColorBar(…, −scale, scale,
// …, Diverging). scale ≤ 0 means the largest |score|. It panics on the
// mistakes OverlayScores panics on.
func HeatScores(w, h int, grid [][]float64, ys, xs []int, patch int, scale float64) *image.NRGBA {
	if w <= 0 || h <= 0 || int64(w)*int64(h) > MaxPixels {
		panic(fmt.Sprintf("viz: HeatScores: size %d×%d is empty or above %d pixels", w, h, MaxPixels))
	}
	s, scale := scoreSampler("HeatScores", grid, ys, xs, patch, scale)
	out := image.NewNRGBA(image.Rect(0, 0, w, h))
	for y := range h {
		for x := range w {
			out.SetNRGBA(x, y, Diverging(s.at(float64(y), float64(x))/scale))
		}
	}
	return out
}

// ContourScores draws base (in colour, or in grey with grey set) with the
// outline of the regions where the upsampled score reaches +level (a solid
// line in the diverging map's orange end) and −level (a dashed line in its
// blue end). Each line is centred on the region's edge, width pixels wide
// (width < 2 means 2), with a one-pixel white edge on both sides, so that
// it stays visible on dark, light and same-coloured parts of the image. A
// region that runs off the image is left open there. The image itself is
// not tinted: its colours, which may be what decides the class, stay as
// the model saw them. level ≤ 0 means half of the largest |score|. It
// panics on the mistakes OverlayScores panics on.
func ContourScores(base image.Image, grid [][]float64, ys, xs []int, patch int, level float64, width int, grey bool) *image.NRGBA {
	if base == nil {
		panic("viz: ContourScores: nil image")
	}
	if b := base.Bounds(); b.Empty() || int64(b.Dx())*int64(b.Dy()) > MaxPixels {
		panic(fmt.Sprintf("viz: ContourScores: image size %d×%d is empty or above %d pixels", b.Dx(), b.Dy(), MaxPixels))
	}
	s, scale := scoreSampler("ContourScores", grid, ys, xs, patch, 0)
	if !(level > 0) || math.IsInf(level, 0) {
		level = scale / 2
	}
	out := flatten(base, Light)
	w, h := out.Rect.Dx(), out.Rect.Dy()
	if grey {
		for i := 0; i < len(out.Pix); i += 4 {
			g := greyByte(out.Pix[i], out.Pix[i+1], out.Pix[i+2])
			out.Pix[i], out.Pix[i+1], out.Pix[i+2] = g, g, g
		}
	}
	// side[y*w+x]: +1 where the score reaches +level, −1 where it reaches
	// −level, 0 elsewhere.
	side := make([]int8, w*h)
	for y := range h {
		for x := range w {
			switch v := s.at(float64(y), float64(x)); {
			case v >= level:
				side[y*w+x] = 1
			case v <= -level:
				side[y*w+x] = -1
			}
		}
	}
	// A pixel's distance to the edge of the sign-sg region is the distance
	// to the nearest pixel on the other side of it (inside if the pixel is
	// outside, and the reverse). Pixels within half the width (rounded up
	// on the inside) are the line; one further is its white edge.
	half := max(2, width) / 2
	reach := half + 2
	white := color.NRGBA{0xff, 0xff, 0xff, 0xff}
	for _, sg := range []int8{1, -1} {
		paint := make([]uint8, w*h) // 1 line, 2 white edge
		for y := range h {
			for x := range w {
				in := side[y*w+x] == sg
				best := reach*reach + 1
				for dy := -reach; dy <= reach; dy++ {
					for dx := -reach; dx <= reach; dx++ {
						X, Y := x+dx, y+dy
						if X < 0 || Y < 0 || X >= w || Y >= h {
							continue
						}
						if (side[Y*w+X] == sg) != in {
							best = min(best, dx*dx+dy*dy)
						}
					}
				}
				if best > reach*reach {
					continue // no edge near
				}
				lim := half * half
				if in {
					lim = (half + 1) * (half + 1) // inside, the line starts one pixel further in
				}
				switch {
				case best <= lim:
					paint[y*w+x] = 1
				case best <= (half+2)*(half+2) && in || best <= (half+1)*(half+1) && !in:
					paint[y*w+x] = 2
				}
			}
		}
		dash := 3*half + 4
		for y := range h {
			for x := range w {
				if paint[y*w+x] == 0 || sg < 0 && (x+y)/dash%2 == 1 {
					continue // nothing, or a gap of the dashed line
				}
				c := white
				if paint[y*w+x] == 1 {
					c = Diverging(float64(sg))
				}
				out.SetNRGBA(x, y, c)
			}
		}
	}
	return out
}
