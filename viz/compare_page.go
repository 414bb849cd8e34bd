package viz

import (
	"fmt"
	"image"
	"math"
	"slices"

	"fovea/modelio"
)

// KernelPairs is the input of [PairTiles]: the kernels of one convolution
// in two models, which filter of B each filter of A is paired with, and the
// cosine similarity and norm ratio of each pair (NaN where undefined).
type KernelPairs struct {
	A, B      *modelio.Kernels
	Match     []int
	Cosine    []float64
	NormRatio []float64
	BGR       bool
}

// PairTiles draws the filters of A and their partners in B as pairs of
// tiles, A's on the left and B's on the right, both grids on one colour
// scale (the largest |weight| of both kernels: a filter that shrank looks
// fainter), with the cosine similarity and the norm ratio under each pair.
// It returns the picture and the scale.
func PairTiles(p KernelPairs) (*image.NRGBA, float64, error) {
	a, b := p.A, p.B
	if a == nil || b == nil {
		return nil, 0, fmt.Errorf("viz: pair tiles: kernels missing")
	}
	if a.M != b.M || a.C != b.C || a.KH != b.KH || a.KW != b.KW || len(p.Match) != a.M || len(p.Cosine) != a.M || len(p.NormRatio) != a.M {
		return nil, 0, fmt.Errorf("viz: pair tiles: kernels %d×%d×%d×%d and %d×%d×%d×%d with %d pairs do not fit together",
			a.M, a.C, a.KH, a.KW, b.M, b.C, b.KH, b.KW, len(p.Match))
	}
	// One Kernels holding A's filters then B's in pair order: Tiles then
	// scales all of them by the one largest |weight|.
	per := a.C * a.KH * a.KW
	w := make([]float32, 0, 2*a.M*per)
	w = append(w, a.W...)
	for i := range a.M {
		j := p.Match[i]
		if j < 0 || j >= b.M {
			return nil, 0, fmt.Errorf("viz: pair tiles: pair %d names filter %d of %d", i, j, b.M)
		}
		w = append(w, b.W[j*per:(j+1)*per]...)
	}
	both := &modelio.Kernels{Node: a.Node, M: 2 * a.M, C: a.C, KH: a.KH, KW: a.KW, Group: a.Group, W: w}
	slice := -1
	if a.C != 3 && a.C != 1 {
		slice = 0
	}
	tiles, info, err := Tiles(both, TileOptions{Slice: slice, BGR: p.BGR, Columns: 2 * a.M, Background: Light})
	if err != nil {
		return nil, 0, err
	}
	scale := 0.0
	for _, v := range w {
		scale = math.Max(scale, math.Abs(float64(v)))
	}
	st := TextStyle{Color: inkDark}
	_, lh := TextSize("0", st)
	tw, th := info[0].Rect.Dx(), info[0].Rect.Dy()
	pairW := max(2*tw+10, 100)
	cols := int(math.Ceil(math.Sqrt(float64(a.M) * 1.5)))
	cols = min(cols, a.M)
	rows := (a.M + cols - 1) / cols
	gap := 10
	cellH := th + 4 + 2*lh + gap
	img, err := newCanvas("filter pairs", gap+cols*(pairW+gap), gap+rows*cellH, Light)
	if err != nil {
		return nil, 0, err
	}
	for i := range a.M {
		x0 := gap + (i%cols)*(pairW+gap)
		y0 := gap + (i/cols)*cellH
		left := x0 + (pairW-(2*tw+6))/2
		for k, idx := range []int{i, a.M + i} {
			r := info[slices.IndexFunc(info, func(t TileInfo) bool { return t.Index == idx })].Rect
			dst := image.Pt(left+k*(tw+6), y0)
			paste(img, tiles.SubImage(r), dst)
			frame(img, image.Rectangle{Min: dst, Max: dst.Add(image.Pt(tw, th))}.Inset(-1), 1, outlineFor(Light), false)
		}
		// The bitmap face has ASCII only.
		label := fmt.Sprintf("#%d cos -", i)
		if p.Match[i] != i {
			label = fmt.Sprintf("%d-%d cos -", i, p.Match[i])
		}
		norm := "norm -"
		if !math.IsNaN(p.Cosine[i]) {
			label = label[:len(label)-1] + fmt.Sprintf("%.2f", p.Cosine[i])
			norm = fmt.Sprintf("norm %.2f", p.NormRatio[i])
		}
		drawTextCentered(img, x0+pairW/2, y0+th+3, label, st)
		drawTextCentered(img, x0+pairW/2, y0+th+3+lh, norm, TextStyle{Color: inkMuted})
	}
	return img, scale, nil
}

// ComparePage is the one-page picture of a comparison of two models, for a
// colleague: who was compared (file names and SHA-256), the first layer's
// filter pairs, and the findings as lines of text.
type ComparePage struct {
	Title    string
	A, B     string // "a: parts.onnx  sha256 …"
	Pairs    *image.NRGBA
	PairNote string // what the pair grid shows and on which scale
	Sections []PageSection
	Caution  string
}

// PageSection is a heading with lines of text under it.
type PageSection struct {
	Heading string
	Lines   []string
}

// DrawComparePage lays the page out on white, 1000 pixels wide (wider when
// the filter grid is).
func DrawComparePage(p ComparePage) (*image.NRGBA, error) {
	const margin = 24
	title := TextStyle{Size: 22, Bold: true}
	head := TextStyle{Size: 15, Bold: true}
	body := TextStyle{Size: 13}
	mono := TextStyle{Size: 12, Mono: true}
	width := 1000
	if p.Pairs != nil {
		width = max(width, p.Pairs.Bounds().Dx()+2*margin)
	}
	inner := width - 2*margin
	// Measure, then draw: a list of draw steps with their heights.
	type step struct {
		h    int
		draw func(img *image.NRGBA, y int)
	}
	var steps []step
	text := func(s string, st TextStyle) {
		for _, line := range wrapText(s, inner, st) {
			_, h := TextSize(line, st)
			l := line
			steps = append(steps, step{h + 2, func(img *image.NRGBA, y int) { DrawText(img, margin, y, l, st) }})
		}
	}
	space := func(h int) { steps = append(steps, step{h, func(*image.NRGBA, int) {}}) }
	text(p.Title, title)
	space(6)
	text(p.A, mono)
	text(p.B, mono)
	if p.Pairs != nil {
		space(10)
		text(p.PairNote, body)
		pic := p.Pairs
		steps = append(steps, step{pic.Bounds().Dy() + 4, func(img *image.NRGBA, y int) { paste(img, pic, image.Pt(margin, y)) }})
	}
	for _, s := range p.Sections {
		space(10)
		text(s.Heading, head)
		for _, l := range s.Lines {
			text(l, body)
		}
	}
	if p.Caution != "" {
		space(12)
		text(p.Caution, TextStyle{Size: 12, Color: inkMuted})
	}
	h := 2 * margin
	for _, s := range steps {
		h += s.h
	}
	img, err := newCanvas("comparison page", width, h, Light)
	if err != nil {
		return nil, err
	}
	y := margin
	for _, s := range steps {
		s.draw(img, y)
		y += s.h
	}
	return img, nil
}
