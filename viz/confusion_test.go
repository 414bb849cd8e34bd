package viz

import (
	"image"
	"testing"
)

// TestConfusionPicture: each cell's colour says what it is (the diagonal its
// own fill, an error its share of the row on the one scale, an empty cell
// the background), and At maps a point back to its cell. Hand-checkable
// 3×3 counts; the largest error share is 2/5 = 40 %, the scale's top.
func TestConfusionPicture(t *testing.T) {
	counts := [][]int{{3, 2, 0}, {1, 4, 0}, {0, 0, 5}}
	img, g, err := ConfusionPicture(counts, ConfusionOptions{Cell: 30, Labels: []string{"a", "b"}})
	if err != nil {
		t.Fatal(err)
	}
	if g.N != 3 || g.Cell != 30 || g.Scale != 0.4 {
		t.Fatalf("grid %+v, want 3 cells of 30 and scale 0.4", g)
	}
	for tr, row := range counts {
		for p, v := range row {
			// A pixel inside the cell, away from its frame and its number.
			pt := g.Origin.Add(image.Pt(p*g.Cell+3, tr*g.Cell+3))
			var want = Light
			switch {
			case tr == p:
				want = diagonalFill
			case v > 0:
				want = ConfusionColor(float64(v)/5, 0.4)
			}
			if got := img.NRGBAAt(pt.X, pt.Y); got != want {
				t.Errorf("cell (%d,%d) colour %v, want %v", tr, p, got, want)
			}
			if a, b, ok := g.At(pt); !ok || a != tr || b != p {
				t.Errorf("At(%v) = %d,%d,%v; want %d,%d", pt, a, b, ok, tr, p)
			}
		}
	}
	if _, _, ok := g.At(g.Origin.Sub(image.Pt(1, 1))); ok {
		t.Error("At outside the grid: ok")
	}
	if ConfusionColor(0.4, 0.4) != Sequential(0) || ConfusionColor(0, 0.4) != Sequential(1) {
		t.Error("ConfusionColor is not Sequential reversed over the scale")
	}
	if _, _, err := ConfusionPicture([][]int{{1, 2}}, ConfusionOptions{}); err == nil {
		t.Error("non-square matrix: no error")
	}
}
