package viz

import (
	"errors"
	"fmt"
	"image"
	"image/color"
)

// PatchCell is one of a channel's strongest probe patches, to be drawn by
// PatchGrid.
type PatchCell struct {
	// Image is the probe picture as the model saw it (fitted to the input
	// size): Box is in its pixels.
	Image image.Image
	Box   image.Rectangle // the receptive field of the strongest position
	Value float64         // the channel's value there
	// Caption names the picture under the cell (cut at the end to fit).
	Caption string
}

// PatchGridOptions are the knobs of PatchGrid.
type PatchGridOptions struct {
	// Tile is the side, in pixels, of each enlarged patch; 0 means 96.
	Tile int
	// Columns is the number of cells per row; 0 means 3 (a 3×3 grid for the
	// default nine patches).
	Columns int
	// Title, when not empty, is written above the grid.
	Title string
	// Background is the page colour (the text takes the ink that reads on
	// it); the zero value means [Light].
	Background color.NRGBA
	// NoNote leaves out the caution under the grid (for a window that
	// shows it once beside several grids).
	NoNote bool
}

// patchBox is the colour of the receptive-field box on the thumbnails:
// the severe-flag rose, visible on photographs of most colours.
var patchBox = flagSevere

// PatchGrid draws a channel's strongest patches: for each, the input
// region its strongest position sees, enlarged with nearest-neighbour
// sampling (so that its pixels stay visible), a thumbnail of the whole
// picture with that region framed, the value, and the caption. A caution
// under the grid says what the patches are evidence of.
func PatchGrid(cells []PatchCell, o PatchGridOptions) (*image.NRGBA, error) {
	if len(cells) == 0 {
		return nil, errors.New("viz: patch grid: no patches")
	}
	tile := o.Tile
	if tile == 0 {
		tile = 96
	}
	if tile < 16 || tile > 1024 {
		return nil, fmt.Errorf("viz: patch grid: tile %d pixels: want 16 to 1024", tile)
	}
	cols := o.Columns
	if cols <= 0 {
		cols = 3
	}
	cols = min(cols, len(cells))
	rows := (len(cells) + cols - 1) / cols
	thumb := tile / 2
	const gap, pad = 8, 12
	small := TextStyle{Size: 11}
	bold := TextStyle{Size: 12, Bold: true}
	_, lh := TextSize("Ag", small)
	cellW := tile + gap/2 + thumb
	cellH := tile + 4 + lh
	titleH := 0
	if o.Title != "" {
		_, th := TextSize(o.Title, bold)
		titleH = th + gap
	}
	caution := "Evidence about this model on these probe images, not a description of what the channel means."
	w := pad*2 + cols*cellW + (cols-1)*gap
	lines := wrapText(caution, w-2*pad, small)
	if o.NoNote {
		lines = nil
	}
	h := pad*2 + titleH + rows*cellH + (rows-1)*gap + len(lines)*lh
	if len(lines) > 0 {
		h += gap
	}
	bg := o.Background
	if bg == (color.NRGBA{}) {
		bg = Light
	}
	ink := inkFor(bg)
	muted := inkMuted
	if ink == inkLight {
		muted = color.NRGBA{0xa8, 0xad, 0xb3, 0xff}
	}
	bold.Color = ink
	img, err := newCanvas("patch grid", w, h, bg)
	if err != nil {
		return nil, err
	}
	if o.Title != "" {
		DrawText(img, pad, pad, fitText(o.Title, w-2*pad, bold), bold)
	}
	for i, c := range cells {
		if c.Image == nil && c.Caption == "" {
			continue // an empty place (a row with fewer patches)
		}
		x := pad + (i%cols)*(cellW+gap)
		y := pad + titleH + (i/cols)*(cellH+gap)
		patch := image.Rect(x, y, x+tile, y+tile)
		fill(img, patch, outlineFor(bg))
		if c.Image != nil {
			box := c.Box.Intersect(c.Image.Bounds())
			if box.Empty() {
				box = c.Image.Bounds()
			}
			if sub, ok := c.Image.(interface {
				SubImage(image.Rectangle) image.Image
			}); ok {
				scaleTo(img, sub.SubImage(box), patch, true)
			}
			t := scaleTo(img, c.Image, image.Rect(x+tile+gap/2, y, x+tile+gap/2+thumb, y+thumb), false)
			if sb := c.Image.Bounds(); !t.Empty() && sb.Dx() > 0 && sb.Dy() > 0 {
				sx := float64(t.Dx()) / float64(sb.Dx())
				sy := float64(t.Dy()) / float64(sb.Dy())
				r := image.Rect(t.Min.X+int(float64(box.Min.X-sb.Min.X)*sx), t.Min.Y+int(float64(box.Min.Y-sb.Min.Y)*sy),
					t.Min.X+int(float64(box.Max.X-sb.Min.X)*sx+0.999), t.Min.Y+int(float64(box.Max.Y-sb.Min.Y)*sy+0.999))
				frame(img, r, 1, patchBox, false)
			}
		}
		DrawText(img, x+tile+gap/2, y+thumb+4, fitText(fmtG(c.Value), thumb+gap, bold), bold)
		DrawText(img, x, y+tile+4, fitText(c.Caption, cellW, small), TextStyle{Size: 11, Color: muted})
	}
	y := pad + titleH + rows*cellH + (rows-1)*gap + gap
	for _, l := range lines {
		DrawText(img, pad, y, l, TextStyle{Size: 11, Color: muted})
		y += lh
	}
	return img, nil
}
