package viz

import (
	"image/color"
	"math"
	"strings"
	"testing"

	"fovea/modelio"
)

// The pair grid draws both models' filters on one colour scale: filter 1 is
// +1 on blue at the centre in A and +2 in B, so with the shared scale 2 A's
// centre is drawn at round(1/2·127 + 128) = 192 and B's at 255 (the tiles'
// documented mapping, symByte: common practice for a symmetric scale). A
// scale per grid would draw A's at 255 and no pixel would read 192.
func TestPairTilesSharedScale(t *testing.T) {
	mk := func(blue float32) *modelio.Kernels {
		w := make([]float32, 2*3*3*3)
		w[(0*3+0)*9+4] = 0.5 // filter 0: red centre
		w[(1*3+2)*9+4] = blue
		return &modelio.Kernels{Node: "c", M: 2, C: 3, KH: 3, KW: 3, Group: 1, W: w}
	}
	img, scale, err := PairTiles(KernelPairs{A: mk(1), B: mk(2), Match: []int{0, 1},
		Cosine: []float64{1, 1}, NormRatio: []float64{1, 2}})
	if err != nil {
		t.Fatal(err)
	}
	if scale != 2 {
		t.Fatalf("scale %g, want 2", scale)
	}
	count := map[color.NRGBA]int{}
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			count[img.NRGBAAt(x, y)]++
		}
	}
	for _, c := range []color.NRGBA{{128, 128, 192, 255}, {128, 128, 255, 255}, {160, 128, 128, 255}} {
		if count[c] == 0 {
			t.Errorf("no pixel of colour %v on the shared scale", c)
		}
	}
	// Mismatched inputs are refused, not drawn.
	if _, _, err := PairTiles(KernelPairs{A: mk(1), B: mk(2), Match: []int{0}, Cosine: []float64{1}, NormRatio: []float64{1}}); err == nil {
		t.Error("a short pairing must be refused")
	}
	if _, _, err := PairTiles(KernelPairs{A: mk(1), B: mk(2), Match: []int{0, 5}, Cosine: []float64{1, math.NaN()}, NormRatio: []float64{1, 1}}); err == nil || !strings.Contains(err.Error(), "filter 5") {
		t.Errorf("a pair naming no filter: %v", err)
	}
}

func TestDrawComparePage(t *testing.T) {
	img, err := DrawComparePage(ComparePage{Title: "t", A: "a: x.onnx", B: "b: y.onnx",
		Sections: []PageSection{{Heading: "h", Lines: []string{strings.Repeat("word ", 400)}}}, Caution: "c"})
	if err != nil {
		t.Fatal(err)
	}
	if img.Bounds().Dx() != 1000 || img.Bounds().Dy() < 200 {
		t.Errorf("page %v: a long line must wrap within 1000 pixels", img.Bounds())
	}
}
