package viz

import (
	"image"
	"image/color"
	"math"
	"strings"
	"testing"
)

func TestBilinearHandComputed(t *testing.T) {
	// A 2×2 grid [[0, 1], [2, 3]] with centres at 0 and 2 on both axes.
	// Bilinear interpolation (common practice: linear in x, then in y):
	// v(x, y) = (1−fy)·((1−fx)·0 + fx·1) + fy·((1−fx)·2 + fx·3) = fx + 2·fy,
	// with fx = x/2, fy = y/2. By hand:
	//   (x=1, y=0) 0.5   (x=0, y=1) 1   (x=1, y=1) 1.5   (x=2, y=2) 3
	//   (x=0.5, y=1.5) 0.25 + 1.5 = 1.75
	// and beyond the centres the edge value: (x=5, y=−3) 1.
	g := [][]float64{{0, 1}, {2, 3}}
	s := &sampler{cy: []float64{0, 2}, cx: []float64{0, 2}, val: func(i, j int) float64 { return g[i][j] }}
	for _, c := range [][3]float64{{1, 0, 0.5}, {0, 1, 1}, {1, 1, 1.5}, {2, 2, 3}, {0.5, 1.5, 1.75}, {5, -3, 1}, {0, 0, 0}} {
		if got := s.at(c[1], c[0]); math.Abs(got-c[2]) > 1e-15 {
			t.Errorf("v(x=%v, y=%v) = %v, want %v", c[0], c[1], got, c[2])
		}
	}
	// Uneven centres 0, 4, 5 (the last patch clamped to the border): at 4.5
	// halfway between the last two.
	h := []float64{10, 20, 40}
	s = &sampler{cy: []float64{0}, cx: []float64{0, 4, 5}, val: func(_, j int) float64 { return h[j] }}
	for _, c := range [][2]float64{{2, 15}, {4.5, 30}, {4, 20}, {9, 40}} {
		if got := s.at(0, c[0]); math.Abs(got-c[1]) > 1e-12 {
			t.Errorf("uneven: v(%v) = %v, want %v", c[0], got, c[1])
		}
	}
}

func TestOverlayScoresHandComputed(t *testing.T) {
	// The same 2×2 grid as scores of 1-pixel patches at (0, 0), (0, 2),
	// (2, 0), (2, 2) on a 3×3 image of grey 100, scale 3, opacity 1: pixel
	// (x, y) has value v = x/2 + y (above), colour Diverging(v/3) and weight
	// smoothstep(min(1, 2|v|/3)): the map's colour from its definition
	// (refDiverging) composited over the grey image with that weight
	// (Porter–Duff over, refOver), within one 8-bit step (the map's table
	// holds |v| in steps of 1/256).
	base := image.NewNRGBA(image.Rect(0, 0, 3, 3))
	grey := color.NRGBA{100, 100, 100, 255}
	fill(base, base.Rect, grey)
	out := OverlayScores(base, [][]float64{{0, 1}, {2, 3}}, []int{0, 2}, []int{0, 2}, 1, 3, 1)
	smooth := func(t float64) float64 { return t * t * (3 - 2*t) }
	for y := range 3 {
		for x := range 3 {
			v := float64(x)/2 + float64(y)
			want := refOver(grey, refDiverging(v/3), smooth(math.Min(1, 2*v/3)))
			if got := out.NRGBAAt(x, y); !nearColour(got, want, 1) {
				t.Errorf("pixel (%d,%d) = %v, want %v (score %v)", x, y, got, want, v)
			}
		}
	}
	// Patch centres: 4-pixel patches at x = 0 and x = 4 have centres 1.5 and
	// 5.5 (x + (patch−1)/2); pixel 1 is left of the first centre and takes
	// its score, pixel 6 right of the last and takes that one.
	base = image.NewNRGBA(image.Rect(0, 0, 8, 1))
	fill(base, base.Rect, grey)
	out = OverlayScores(base, [][]float64{{-2, 2}}, []int{0}, []int{0, 4}, 4, 2, 1)
	if !nearColour(out.NRGBAAt(1, 0), refDiverging(-1), 1) || !nearColour(out.NRGBAAt(6, 0), refDiverging(1), 1) {
		t.Errorf("edge pixels %v %v, want the full blue and orange", out.NRGBAAt(1, 0), out.NRGBAAt(6, 0))
	}
	// Between centres 1.5 and 5.5: pixel 3 is at 3/8 → −2 + 4·3/8 = −0.5,
	// pixel 4 at 5/8 → 0.5.
	for _, c := range []struct {
		x int
		v float64
	}{{3, -0.5}, {4, 0.5}} {
		want := refOver(grey, refDiverging(c.v/2), smooth(math.Min(1, 2*math.Abs(c.v)/2)))
		if got := out.NRGBAAt(c.x, 0); !nearColour(got, want, 1) {
			t.Errorf("pixel %d = %v, want %v (score %v)", c.x, got, want, c.v)
		}
	}
}

func TestOverlayScoresAutoScaleAndNaN(t *testing.T) {
	// scale ≤ 0 means the largest |score|; NaN counts as 0.
	base := image.NewNRGBA(image.Rect(0, 0, 2, 1))
	fill(base, base.Rect, color.NRGBA{10, 20, 30, 255})
	a := OverlayScores(base, [][]float64{{-4, 2}}, []int{0}, []int{0, 1}, 1, 0, 0.8)
	b := OverlayScores(base, [][]float64{{-4, 2}}, []int{0}, []int{0, 1}, 1, 4, 0.8)
	if a.NRGBAAt(0, 0) != b.NRGBAAt(0, 0) || a.NRGBAAt(1, 0) != b.NRGBAAt(1, 0) {
		t.Error("automatic scale differs from the largest |score|")
	}
	// By hand: max(|−4|, |2|, |5|) = 5; all zero falls back to 1 (our choice,
	// so nothing is divided by zero).
	if ScoreScale([][]float64{{-4, 2}}, [][]float64{{5}}) != 5 || ScoreScale([][]float64{{0}}) != 1 {
		t.Error("ScoreScale wrong")
	}
	n := OverlayScores(base, [][]float64{{math.NaN(), math.NaN()}}, []int{0}, []int{0, 1}, 1, 1, 1)
	g := greyByte(10, 20, 30) // BT.601: 0.299·10 + 0.587·20 + 0.114·30 = 18.15 → 18
	if g != 18 || n.NRGBAAt(0, 0) != (color.NRGBA{g, g, g, 255}) {
		t.Errorf("NaN scores drew %v, want the grey image %d", n.NRGBAAt(0, 0), g)
	}
	if base.NRGBAAt(0, 0) != (color.NRGBA{10, 20, 30, 255}) {
		t.Error("OverlayScores changed its input")
	}
}

func TestOverlayScoresPanics(t *testing.T) {
	base := image.NewNRGBA(image.Rect(0, 0, 4, 4))
	for _, c := range []struct {
		name string
		f    func()
		want string
	}{
		{"rows", func() { OverlayScores(base, [][]float64{{1}}, []int{0, 1}, []int{0}, 1, 1, 1) }, "1 rows for 2 y positions"},
		{"ragged", func() { OverlayScores(base, [][]float64{{1, 2}, {3}}, []int{0, 1}, []int{0, 1}, 1, 1, 1) }, "row 1 has 1 values"},
		{"order", func() { OverlayScores(base, [][]float64{{1, 2}}, []int{0}, []int{2, 1}, 1, 1, 1) }, "must increase"},
		{"patch", func() { OverlayScores(base, [][]float64{{1}}, []int{0}, []int{0}, 0, 1, 1) }, "patch 0"},
		{"opacity", func() { OverlayScores(base, [][]float64{{1}}, []int{0}, []int{0}, 1, 1, -1) }, "opacity -1"},
		{"nil", func() { OverlayScores(nil, [][]float64{{1}}, []int{0}, []int{0}, 1, 1, 1) }, "nil image"},
	} {
		t.Run(c.name, func(t *testing.T) {
			func() {
				defer func() {
					r := recover()
					if s, _ := r.(string); !strings.Contains(s, c.want) {
						t.Errorf("%s: panic %v, want one containing %q", c.name, r, c.want)
					}
				}()
				c.f()
			}()
		})
	}
}
