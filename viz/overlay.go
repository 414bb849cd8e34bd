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
