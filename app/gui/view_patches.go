package gui

import (
	"cmp"
	"context"
	"fmt"
	"image"
	"image/color"
	"path"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/canvas"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/driver/desktop"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"

	"fovea/modelio"
	"fovea/modelio/prep"
	"fovea/viz"
	"fovea/viz/analysis"
)

// patchesView is the "Strongest patches" tab: for one channel of a scanned
// layer, the probe images that drive it hardest (the scan keeps them), each
// as the enlarged input region its strongest position sees and a thumbnail
// of the whole picture with that region framed. A list of the layer's
// channels, sortable and searchable by number, keeps layers with hundreds
// of channels usable: the patches are always drawn at one readable size.
type patchesView struct {
	u       *ui
	content fyne.CanvasObject
	runner  *runner

	layer  *widget.Select
	sortBy *widget.Select
	jump   *widget.Entry
	list   *widget.List
	about  *widget.Label
	cells  *fyne.Container
	empty  *widget.Label

	cur   *analysis.ScanLayer // the layer shown (nil: none)
	order []int               // its channels in list order
	ch    int                 // the channel shown (-1: none)
	shown []string            // the files of the cells shown (tests read them)
	quiet bool
}

// Sort orders of the channel list.
const (
	sortChannel = "Number"
	sortPeak    = "Strongest"
	sortMost    = "Most firing"
	sortLeast   = "Least firing"
)

// patchTile is the side of an enlarged patch in the window, in pixels.
const patchTile = 112

func newPatchesView(u *ui) *patchesView {
	v := &patchesView{u: u, ch: -1}
	v.runner = u.newRunner(false)
	v.layer = widget.NewSelect(nil, func(name string) {
		if !v.quiet {
			v.showLayer(name, -1)
		}
	})
	v.sortBy = widget.NewSelect([]string{sortChannel, sortPeak, sortMost, sortLeast}, func(string) {
		if !v.quiet {
			v.sortList()
		}
	})
	v.sortBy.Selected = sortChannel
	v.jump = widget.NewEntry()
	v.jump.SetPlaceHolder("channel")
	v.jump.OnSubmitted = func(string) { v.jumpTo() }
	go_ := widget.NewButtonWithIcon("Go", theme.NavigateNextIcon(), v.jumpTo)
	v.list = widget.NewList(
		func() int { return len(v.order) },
		func() fyne.CanvasObject {
			l := widget.NewLabel("000 · fires 100 % · peak 0.000 · dead")
			l.Truncation = fyne.TextTruncateEllipsis
			return l
		},
		func(id widget.ListItemID, o fyne.CanvasObject) {
			l := o.(*widget.Label)
			l.SetText(v.row(id))
			l.Importance = widget.MediumImportance
			if id < len(v.order) && v.cur != nil && len(v.cur.Channels[v.order[id]].Flags) > 0 {
				l.Importance = widget.DangerImportance
			}
			l.Refresh()
		})
	v.list.OnSelected = func(id widget.ListItemID) {
		if !v.quiet && id >= 0 && id < len(v.order) {
			v.showChannel(v.order[id])
		}
	}
	v.about = widget.NewLabel("")
	v.about.Wrapping = fyne.TextWrapWord
	v.empty = widget.NewLabel("")
	v.empty.Wrapping = fyne.TextWrapWord
	v.cells = container.NewGridWrap(fyne.NewSize(1, 1))
	caution := widget.NewLabel("Evidence about this model on these probe images, not a description of what the channel means. Click a patch to open its image in the prediction view.")
	caution.Wrapping = fyne.TextWrapWord
	caution.TextStyle.Italic = true
	bar := container.NewHBox(widget.NewLabel("Layer"), v.layer, widget.NewLabel("  Order"), v.sortBy,
		widget.NewLabel("  Go to"), container.NewGridWrap(fyne.NewSize(72, v.jump.MinSize().Height), v.jump), go_)
	left := container.NewBorder(nil, nil, nil, nil, v.list)
	right := container.NewBorder(v.about, caution, nil, nil, container.NewVScroll(container.NewVBox(v.empty, v.cells)))
	split := container.NewHSplit(left, right)
	split.SetOffset(0.34)
	v.content = container.NewBorder(container.NewVBox(bar, v.runner.box), nil, nil, nil, split)
	return v
}

// show opens the view on channel ch of the scanned layer named name (node
// or output); from the filter-health table and the layer maps.
func (u *ui) showPatches(name string, ch int) {
	if u.scan == nil {
		u.showError("Strongest patches", fmt.Errorf("scan a folder of probe images first (Filter health): the patches come from the scan"))
		return
	}
	for _, l := range u.scan.Layers {
		if l.Name == name || l.Output == name {
			u.showView(viewPatches)
			u.vPatches.showLayer(l.Name, ch)
			return
		}
	}
	u.showError("Strongest patches", fmt.Errorf("layer %s is not one the scan covers (it scans the ReLU-like activations); choose one of those", name))
}

// refresh lists the scanned layers; the layer shown stays when the new scan
// has it.
func (v *patchesView) refresh() {
	u := v.u
	var names []string
	if u.scan != nil {
		for _, l := range u.scan.Layers {
			names = append(names, l.Name)
		}
	}
	v.quiet = true
	v.layer.Options = names
	v.layer.Refresh()
	v.quiet = false
	keep := ""
	if v.cur != nil && slices.Contains(names, v.cur.Name) {
		keep = v.cur.Name
	} else if len(names) > 0 {
		keep = names[0]
	}
	v.showLayer(keep, v.ch)
}

// showLayer shows the layer's channel list and channel ch (-1: the first in
// the list).
func (v *patchesView) showLayer(name string, ch int) {
	u := v.u
	v.cur = nil
	if u.scan != nil {
		for i := range u.scan.Layers {
			if u.scan.Layers[i].Name == name {
				v.cur = &u.scan.Layers[i]
			}
		}
	}
	v.quiet = true
	v.layer.Selected = name
	v.layer.Refresh()
	v.quiet = false
	if v.cur == nil {
		v.order, v.ch = nil, -1
		v.list.Refresh()
		v.cells.Objects = nil
		v.cells.Refresh()
		v.about.SetText("")
		v.empty.SetText("Scan a folder of probe images (Filter health) to see, for each channel, the probe patches that drive it hardest.")
		return
	}
	v.empty.SetText("")
	if ch < 0 || ch >= len(v.cur.Channels) {
		ch = -1
	}
	v.ch = ch
	v.sortList()
}

// sortList orders the channel list and selects the channel shown.
func (v *patchesView) sortList() {
	if v.cur == nil {
		return
	}
	chs := v.cur.Channels
	v.order = v.order[:0]
	for i := range chs {
		v.order = append(v.order, i)
	}
	switch v.sortBy.Selected {
	case sortPeak:
		slices.SortStableFunc(v.order, func(a, b int) int { return cmp.Compare(chs[b].Max, chs[a].Max) })
	case sortMost:
		slices.SortStableFunc(v.order, func(a, b int) int { return cmp.Compare(chs[b].Fires, chs[a].Fires) })
	case sortLeast:
		slices.SortStableFunc(v.order, func(a, b int) int { return cmp.Compare(chs[a].Fires, chs[b].Fires) })
	}
	v.list.Refresh()
	ch := v.ch
	if ch < 0 && len(v.order) > 0 {
		ch = v.order[0]
	}
	v.selectChannel(ch)
}

// selectChannel selects ch in the list (scrolling to it) and shows it.
func (v *patchesView) selectChannel(ch int) {
	if i := slices.Index(v.order, ch); i >= 0 {
		v.quiet = true
		v.list.Select(i)
		v.list.ScrollTo(i)
		v.quiet = false
	}
	v.showChannel(ch)
}

// jumpTo shows the channel number typed in the entry.
func (v *patchesView) jumpTo() {
	if v.cur == nil {
		return
	}
	n, err := strconv.Atoi(strings.TrimSpace(v.jump.Text))
	if err != nil || n < 0 || n >= len(v.cur.Channels) {
		v.u.showError("Going to a channel", fmt.Errorf("%q: %s has channels 0 to %d", v.jump.Text, v.cur.Name, len(v.cur.Channels)-1))
		return
	}
	v.selectChannel(n)
}

// row is one line of the channel list.
func (v *patchesView) row(id int) string {
	if v.cur == nil || id >= len(v.order) {
		return ""
	}
	c := v.cur.Channels[v.order[id]]
	s := fmt.Sprintf("%d · fires %s · peak %s", c.Index, percent(c.Fires), number(c.Max))
	if len(c.Flags) > 0 {
		s += " · " + flagText(c.Flags)
	}
	return s
}

// showChannel draws channel ch's patches, loading the probe images off the
// UI goroutine.
func (v *patchesView) showChannel(ch int) {
	u := v.u
	v.ch = ch
	if v.cur == nil || ch < 0 || ch >= len(v.cur.Channels) || u.ws == nil {
		return
	}
	l, c, ws := v.cur, v.cur.Channels[ch], u.ws
	v.about.SetText(channelStory(l, c, u.scan))
	top, fsys := c.Top, u.scan.FS
	r, g, b, _ := theme.Color(theme.ColorNameBackground).RGBA()
	bg := color.NRGBA{uint8(r >> 8), uint8(g >> 8), uint8(b >> 8), 0xff}
	v.runner.launch("Loading the patches of channel "+strconv.Itoa(ch), "", ws, func(ctx context.Context, _ func(int, int)) (result, error) {
		cells, err := ws.PatchCells(top, "", fsys)
		if err != nil {
			return nil, err
		}
		pics := make([]image.Image, len(cells))
		for i, cell := range cells {
			if ctx.Err() != nil {
				return nil, ctx.Err()
			}
			pic, err := viz.PatchGrid([]viz.PatchCell{cell}, viz.PatchGridOptions{Tile: patchTile, Columns: 1, NoNote: true, Background: bg})
			if err != nil {
				return nil, err
			}
			pics[i] = pic
		}
		return func(current bool) {
			if !current || v.cur != l || v.ch != ch {
				return
			}
			v.cells.Objects = nil
			v.shown = nil
			for i, pic := range pics {
				file := top[i].File
				v.shown = append(v.shown, file)
				v.cells.Objects = append(v.cells.Objects, newClickPicture(pic, func() {
					if fsys != nil { // the embedded demo's probe images
						u.runImage(path.Base(file), "", func() (image.Image, error) { return prep.LoadFS(fsys, file) })
					} else {
						u.openImage(file)
					}
					u.showView(viewPredict)
				}, fmt.Sprintf("%s: value %s at row %d, column %d of the map", filepath.Base(file), number(top[i].Value), top[i].Y, top[i].X)))
			}
			if len(pics) > 0 {
				b := pics[0].Bounds()
				v.cells.Layout = container.NewGridWrap(fyne.NewSize(float32(b.Dx()), float32(b.Dy()))).Layout
			}
			if len(pics) == 0 {
				v.empty.SetText("The scan kept no patches for this channel.")
			}
			v.cells.Refresh()
		}, nil
	})
}

// channelStory says in words what the scan found for a channel: how often
// it fired, and for a dead or rare one why (its bias, how far below zero
// its input stayed, a zero kernel); per class, which class it favours.
func channelStory(l *analysis.ScanLayer, c analysis.ChannelScan, r *analysis.ScanReport) string {
	s := fmt.Sprintf("Channel %d of %s fires on %s of %d probe images (peak %s).", c.Index, l.Name, percent(c.Fires), r.Images, number(c.Max))
	dead := slices.Contains(c.Flags, modelio.FlagDead) || slices.Contains(c.Flags, modelio.FlagRare)
	if dead {
		var why []string
		if c.MaxPreActivation != nil {
			why = append(why, "the largest value reaching its activation was "+number(*c.MaxPreActivation))
		}
		if c.Bias != nil {
			why = append(why, "its bias is "+number(*c.Bias))
		}
		if slices.Contains(c.Flags, modelio.FlagZeroKernel) {
			why = append(why, "its kernel is all zeros")
		}
		if len(why) > 0 {
			s += " " + strings.ToUpper(flagText(c.Flags)[:1]) + flagText(c.Flags)[1:] + ": " + strings.Join(why, "; ") + "."
		}
	}
	if c.SelectiveFor != "" {
		s += fmt.Sprintf(" Responds most to %s (selectivity %.2f: 0 = alike for every class, 1 = that class only).", c.SelectiveFor, c.Selectivity)
	}
	return s
}

// clickPicture is a picture that does one thing when clicked anywhere on it.
type clickPicture struct {
	widget.BaseWidget
	img   *canvas.Image
	onTap func()
	hint  string
}

func newClickPicture(img image.Image, onTap func(), hint string) *clickPicture {
	p := &clickPicture{img: canvas.NewImageFromImage(img), onTap: onTap, hint: hint}
	p.img.FillMode = canvas.ImageFillContain
	p.img.ScaleMode = canvas.ImageScalePixels
	b := img.Bounds()
	p.img.SetMinSize(fyne.NewSize(float32(b.Dx()), float32(b.Dy())))
	p.ExtendBaseWidget(p)
	return p
}

func (p *clickPicture) CreateRenderer() fyne.WidgetRenderer { return widget.NewSimpleRenderer(p.img) }

// Tapped runs the action.
func (p *clickPicture) Tapped(*fyne.PointEvent) {
	if p.onTap != nil {
		p.onTap()
	}
}

// Cursor shows a hand over the picture.
func (p *clickPicture) Cursor() desktop.Cursor { return desktop.PointerCursor }
