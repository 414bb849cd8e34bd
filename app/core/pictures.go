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
// where that channel's tile is in the returned picture. The legend says whose scale
// it is: one shared across the layer's channels (the default), or each
// tile's own (PerTile), drawn then as a fraction of each tile's largest
// |value| because no one set of numbers fits every tile.
func (a *Activations) MapPicture(layer string, o viz.GridOptions) (*image.NRGBA, []viz.ChannelStats, error) {
	l, t, err := a.MapLayer(layer)
	if err != nil {
		return nil, nil, err
	}
	grid, stats, err := viz.MapGrid(t, MapLayout, o)
	if err != nil {
		return nil, nil, fmt.Errorf("activation maps of %s: %w", l.Name, err)
	}
	lo, hi := viz.MapRange(stats)
	cmap := mapColours(lo)
	if !(lo < hi) { // every value the same (often all zero): give the legend a range
		hi = lo + 1
	}
	unit := "activation, scale shared across the layer"
	if len(stats) == 1 {
		unit = "activation"
	}
	if o.PerTile {
		lo, hi = 0, 1
		unit = "activation ÷ each tile's own peak"
		if signedLayer(stats) {
			lo = -1
			unit = "activation ÷ each tile's own largest |value|"
		}
	}
	// The tiles move with the grid onto the page: Rect says where each is
	// in the picture returned.
	for i := range stats {
		stats[i].Rect = stats[i].Rect.Add(image.Pt(legendMargin, legendMargin))
	}
	return withLegend(grid, lo, hi, unit, cmap), stats, nil
}

// signedLayer reports whether any drawn channel has a negative value: the
// layer is then drawn with the diverging map.
func signedLayer(stats []viz.ChannelStats) bool {
	lo, _ := viz.MapRange(stats)
	return lo < 0
}

// mapColours is the colour map of an activation layer whose shared range
// starts at lo: viz.Sequential for a non-negative layer (after a ReLU),
// viz.Diverging, white at zero, for a layer with negative values.
func mapColours(lo float64) func(float64) color.NRGBA {
	if lo < 0 {
		return viz.Diverging
	}
	return viz.Sequential
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
// image the model saw (viz.MapOverlayIn), enlarged by factor (0: to about
// 256 pixels) with nearest-neighbour sampling, with the channel's colour
// legend under it. The colours are those of the channel's tile in the grid
// drawn with the same perTile choice: the same colour map (chosen by the
// whole layer's sign) and the same scale, the layer's shared one or the
// channel's own; the legend says which.
func (a *Activations) OverlayPicture(layer string, channel int, opacity float64, factor int, perTile bool) (*image.NRGBA, error) {
	l, t, err := a.MapLayer(layer)
	if err != nil {
		return nil, err
	}
	_, all, err := viz.MapGrid(t, MapLayout, viz.GridOptions{Zoom: 1})
	if err != nil {
		return nil, fmt.Errorf("activation map of %s: %w", l.Name, err)
	}
	if channel < 0 || channel >= len(all) {
		return nil, inputf("", "channel %d of %s: the layer has channels 0 to %d", channel, l.Name, len(all)-1)
	}
	layerLo, layerHi := viz.MapRange(all)
	lo, hi := layerLo, layerHi
	whose := "scale shared across the layer"
	if perTile {
		lo, hi = viz.OwnRange(layerLo, all[channel])
		whose = "this channel's own scale"
	}
	if !(lo < hi) && lo == 0 && hi == 0 {
		hi = 1 // an all-zero layer: any range draws it as zero
	}
	ov, err := viz.MapOverlayIn(a.Input, t, MapLayout, channel, l, opacity, lo, hi)
	if err != nil {
		return nil, inputErr("", fmt.Errorf("activation map of %s: %w", l.Name, err))
	}
	// The bar: the range as numbers. A signed layer keeps the diverging map
	// even for a channel whose own values are all ≥ 0 (OwnRange's lo is
	// then a hair below zero, drawn as 0).
	cmap := mapColours(layerLo)
	barLo := lo
	if barLo > -1e-300 {
		barLo = 0
	}
	if !(barLo < hi) {
		hi = barLo + 1
	}
	if factor <= 0 {
		factor = max(1, 256/max(1, ov.Bounds().Dx()))
	}
	return withLegend(Enlarge(ov, factor), barLo, hi, fmt.Sprintf("channel %d, %s", channel, whose), cmap), nil
}
