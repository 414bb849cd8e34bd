package gui

import (
	"image/color"
	"math"

	"fmt"
	"fyne.io/fyne/v2/canvas"
	"fyne.io/fyne/v2/theme"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/layout"

	"fyne.io/fyne/v2/widget"

	"fovea/app/core"
	"fovea/modelio/classes"
)

// predictView is the "Prediction" tab: the picture as the model sees it and
// its most probable classes.
type predictView struct {
	u       *ui
	content fyne.CanvasObject

	demo    *widget.Select
	pic     *picture
	caption *widget.Label
	rows    *fyne.Container
	note    *widget.Label
	quiet   bool
}

// topK is how many classes the view lists.
const topK = 5

func newPredictView(u *ui) *predictView {
	v := &predictView{u: u}
	v.demo = widget.NewSelect(nil, func(name string) {
		if !v.quiet && name != "" {
			u.openDemoImage(name)
		}
	})
	v.demo.PlaceHolder = "(choose one)"
	open := widget.NewButtonWithIcon("Open image…", theme.FileImageIcon(), u.chooseImage)
	explain := widget.NewButtonWithIcon("Explain with occlusion", theme.NavigateNextIcon(), func() {
		u.showView(viewOcclusion)
		if u.occ == nil && u.acts != nil && u.vOcc.expected() >= 0 {
			u.vOcc.run() // an expected class is set (the scorecard sets it): show both heatmaps at once
		}
	})
	v.pic = newPicture(fyne.NewSize(256, 256), 8)
	v.caption = widget.NewLabel("")
	v.caption.Wrapping = fyne.TextWrapWord
	v.rows = container.NewVBox()
	v.note = hint("")
	left := container.NewBorder(container.NewVBox(heading("What the model sees"), v.caption), nil, nil, nil, v.pic.box)
	right := container.NewVBox(heading("Most probable classes"), v.rows, v.note, layout.NewSpacer(), container.NewHBox(explain))
	v.content = container.NewBorder(
		container.NewHBox(open, widget.NewLabel("  or a demo image:"),
			container.NewGridWrap(fyne.NewSize(230, v.demo.MinSize().Height), v.demo)),
		nil, nil, nil,
		container.NewGridWithColumns(2, left, container.NewPadded(right)))
	return v
}

// refresh shows the model's answer for the open image.
func (v *predictView) refresh() {
	u := v.u
	v.quiet = true
	v.demo.Options = core.DemoImages()
	if u.imgPath == "" && u.img != nil {
		v.demo.Selected = u.imgName
	} else {
		v.demo.Selected = ""
	}
	v.demo.Refresh()
	v.quiet = false
	v.rows.Objects = nil
	if u.acts == nil {
		v.pic.set(nil)
		v.caption.SetText("Open an image (Ctrl+I), drop one on the window, or pick a demo image.")
		v.note.SetText("")
		v.rows.Refresh()
		return
	}
	a := u.acts
	v.pic.set(a.Input)
	c, _ := u.ws.Prep()
	name := u.imgName
	if i, ok := demoTruth(u.ws, name); ok && u.imgPath == "" && i < len(labelsOf(u.ws)) {
		name += " (demo image of a " + labelsOf(u.ws)[i] + ")"
	}
	text := fmt.Sprintf("%s, %d×%d after %s resizing; prepared as %s.",
		name, a.Input.Bounds().Dx(), a.Input.Bounds().Dy(), c.Resize, c.String())
	if exp := u.vOcc.expected(); exp >= 0 {
		text += " Expected class: " + classes.Label(labelsOf(u.ws), exp) + "."
	}
	v.caption.SetText(text)
	cl := a.Class
	for i, p := range cl.Top {
		if i >= topK {
			break
		}
		name := p.Label
		if name == "" {
			name = fmt.Sprintf("class %d", p.Index)
		}
		l := widget.NewLabel(fmt.Sprintf("%d. %s", i+1, name))
		l.Truncation = fyne.TextTruncateEllipsis
		if i == 0 {
			l.TextStyle.Bold = true
		}
		v.rows.Add(container.NewGridWithColumns(2, l, probRow(p.Probability)))
	}
	if cl.Softmaxed {
		v.note.SetText("The model outputs probabilities itself.")
	} else {
		v.note.SetText("Probabilities are the softmax of the model's raw scores.")
	}
	v.rows.Refresh()
}

func labelsOf(ws *core.Workspace) []string {
	l, _ := ws.Labels()
	return l
}

// probRow is one probability as a bar and its value: the value stands in
// text beside the bar, never on it, so that it reads the same on a full
// and an empty bar; the bar is filled in proportion to the probability
// (0.2 % fills 0.2 % of it) inside an outlined track, so that its empty
// part is plainly empty.
func probRow(p float64) fyne.CanvasObject {
	track := canvas.NewRectangle(color.Transparent)
	track.StrokeColor = theme.Color(theme.ColorNameForeground)
	track.StrokeWidth = 1
	filled := canvas.NewRectangle(theme.Color(theme.ColorNamePrimary))
	bar := container.New(&fractionLayout{f: p}, track, filled)
	value := widget.NewLabel(percent(p))
	value.Alignment = fyne.TextAlignTrailing
	value.TextStyle.Monospace = true
	return container.NewBorder(nil, nil, nil, container.NewGridWrap(fyne.NewSize(72, value.MinSize().Height), value), bar)
}

// fractionLayout lays out a track (the first object) over the full size,
// vertically centred at a third of the height, and a fill (the second)
// over the fraction f of its width.
type fractionLayout struct{ f float64 }

func (l *fractionLayout) Layout(objs []fyne.CanvasObject, size fyne.Size) {
	h := size.Height / 2
	top := (size.Height - h) / 2
	objs[0].Move(fyne.NewPos(0, top))
	objs[0].Resize(fyne.NewSize(size.Width, h))
	f := float32(math.Max(0, math.Min(1, l.f)))
	objs[1].Move(fyne.NewPos(0, top))
	objs[1].Resize(fyne.NewSize(size.Width*f, h))
}

func (l *fractionLayout) MinSize([]fyne.CanvasObject) fyne.Size { return fyne.NewSize(80, 16) }
