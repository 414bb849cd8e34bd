package core

import (
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"strings"

	"fovea/modelio"
	"fovea/viz"
)

// MapLayer returns the captured activation layer named name (node or output
// tensor name; "" = the first), with its map from a.
func (a *Activations) MapLayer(name string) (modelio.Layer, modelio.Tensor, error) {
	var names []string
	for _, l := range a.Layers {
		if name == "" || l.Name == name || l.Output == name {
			t, ok := a.Maps[l.Output]
			if !ok {
				return l, modelio.Tensor{}, fmt.Errorf("core: layer %s: its activation map was not captured", l.Name)
			}
			return l, t, nil
		}
		names = append(names, l.Name)
	}
	if name == "" {
		return modelio.Layer{}, modelio.Tensor{}, inputf("", "the model has no activation layer to show")
	}
	return modelio.Layer{}, modelio.Tensor{}, inputf("", "no activation layer %q (layers: %s)", name, strings.Join(names, ", "))
}

// MapPicture draws the activation-map grid of one layer (viz.MapGrid) with
// its colour legend under it, on a light page. Each ChannelStats.Rect says
// where that channel's tile is in the returned picture.
func (a *Activations) MapPicture(layer string, o viz.GridOptions) (*image.NRGBA, []viz.ChannelStats, error) {
	l, t, err := a.MapLayer(layer)
	if err != nil {
		return nil, nil, err
	}
	grid, stats, err := viz.MapGrid(t, MapLayout, o)
	if err != nil {
		return nil, nil, fmt.Errorf("core: activation maps of %s: %w", l.Name, err)
	}
	lo, hi := viz.MapRange(stats)
	cmap := viz.Sequential
	if lo < 0 {
		cmap = viz.Diverging
	}
	if !(lo < hi) { // every value the same (often all zero): give the legend a range
		hi = lo + 1
	}
	unit := "activation"
	if o.PerTile {
		unit = "activation (each tile scaled to its own range)"
	}
	// The tiles move with the grid onto the page: Rect says where each is
	// in the picture returned.
	for i := range stats {
		stats[i].Rect = stats[i].Rect.Add(image.Pt(legendMargin, legendMargin))
	}
	return withLegend(grid, lo, hi, unit, cmap), stats, nil
}

// legendHeight is the height of a horizontal colour bar with its labels;
// legendMargin the page's margin around the picture and the bar.
const (
	legendHeight = 56
	legendMargin = 8
)

// withLegend puts pic on a light page with a horizontal colour bar under it.
func withLegend(pic *image.NRGBA, lo, hi float64, unit string, cmap func(float64) color.NRGBA) *image.NRGBA {
	const margin = legendMargin
	pw, ph := pic.Bounds().Dx(), pic.Bounds().Dy()
	barW := max(240, min(pw, 480))
	w := max(pw, barW) + 2*margin
	h := ph + legendHeight + 3*margin
	page := image.NewNRGBA(image.Rect(0, 0, w, h))
	draw.Draw(page, page.Rect, &image.Uniform{viz.Light}, image.Point{}, draw.Src)
	draw.Draw(page, image.Rect(margin, margin, margin+pw, margin+ph), pic, pic.Bounds().Min, draw.Src)
	bar := viz.ColorBar(barW, legendHeight, lo, hi, unit, cmap)
	y := margin*2 + ph
	draw.Draw(page, image.Rect(margin, y, margin+barW, y+legendHeight), bar, image.Point{}, draw.Src)
	return page
}

// Enlarge scales img up by an integer factor with nearest-neighbour
// sampling, so that every input pixel stays a crisp square.
func Enlarge(img image.Image, factor int) *image.NRGBA {
	b := img.Bounds()
	if factor <= 1 {
		out := image.NewNRGBA(image.Rect(0, 0, b.Dx(), b.Dy()))
		draw.Draw(out, out.Rect, img, b.Min, draw.Src)
		return out
	}
	out := image.NewNRGBA(image.Rect(0, 0, b.Dx()*factor, b.Dy()*factor))
	for y := 0; y < out.Rect.Dy(); y++ {
		for x := 0; x < out.Rect.Dx(); x++ {
			out.Set(x, y, img.At(b.Min.X+x/factor, b.Min.Y+y/factor))
		}
	}
	return out
}

// OverlayPicture draws one channel of a layer's activation map over the
// image the model saw (viz.MapOverlay), enlarged by factor (0: to about 256
// pixels) with nearest-neighbour sampling, with the channel's colour legend
// under it.
func (a *Activations) OverlayPicture(layer string, channel int, opacity float64, factor int) (*image.NRGBA, error) {
	l, t, err := a.MapLayer(layer)
	if err != nil {
		return nil, err
	}
	ov, err := viz.MapOverlay(a.Input, t, MapLayout, channel, l, opacity)
	if err != nil {
		return nil, inputErr("", fmt.Errorf("activation map of %s: %w", l.Name, err))
	}
	_, stats, err := viz.MapGrid(t, MapLayout, viz.GridOptions{Channels: []int{channel}})
	if err != nil {
		return nil, fmt.Errorf("core: activation map of %s: %w", l.Name, err)
	}
	// MapOverlay colours with the channel's own range (viz.MapColor).
	lo, hi := viz.MapRange(stats)
	cmap := viz.Sequential
	if lo < 0 {
		cmap = viz.Diverging
	}
	if !(lo < hi) {
		hi = lo + 1
	}
	if factor <= 0 {
		factor = max(1, 256/max(1, ov.Bounds().Dx()))
	}
	return withLegend(Enlarge(ov, factor), lo, hi, fmt.Sprintf("activation of channel %d of %s", channel, l.Name), cmap), nil
}
