package viz

import (
	"fmt"
	"image"
	"image/color"
	"math"
	"strconv"
)

// ConfusionOptions are the knobs of a confusion matrix picture. The zero
// value is usable.
type ConfusionOptions struct {
	Cell   int      // side of one cell in pixels; 0 means 44
	Labels []string // class names for the row titles (may be shorter than the matrix)
}

// ConfusionGrid says where ConfusionPicture put the cells: cell (t, p)
// (true class t, predicted class p) covers
//
//	image.Rect(Origin.X+p·Cell, Origin.Y+t·Cell, Origin.X+(p+1)·Cell, Origin.Y+(t+1)·Cell)
type ConfusionGrid struct {
	Origin image.Point
	Cell   int
	N      int
	// Scale is the share of a true class's images at which an off-diagonal
	// cell reaches the darkest colour (the legend's upper end).
	Scale float64
}

// At returns the cell under picture point pt, ok false outside the grid.
func (g ConfusionGrid) At(pt image.Point) (t, p int, ok bool) {
	if g.Cell <= 0 {
		return 0, 0, false
	}
	d := pt.Sub(g.Origin)
	if d.X < 0 || d.Y < 0 || d.X >= g.N*g.Cell || d.Y >= g.N*g.Cell {
		return 0, 0, false
	}
	return d.Y / g.Cell, d.X / g.Cell, true
}

// diagonalFill is the fill of the correct answers' cells: a neutral blue-grey
// outside the colour scale, so that the diagonal reads apart from the errors.
var diagonalFill = color.NRGBA{0xcf, 0xd8, 0xe3, 0xff}

// ConfusionColor is the colour of an off-diagonal cell holding share (0…1)
// of its true class's images, on a scale whose darkest colour is reached at
// scale: Sequential reversed, so that more confusion is darker.
func ConfusionColor(share, scale float64) color.NRGBA {
	if scale <= 0 {
		scale = 1
	}
	return Sequential(1 - share/scale)
}

// ConfusionPicture draws counts (rows: true class, columns: predicted
// class) as a grid: each cell holds its count; off-diagonal cells with a
// count are coloured by their share of the row (ConfusionColor, one scale
// for the whole grid, its legend below), cells on the diagonal in a neutral
// fill with a bold count, empty cells blank. Rows are titled "index label",
// columns by index. The picture is on a white background and always the
// same for the same input. It returns an error for a matrix that is not
// square or has negative counts.
func ConfusionPicture(counts [][]int, o ConfusionOptions) (*image.NRGBA, ConfusionGrid, error) {
	n := len(counts)
	for _, row := range counts {
		if len(row) != n {
			return nil, ConfusionGrid{}, fmt.Errorf("viz: confusion matrix of %d rows has a row of %d", n, len(row))
		}
		for _, v := range row {
			if v < 0 {
				return nil, ConfusionGrid{}, fmt.Errorf("viz: confusion matrix holds a negative count")
			}
		}
	}
	if n == 0 {
		return nil, ConfusionGrid{}, fmt.Errorf("viz: empty confusion matrix")
	}
	cell := o.Cell
	if cell <= 0 {
		cell = 44
	}
	st := TextStyle{Size: 13}
	bold := TextStyle{Size: 13, Bold: true}
	small := TextStyle{Size: 12}
	// Row titles: "index label".
	titles := make([]string, n)
	tw := 0
	for t := range titles {
		titles[t] = strconv.Itoa(t)
		if t < len(o.Labels) && o.Labels[t] != "" {
			titles[t] += " " + fitText(o.Labels[t], 150, st)
		}
		w, _ := TextSize(titles[t], st)
		tw = max(tw, w)
	}
	_, lh := TextSize("0", st)
	pad := 10
	top := pad + lh + 4 + lh + 6 // "predicted class →" and the column numbers
	left := pad + lh + 6 + tw + 8
	// Scale: the largest off-diagonal share, rounded up to 5 %.
	worst := 0.0
	for t, row := range counts {
		sum := 0
		for _, v := range row {
			sum += v
		}
		for p, v := range row {
			if p != t && sum > 0 {
				worst = math.Max(worst, float64(v)/float64(sum))
			}
		}
	}
	scale := math.Max(0.05, math.Ceil(worst*20-1e-9)/20)
	grid := ConfusionGrid{Origin: image.Pt(left, top), Cell: cell, N: n, Scale: scale}
	legendH := 56
	w := max(left+n*cell+pad, left+236+18+6+60+pad)
	h := top + n*cell + 12 + legendH + pad
	img, err := newCanvas("confusion matrix", w, h, Light)
	if err != nil {
		return nil, ConfusionGrid{}, err
	}
	DrawText(img, left, pad, "predicted class →", small)
	for p := 0; p < n; p++ {
		drawTextCentered(img, left+p*cell+cell/2, pad+lh+4, strconv.Itoa(p), st)
	}
	// "true class ↓" runs down the left edge, one character a line would be
	// clumsy: a short word above the titles instead.
	DrawText(img, pad, top-lh-6, "true ↓", small)
	line := color.NRGBA{0xb8, 0xbe, 0xc6, 0xff}
	for t, row := range counts {
		y := top + t*cell
		DrawText(img, left-8-tw, y+(cell-lh)/2, titles[t], st)
		sum := 0
		for _, v := range row {
			sum += v
		}
		for p, v := range row {
			r := image.Rect(left+p*cell, y, left+(p+1)*cell, y+cell)
			bg := Light
			style := st
			switch {
			case p == t:
				bg, style = diagonalFill, bold
			case v > 0:
				bg = ConfusionColor(float64(v)/float64(sum), scale)
			}
			fill(img, r, bg)
			if v > 0 || p == t {
				style.Color = inkFor(bg)
				txt := strconv.Itoa(v)
				tw2, _ := TextSize(txt, style)
				if tw2 > cell-2 {
					txt = fitText(txt, cell-2, style)
				}
				drawTextCentered(img, r.Min.X+cell/2, r.Min.Y+(cell-lh)/2, txt, style)
			}
			frame(img, r, 1, line, false)
		}
	}
	// Legend: the colour scale of the errors, and the diagonal's swatch.
	ly := top + n*cell + 12
	bar := ColorBar(220, legendH, 0, 100*scale, "% of the true class's images", func(v float64) color.NRGBA { return Sequential(1 - v) })
	blit(img, bar, image.Pt(left, ly))
	sw := image.Rect(left+236, ly+8, left+236+18, ly+26)
	if sw.Max.X+6+60 <= w {
		fill(img, sw, diagonalFill)
		frame(img, sw, 1, line, false)
		DrawText(img, sw.Max.X+6, sw.Min.Y+1, "correct", small)
	}
	return img, grid, nil
}

// blit copies src onto dst with its top-left corner at at.
func blit(dst *image.NRGBA, src *image.NRGBA, at image.Point) {
	b := src.Bounds()
	for y := 0; y < b.Dy(); y++ {
		if at.Y+y < 0 || at.Y+y >= dst.Bounds().Dy() {
			continue
		}
		for x := 0; x < b.Dx(); x++ {
			if at.X+x < 0 || at.X+x >= dst.Bounds().Dx() {
				continue
			}
			dst.SetNRGBA(at.X+x, at.Y+y, src.NRGBAAt(b.Min.X+x, b.Min.Y+y))
		}
	}
}
