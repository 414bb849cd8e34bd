package gui

import (
	"image"
	"math"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/canvas"
	"fyne.io/fyne/v2/container"
)

// A picture shows an image crisp: enlarged by the largest whole factor that
// fits its space, nearest neighbour (so kernels and maps keep their square
// pixels), centred across and at the top of its space. An image larger than the space is shrunk smoothly.
type picture struct {
	img      *canvas.Image
	box      *fyne.Container
	min      fyne.Size
	maxScale int // largest enlargement; 0 = no limit
}

// newPicture makes an empty picture that asks for at least min of space.
func newPicture(min fyne.Size, maxScale int) *picture {
	p := &picture{img: &canvas.Image{FillMode: canvas.ImageFillStretch, ScaleMode: canvas.ImageScalePixels},
		min: min, maxScale: maxScale}
	p.box = container.New(&pictureLayout{p}, p.img)
	return p
}

// set shows img (nil: nothing).
func (p *picture) set(img image.Image) {
	p.img.Image = img
	p.img.Hidden = img == nil
	p.box.Refresh()
	p.img.Refresh()
}

type pictureLayout struct{ p *picture }

func (l *pictureLayout) MinSize([]fyne.CanvasObject) fyne.Size { return l.p.min }

func (l *pictureLayout) Layout(_ []fyne.CanvasObject, size fyne.Size) {
	img := l.p.img
	if img.Image == nil || size.Width <= 0 || size.Height <= 0 {
		img.Resize(fyne.NewSize(0, 0))
		return
	}
	scale := float32(1)
	if c := fyne.CurrentApp().Driver().CanvasForObject(l.p.box); c != nil && c.Scale() > 0 {
		scale = c.Scale()
	}
	b := img.Image.Bounds()
	iw, ih := float64(b.Dx()), float64(b.Dy())
	fit := math.Min(float64(size.Width*scale)/iw, float64(size.Height*scale)/ih)
	k := math.Floor(fit)
	if l.p.maxScale > 0 && k > float64(l.p.maxScale) {
		k = float64(l.p.maxScale)
	}
	if k >= 1 {
		img.ScaleMode = canvas.ImageScalePixels
	} else {
		k = fit
		img.ScaleMode = canvas.ImageScaleSmooth
	}
	w, h := float32(iw*k)/scale, float32(ih*k)/scale
	img.Resize(fyne.NewSize(w, h))
	img.Move(fyne.NewPos((size.Width-w)/2, 0))
}

// gridFit chooses the columns and the size of one square cell of a grid of
// n tiles, each side cells across plus extra pixels (frames, gaps, a label
// line under it), so that the grid fills area as well as it can. The cell is
// at least 1 and at most maxCell pixels.
func gridFit(n, side, extra int, area fyne.Size, maxCell int) (cols, cell int) {
	if n <= 0 || side <= 0 {
		return 1, 1
	}
	w, h := float64(area.Width), float64(area.Height)
	best := -1.0
	cols = 1
	for c := 1; c <= n; c++ {
		rows := (n + c - 1) / c
		cw := (w/float64(c) - float64(extra)) / float64(side)
		ch := (h/float64(rows) - float64(extra)) / float64(side)
		if k := math.Min(cw, ch); k > best {
			best, cols = k, c
		}
	}
	return cols, max(1, min(int(math.Floor(best)), maxCell))
}

// area is the space a view's picture gets: the tab's size (before the first
// layout, estimated from the window) less the height of the view's other
// rows and the width of its side parts.
func (u *ui) area(less fyne.Size) fyne.Size {
	s := u.tabs.Size()
	if s.Width < 100 || s.Height < 100 {
		w := u.win.Canvas().Size()
		s = fyne.NewSize(w.Width*0.58, w.Height-120)
	}
	return fyne.NewSize(max(120, s.Width-less.Width), max(120, s.Height-less.Height))
}
