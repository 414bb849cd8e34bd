package gui

import (
	"bytes"
	"context"
	"fmt"
	"image"
	"io"
	"path"
	"path/filepath"
	"strings"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/canvas"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/dialog"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"

	"fovea/app/core"
	"fovea/assets"
	"fovea/modelio/classes"
	"fovea/modelio/prep"
	"fovea/viz"
	"fovea/viz/analysis"
)

// scorecardView is the "Scorecard" tab: the open model run over a labelled
// folder or list file, its accuracy, the confusion matrix as a grid to
// click, and the images of the chosen cell as thumbnails that open in the
// prediction view with their true class set as the expected one.
type scorecardView struct {
	u       *ui
	content fyne.CanvasObject
	runner  *runner // the evaluation
	thumbs  *runner // loading a cell's thumbnails

	source  *widget.Label
	runBtn  *widget.Button
	pngBtn  *widget.Button
	csvBtn  *widget.Button
	summary *widget.Label
	matrix  *tapPicture
	cellTxt *widget.Label
	grid    *widget.GridWrap

	data    string               // the folder or list chosen; "" = the demo's probe images
	set     *analysis.Labelled   // what the last evaluation read
	eval    *analysis.Evaluation // the last evaluation of the open model
	cells   viz.ConfusionGrid
	items   []thumb // the thumbnails shown
	pending func()  // run once after the next model is open
}

// thumb is one image of the chosen cell.
type thumb struct {
	row analysis.EvalRow
	img image.Image // what the model saw (nil until loaded or unreadable)
}

// maxThumbs is how many images of one cell the view loads.
const maxThumbs = 96

func newScorecardView(u *ui) *scorecardView {
	v := &scorecardView{u: u}
	v.runner = u.newRunner(true)
	v.thumbs = u.newRunner(false)
	v.source = widget.NewLabel("")
	v.source.Truncation = fyne.TextTruncateEllipsis
	folder := widget.NewButtonWithIcon("Folder…", theme.FolderOpenIcon(), v.chooseFolder)
	list := widget.NewButtonWithIcon("List file…", theme.FileTextIcon(), func() {
		u.openDialog("Open a list of path,label lines", []string{".csv", ".tsv", ".txt"}, v.setData)
	})
	demo := widget.NewButton("Demo probe images", func() { v.setData(""); v.run() })
	v.runBtn = widget.NewButtonWithIcon("Evaluate", theme.MediaPlayIcon(), v.run)
	v.runBtn.Importance = widget.HighImportance
	v.pngBtn = widget.NewButtonWithIcon("Matrix PNG…", theme.DocumentSaveIcon(), v.exportPNG)
	v.csvBtn = widget.NewButtonWithIcon("Table CSV…", theme.DocumentSaveIcon(), v.exportCSV)
	v.summary = widget.NewLabel("")
	v.summary.Wrapping = fyne.TextWrapWord
	v.matrix = newTapPicture(fyne.NewSize(300, 300), v.tapped)
	v.cellTxt = widget.NewLabel("")
	v.cellTxt.Wrapping = fyne.TextWrapWord
	v.grid = widget.NewGridWrap(
		func() int { return len(v.items) },
		func() fyne.CanvasObject {
			img := &canvas.Image{FillMode: canvas.ImageFillContain, ScaleMode: canvas.ImageScaleSmooth}
			img.SetMinSize(fyne.NewSize(72, 72))
			l := widget.NewLabel("0.000")
			l.Alignment = fyne.TextAlignCenter
			l.Truncation = fyne.TextTruncateEllipsis
			return container.NewBorder(nil, l, nil, nil, img)
		},
		func(id widget.GridWrapItemID, o fyne.CanvasObject) {
			if id >= len(v.items) {
				return
			}
			c := o.(*fyne.Container)
			it := v.items[id]
			for _, obj := range c.Objects {
				switch w := obj.(type) {
				case *canvas.Image:
					w.Image = it.img
					w.Refresh()
				case *widget.Label:
					w.SetText(thumbCaption(it.row))
				}
			}
		})
	v.grid.OnSelected = func(id widget.GridWrapItemID) {
		v.grid.UnselectAll()
		if id < len(v.items) {
			v.open(v.items[id].row)
		}
	}
	mistakes := widget.NewButton("All mistakes", func() { v.showCell(-1, -1) })
	unsure := widget.NewButton("Least sure right", func() { v.showCell(-2, -2) })
	bar := container.NewVBox(
		container.NewBorder(nil, nil, widget.NewLabel("Labelled data:"), nil, v.source),
		container.NewHBox(folder, list, demo, v.runBtn, v.pngBtn, v.csvBtn))
	left := container.NewBorder(note("Rows: true class. Columns: predicted. Click a cell."), nil, nil, nil,
		container.NewScroll(v.matrix))
	right := container.NewBorder(container.NewBorder(nil, nil, nil, container.NewVBox(mistakes, unsure), v.cellTxt), nil, nil, nil, v.grid)
	split := container.NewHSplit(left, right)
	split.SetOffset(0.5)
	v.content = container.NewBorder(container.NewVBox(bar, v.runner.box, v.thumbs.box, v.summary), nil, nil, nil, split)
	v.refresh()
	return v
}

// thumbCaption is the line under a thumbnail: for a mistake the class it
// was taken for and how sure the model was, for a right answer its margin.
func thumbCaption(r analysis.EvalRow) string {
	if r.Correct() {
		return fmt.Sprintf("margin %.2f", r.Margin)
	}
	return fmt.Sprintf("p %.2f", r.PPredicted)
}

// setData chooses the labelled data ("" = the demo's probe images).
func (v *scorecardView) setData(p string) {
	v.data = p
	if p != "" {
		v.u.rememberDir(p)
	}
	v.refresh()
}

func (v *scorecardView) chooseFolder() {
	d := dialog.NewFolderOpen(func(l fyne.ListableURI, err error) {
		if err != nil {
			v.u.showError("Choosing a labelled folder", err)
			return
		}
		if l != nil {
			v.setData(l.Path())
		}
	}, v.u.win)
	d.SetTitleText("Choose a folder with one sub-folder per class")
	v.u.startIn(d)
	d.Resize(fileDialogSize)
	d.Show()
}

// modelChanged drops the evaluation of the model that was open.
func (v *scorecardView) modelChanged() {
	v.eval, v.set, v.items = nil, nil, nil
	v.refresh()
	if f := v.pending; f != nil {
		v.pending = nil
		f()
	}
}

// refresh shows the data chosen and the evaluation, if any.
func (v *scorecardView) refresh() {
	u := v.u
	switch {
	case v.data != "":
		v.source.SetText(v.data)
	case u.ws != nil && u.ws.Demo != "":
		v.source.SetText("the demo's probe images (280, 40 a class)")
	default:
		v.source.SetText("none chosen: a folder with one sub-folder per class, or a list of path,label lines")
	}
	if v.eval == nil {
		v.pngBtn.Disable()
		v.csvBtn.Disable()
		v.matrix.set(nil)
		v.summary.SetText("Evaluate the model on labelled images to see its accuracy, where it confuses classes and which images it gets wrong.")
		v.cellTxt.SetText("")
		v.items = nil
		v.grid.Refresh()
		return
	}
	v.pngBtn.Enable()
	v.csvBtn.Enable()
	e := v.eval
	lo, hi := analysis.Wilson(e.Correct, e.Images, analysis.Z95)
	text := fmt.Sprintf("Accuracy %s (%d of %d images), 95 %% interval %s – %s (Wilson score).",
		percent(e.Accuracy()), e.Correct, e.Images, percent(lo), percent(hi))
	if e.Classes > 5 {
		text += fmt.Sprintf(" Top-5: %s.", percent(float64(e.Top5)/float64(e.Images)))
	}
	if n := len(e.Skipped); n > 0 {
		text += fmt.Sprintf(" %d entries skipped, the first %s: %s.", n, e.Skipped[0].File, e.Skipped[0].Reason)
	}
	text += " A score on these images holds for images like them, not for every input the model will meet."
	v.summary.SetText(text)
	pic, grid, err := viz.ConfusionPicture(e.Confusion, viz.ConfusionOptions{Labels: e.Labels})
	if err != nil {
		u.showError("Drawing the confusion matrix", err)
		return
	}
	v.cells = grid
	v.matrix.set(pic)
}

// run evaluates the open model on the chosen data, off the UI goroutine.
func (v *scorecardView) run() {
	u := v.u
	ws := u.ws
	if ws == nil {
		u.showError("Evaluation", fmt.Errorf("open a model first"))
		return
	}
	data := v.data
	if data == "" && ws.Demo == "" && !hasDemoLabels(ws) {
		u.showError("Evaluation", fmt.Errorf("the demo's probe images fit only the demo's classes: choose a labelled folder or list file for %s", ws.Name()))
		return
	}
	u.showView(viewScorecard)
	v.runner.launch("Evaluation", "entries", ws, func(ctx context.Context, progress func(int, int)) (result, error) {
		var set *analysis.Labelled
		var err error
		if data == "" {
			set, err = ws.DemoLabelled()
		} else {
			set, err = ws.OpenLabelled(data)
		}
		if err != nil {
			return nil, err
		}
		e, err := ws.Evaluate(ctx, set, analysis.EvalOptions{}, progress)
		if err != nil {
			return nil, err
		}
		if e.Images == 0 {
			first := ""
			if len(e.Skipped) > 0 {
				first = fmt.Sprintf("; the first, %s: %s", e.Skipped[0].File, e.Skipped[0].Reason)
			}
			return nil, fmt.Errorf("%s: none of the %d entries could be evaluated%s", set.Source, len(set.Samples), first)
		}
		return func(current bool) {
			if current {
				v.set, v.eval = set, e
				v.refresh()
				v.showCell(worstCell(e))
			}
		}, nil
	})
}

// hasDemoLabels reports whether ws's labels are the demo's, so that the
// demo's probe images can be scored by it (a copy of a demo model).
func hasDemoLabels(ws *core.Workspace) bool {
	l, _ := ws.Labels()
	d := assets.Labels()
	if len(l) != len(d) {
		return false
	}
	for i := range l {
		if l[i] != d[i] {
			return false
		}
	}
	return true
}

// worstCell is the off-diagonal cell with the most images, or (-1, -1)
// (all mistakes) when there is none.
func worstCell(e *analysis.Evaluation) (int, int) {
	bt, bp, best := -1, -1, 0
	for t, row := range e.Confusion {
		for p, n := range row {
			if p != t && n > best {
				bt, bp, best = t, p, n
			}
		}
	}
	return bt, bp
}

// tapped selects the cell under a click on the matrix.
func (v *scorecardView) tapped(pt image.Point) {
	if v.eval == nil {
		return
	}
	if t, p, ok := v.cells.At(pt); ok {
		v.showCell(t, p)
	}
}

// showCell lists the images of cell (t, p) as thumbnails; t = -1 lists all
// mistakes, most confident first, t = -2 the right answers with the
// smallest margin. Thumbnails load off the UI goroutine.
func (v *scorecardView) showCell(t, p int) {
	e, set, ws := v.eval, v.set, v.u.ws
	if e == nil || set == nil || ws == nil {
		return
	}
	var rows []analysis.EvalRow
	var what string
	switch {
	case t == -1:
		rows = e.Mistakes
		what = fmt.Sprintf("All %d mistakes, most confident first", len(rows))
	case t < 0:
		rows = e.LeastSure
		what = fmt.Sprintf("The %d right answers with the smallest margin between the two most probable classes", len(rows))
	default:
		rows = e.Cell(t, p)
		if t != p {
			// The most confident mistakes first, as in the mistakes list.
			rows = sortedByConfidence(rows)
		}
		what = fmt.Sprintf("%d images of %s taken for %s", len(rows), classes.Label(e.Labels, t), classes.Label(e.Labels, p))
		if t == p {
			what = fmt.Sprintf("%d images of %s answered right", len(rows), classes.Label(e.Labels, t))
		}
	}
	if len(rows) > maxThumbs {
		what += fmt.Sprintf(" (the first %d shown)", maxThumbs)
		rows = rows[:maxThumbs]
	}
	v.cellTxt.SetText(what + ". Click an image to open it with its true class expected.")
	v.items = make([]thumb, len(rows))
	for i, r := range rows {
		v.items[i] = thumb{row: r}
	}
	v.grid.Refresh()
	cfg, _ := ws.Prep()
	items := v.items
	v.thumbs.launch("Loading thumbnails", "images", ws, func(ctx context.Context, progress func(int, int)) (result, error) {
		imgs := make([]image.Image, len(items))
		for i, it := range items {
			if ctx.Err() != nil {
				return nil, ctx.Err()
			}
			if img, err := set.Load(it.row.File); err == nil {
				imgs[i] = prep.Fit(img, cfg)
			}
			progress(i+1, len(items))
		}
		return func(current bool) {
			if !current || len(v.items) != len(items) || (len(items) > 0 && &v.items[0] != &items[0]) {
				return
			}
			for i := range v.items {
				v.items[i].img = imgs[i]
			}
			v.grid.Refresh()
		}, nil
	})
}

// sortedByConfidence orders rows by the predicted class's probability,
// highest first (a copy).
func sortedByConfidence(rows []analysis.EvalRow) []analysis.EvalRow {
	out := append([]analysis.EvalRow(nil), rows...)
	for i := 1; i < len(out); i++ {
		for j := i; j > 0 && out[j].PPredicted > out[j-1].PPredicted; j-- {
			out[j], out[j-1] = out[j-1], out[j]
		}
	}
	return out
}

// open shows one labelled image in the prediction view with its true class
// set as the expected one; the occlusion is one click away there.
func (v *scorecardView) open(r analysis.EvalRow) {
	u, set := v.u, v.set
	if set == nil {
		return
	}
	name := path.Base(r.File)
	p := set.Path(r.File)
	u.onImage = func() {
		u.vOcc.setExpected(r.True)
		u.vPredict.refresh()
	}
	u.showView(viewPredict)
	u.runImage(name, p, func() (image.Image, error) {
		img, err := set.Load(r.File)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", r.File, err)
		}
		return img, nil
	})
}

// setExpected chooses class i as the class the image should have been.
func (v *occlusionView) setExpected(i int) {
	for k, c := range v.classes {
		if c == i && k+1 < len(v.expect.Options) {
			v.expect.SetSelected(v.expect.Options[k+1])
			return
		}
	}
}

// exportPNG saves the confusion matrix picture.
func (v *scorecardView) exportPNG() {
	if v.eval == nil {
		return
	}
	pic, _, err := viz.ConfusionPicture(v.eval.Confusion, viz.ConfusionOptions{Labels: v.eval.Labels})
	if err != nil {
		v.u.showError("Exporting the matrix", err)
		return
	}
	name := strings.TrimSuffix(v.u.ws.Name(), filepath.Ext(v.u.ws.Name())) + "-confusion.png"
	v.u.saveDialog("Export the confusion matrix", name, []string{".png"}, func(p string) {
		if err := core.SavePNG(p, pic); err != nil {
			v.u.showError("Exporting the matrix", err)
			return
		}
		v.u.status.SetText("Saved " + p)
	})
}

// exportCSV saves the per-class table with the matrix rows.
func (v *scorecardView) exportCSV() {
	e := v.eval
	if e == nil {
		return
	}
	var buf bytes.Buffer
	if err := e.WriteCSV(&buf); err != nil {
		v.u.showError("Exporting the table", err)
		return
	}
	name := strings.TrimSuffix(v.u.ws.Name(), filepath.Ext(v.u.ws.Name())) + "-per-class.csv"
	v.u.saveDialog("Export the per-class table", name, []string{".csv"}, func(p string) {
		err := core.WriteFile(p, func(w io.Writer) error { _, err := w.Write(buf.Bytes()); return err })
		if err != nil {
			v.u.showError("Exporting the table", err)
			return
		}
		v.u.status.SetText("Saved " + p)
	})
}

// tapPicture is a picture that reports where it was clicked, in the
// image's own pixels.
type tapPicture struct {
	widget.BaseWidget
	p     *picture
	onTap func(image.Point)
}

func newTapPicture(min fyne.Size, onTap func(image.Point)) *tapPicture {
	t := &tapPicture{p: newPicture(min, 2), onTap: onTap}
	t.ExtendBaseWidget(t)
	return t
}

func (t *tapPicture) set(img image.Image) {
	t.p.set(img)
	t.Refresh()
}

func (t *tapPicture) CreateRenderer() fyne.WidgetRenderer { return widget.NewSimpleRenderer(t.p.box) }

// Tapped maps the click from the widget's coordinates to the image's.
func (t *tapPicture) Tapped(ev *fyne.PointEvent) {
	img := t.p.img
	if img.Image == nil || img.Size().Width <= 0 || t.onTap == nil {
		return
	}
	b := img.Image.Bounds()
	k := float64(img.Size().Width) / float64(b.Dx())
	pos := ev.Position.Subtract(img.Position())
	t.onTap(image.Pt(int(float64(pos.X)/k), int(float64(pos.Y)/k)))
}
