package viz

import (
	"fmt"
	"image"
	"image/color"
	"math"
)

// Panel is a picture with a caption, for [Compose] and [Report].
type Panel struct {
	Image   image.Image
	Caption string
}

// ComposeOptions are the knobs of [Compose]; the zero value puts all panels
// in one row at their own sizes on white with 12-pixel gaps.
type ComposeOptions struct {
	// Columns is the number of panels per row; 0 puts all in one row.
	Columns int
	// Gap is the space in pixels between and around panels; 0 means 12.
	Gap int
	// Height scales every picture to this height, keeping its aspect ratio;
	// 0 keeps the pictures' own sizes.
	Height int
	// Pixels scales with nearest-neighbour (kernels, maps) instead of
	// Catmull-Rom (photographs, overlays).
	Pixels bool
	// Background is the page colour; the zero value means [Light].
	Background color.NRGBA
	// Text is the caption style; the zero value means Go Regular 13 px in the
	// ink that suits the background. Captions wrap at the panel's width, at
	// most two lines.
	Text TextStyle
}

// Compose places pictures side by side (in rows when Columns is set), each
// with its caption centred under it, and returns the sheet. Columns are as
// wide as their widest picture and rows as high as their highest one;
// pictures are centred in their cells.
func Compose(panels []Panel, o ComposeOptions) (*image.NRGBA, error) {
	if len(panels) == 0 {
		return nil, fmt.Errorf("viz: compose: no pictures")
	}
	if o.Columns < 0 || o.Gap < 0 || o.Height < 0 {
		return nil, fmt.Errorf("viz: compose: negative columns %d, gap %d or height %d", o.Columns, o.Gap, o.Height)
	}
	gap := o.Gap
	if gap == 0 {
		gap = 12
	}
	bg := o.Background
	if bg == (color.NRGBA{}) {
		bg = Light
	}
	st := o.Text
	if st == (TextStyle{}) {
		st = TextStyle{Size: 13}
	}
	if st.Color == (color.NRGBA{}) {
		st.Color = inkFor(bg)
	}
	cols := o.Columns
	if cols == 0 || cols > len(panels) {
		cols = len(panels)
	}
	rows := (len(panels) + cols - 1) / cols

	// Sizes after scaling.
	sizes := make([]image.Point, len(panels))
	for i, p := range panels {
		if p.Image == nil {
			return nil, fmt.Errorf("viz: compose: picture %d is missing", i)
		}
		b := p.Image.Bounds()
		if b.Empty() {
			return nil, fmt.Errorf("viz: compose: picture %d is empty", i)
		}
		sz := b.Size()
		if o.Height > 0 {
			sz = image.Pt(max(1, int(math.Round(float64(b.Dx())*float64(o.Height)/float64(b.Dy())))), o.Height)
		}
		if int64(sz.X)*int64(sz.Y) > MaxPixels {
			return nil, fmt.Errorf("viz: compose: picture %d would be %d×%d, above %d pixels", i, sz.X, sz.Y, MaxPixels)
		}
		sizes[i] = sz
	}
	colW := make([]int, cols)
	rowH := make([]int, rows)
	for i, sz := range sizes {
		colW[i%cols] = max(colW[i%cols], sz.X)
		rowH[i/cols] = max(rowH[i/cols], sz.Y)
	}
	// Captions, wrapped to the column width.
	_, lineH := TextSize("Ag", st)
	captions := make([][]string, len(panels))
	capH := make([]int, rows)
	for i, p := range panels {
		if p.Caption == "" {
			continue
		}
		lines := wrapText(p.Caption, colW[i%cols], st)
		if len(lines) > 2 {
			lines = append(lines[:1], fitText(joinWords(lines[1:]), colW[i%cols], st))
		}
		captions[i] = lines
		capH[i/cols] = max(capH[i/cols], len(lines)*lineH+6)
	}
	W, H := gap, gap
	for _, w := range colW {
		W += w + gap
	}
	for r, h := range rowH {
		H += h + capH[r] + gap
	}
	img, err := newCanvas("composed sheet", W, H, bg)
	if err != nil {
		return nil, err
	}
	y := gap
	for r := range rows {
		x := gap
		for c := range cols {
			i := r*cols + c
			if i >= len(panels) {
				break
			}
			sz := sizes[i]
			at := image.Pt(x+(colW[c]-sz.X)/2, y+(rowH[r]-sz.Y)/2)
			cell := image.Rectangle{at, at.Add(sz)}
			if sz == panels[i].Image.Bounds().Size() {
				paste(img, panels[i].Image, cell.Min)
			} else {
				scaleTo(img, panels[i].Image, cell, o.Pixels)
			}
			for k, line := range captions[i] {
				drawTextCentered(img, x+colW[c]/2, y+rowH[r]+4+k*lineH, line, st)
			}
			x += colW[c] + gap
		}
		y += rowH[r] + capH[r] + gap
	}
	return img, nil
}

func joinWords(lines []string) string {
	s := ""
	for i, l := range lines {
		if i > 0 {
			s += " "
		}
		s += l
	}
	return s
}
