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
