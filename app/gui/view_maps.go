package gui

import (
	"fmt"
	"slices"
	"strconv"
	"strings"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/widget"

	"fovea/modelio"
	"fovea/viz"
)

// mapsView is the "Layer maps" tab: every channel of one layer's output on
// the open image, and one channel laid over the image.
type mapsView struct {
	u       *ui
	content fyne.CanvasObject

	layer   *widget.Select
	perTile *widget.Check
	channel *widget.Select
	about   *widget.Label
	grid    *picture
	overlay *picture
	stats   *widget.Label
	tiles   []viz.ChannelStats // each channel's tile in the grid picture

	layers []modelio.Layer // the layers with maps, in the select's order
	quiet  bool
}

func newMapsView(u *ui) *mapsView {
	v := &mapsView{u: u}
	v.layer = widget.NewSelect(nil, func(name string) {
		if v.quiet {
			return
		}
		for _, l := range v.layers {
			if l.Name == name {
				u.chooseLayer(l.Output, false)
			}
		}
	})
	v.perTile = widget.NewCheck("Scale each map on its own", func(bool) { v.draw() })
	v.channel = widget.NewSelect(nil, func(string) {
		if !v.quiet {
			v.drawOverlay()
		}
	})
	v.about = widget.NewLabel("")
	v.about.Wrapping = fyne.TextWrapWord
	v.grid = newPicture(fyne.NewSize(300, 300), 3)
	v.overlay = newPicture(fyne.NewSize(200, 200), 2)
	v.stats = widget.NewLabel("")
	v.stats.Wrapping = fyne.TextWrapWord
	patches := widget.NewButton("Strongest patches", func() {
		l, ok := v.current()
		ch, err := strconv.Atoi(strings.TrimPrefix(v.channel.Selected, "channel "))
		if ok && err == nil {
			u.showPatches(l.Name, ch)
		}
	})
	right := container.NewBorder(container.NewHBox(widget.NewLabel("Over the image:"), v.channel, patches), nil, nil, nil, v.overlay.box)
	split := container.NewHSplit(v.grid.box, right)
	split.SetOffset(0.62)
	v.content = container.NewBorder(
		container.NewVBox(container.NewHBox(widget.NewLabel("Layer"), v.layer, v.perTile), v.about),
		v.stats, nil, nil, split)
	return v
}

// chooseLayer shows the layer with output tensor out; from the layer panel
// it also brings the maps view to the front.
func (u *ui) chooseLayer(out string, fromPanel bool) {
	u.layer = out
	if fromPanel {
		u.showView(viewMaps)
	} else {
		u.layers.show(out)
	}
	u.vMaps.refresh()
}

// refresh lists the layers with maps and draws the chosen one.
func (v *mapsView) refresh() {
	u := v.u
	v.layers = nil
	if u.ws != nil {
		v.layers = u.ws.Model.ActivationLayers()
	}
	var names []string
	for _, l := range v.layers {
		names = append(names, l.Name)
	}
	v.quiet = true
	v.layer.Options = names
	v.layer.Selected = ""
	for _, l := range v.layers {
		if l.Output == u.layer {
			v.layer.Selected = l.Name
		}
	}
	if v.layer.Selected == "" && u.layer == "" && len(names) > 0 {
		v.layer.Selected = names[0]
	}
	v.layer.Refresh()
	v.quiet = false
	v.draw()
}

// current returns the layer to draw.
func (v *mapsView) current() (modelio.Layer, bool) {
	for _, l := range v.layers {
		if l.Name == v.layer.Selected {
			return l, true
		}
	}
	return modelio.Layer{}, false
}

// draw renders the chosen layer's maps on the open image.
func (v *mapsView) draw() {
	u := v.u
	v.grid.set(nil)
	v.overlay.set(nil)
	v.stats.SetText("")
	v.tiles = nil
	l, ok := v.current()
	switch {
	case u.ws == nil:
		v.about.SetText("")
		return
	case !ok && u.layer != "":
		name := u.layer
		if pl, found := u.ws.Layer(u.layer); found {
			name = fmt.Sprintf("%s (%s, output %s)", pl.Name, pl.Op, pl.WHD())
		}
		v.about.SetText("Layer " + name + " has no activation maps to show: pick a convolution, activation or pooling layer.")
		return
	case !ok:
		v.about.SetText("This model has no layer with activation maps.")
		return
	}
	about := fmt.Sprintf("%s · %s · output %s (width × height × channels)", l.Name, l.Op, l.WHD())
	if l.RF > 0 {
		about += fmt.Sprintf(" · each value sees %d×%d pixels of the input", l.RF, l.RF)
	}
	if u.acts == nil {
		v.about.SetText(about + ". Open an image to see its maps.")
		return
	}
	v.about.SetText(about + ".")
	_, t, err := u.acts.MapLayer(l.Output)
	if err != nil {
		v.about.SetText(plainError(err))
		return
	}
	// The grid gets about 60 % of the width (the overlay the rest) and the
	// height less the rows above and below and the legend under the grid.
	zoom, cols := 1, 0
	if len(t.Shape) == 4 {
		c, h, w := int(t.Shape[1]), int(t.Shape[2]), int(t.Shape[3])
		a := u.area(fyne.NewSize(0, 190))
		cols, zoom = gridFit(c, max(h, w), 22, fyne.NewSize(a.Width*0.6, a.Height), 16)
	}
	pic, stats, err := u.acts.MapPicture(l.Output, viz.GridOptions{Zoom: zoom, Columns: cols, PerTile: v.perTile.Checked, Labels: true})
	if err != nil {
		v.about.SetText(plainError(err))
		return
	}
	v.grid.set(pic)
	v.tiles = stats
	v.stats.SetText(statsText(stats))

	chans := make([]string, len(stats))
	for i, s := range stats {
		chans[i] = "channel " + strconv.Itoa(s.Channel)
	}
	v.quiet = true
	v.channel.Options = chans
	if !slices.Contains(chans, v.channel.Selected) && len(stats) > 0 {
		v.channel.Selected = "channel " + strconv.Itoa(strongest(stats))
	}
	v.channel.Refresh()
	v.quiet = false
	v.drawOverlay()
}

// drawOverlay lays the chosen channel over the image the model saw.
func (v *mapsView) drawOverlay() {
	u := v.u
	l, ok := v.current()
	ch, err := strconv.Atoi(strings.TrimPrefix(v.channel.Selected, "channel "))
	if !ok || u.acts == nil || err != nil {
		v.overlay.set(nil)
		return
	}
	pic, err := u.acts.OverlayPicture(l.Output, ch, 0.7, 0, v.perTile.Checked)
	if err != nil {
		v.overlay.set(nil)
		v.stats.SetText(plainError(err))
		return
	}
	v.overlay.set(pic)
}

// strongest is the channel with the largest maximum.
func strongest(stats []viz.ChannelStats) int {
	best := 0
	for i, s := range stats {
		if s.Max > stats[best].Max {
			best = i
		}
	}
	return stats[best].Channel
}

// statsText sums up the channels: the strongest and those silent on this
// image.
func statsText(stats []viz.ChannelStats) string {
	order := slices.Clone(stats)
	slices.SortStableFunc(order, func(a, b viz.ChannelStats) int {
		switch {
		case a.Max > b.Max:
			return -1
		case a.Max < b.Max:
			return 1
		}
		return 0
	})
	var top, silent []string
	for i, s := range order {
		if i < 3 && s.Max > 0 {
			top = append(top, fmt.Sprintf("%d (peak %s, active on %s of positions)", s.Channel, number(s.Max), percent(s.Fires)))
		}
	}
	for _, s := range stats {
		if s.Max <= 0 {
			silent = append(silent, strconv.Itoa(s.Channel))
		}
	}
	text := "Strongest channels on this image: " + strings.Join(top, ", ") + "."
	if len(top) == 0 {
		text = "No channel responds on this image."
	}
	if len(silent) > 0 {
		text += fmt.Sprintf(" Silent on this image (%d of %d): %s.", len(silent), len(stats), strings.Join(silent, ", "))
	}
	return text
}
