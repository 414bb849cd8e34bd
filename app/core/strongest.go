package core

import (
	"fmt"
	"image"
	"io/fs"
	"path/filepath"
	"strings"

	"fovea/modelio"
	"fovea/modelio/prep"
	"fovea/viz"
	"fovea/viz/analysis"
)

// ScanLayer finds a layer of the scan by node or output name; the error
// lists the layers the scan covers.
func ScanLayer(r *analysis.ScanReport, name string) (*analysis.ScanLayer, error) {
	var names []string
	for i := range r.Layers {
		l := &r.Layers[i]
		if l.Name == name || l.Output == name {
			return l, nil
		}
		names = append(names, l.Name)
	}
	return nil, inputf("", "layer %q is not one the scan covers (the ReLU-like activations): choose one of %s", name, strings.Join(names, ", "))
}

// NoLayer is the error for a layer name the model does not have.
func NoLayer(m *modelio.Model, name string) error {
	return inputf(m.Name, "no layer %q: give a node or output name that fovea layers lists", name)
}

// PatchCells loads the pictures of a channel's strongest patches as the
// model saw them (fitted with the preprocessing in force, so that the
// boxes, in input pixels, fall where they should) and makes the cells of a
// viz.PatchGrid. caption prefixes each file's base name (e.g. "#3 ").
//
// fsys holds the files when the scan read them from one (the embedded
// demo's probe images); nil means paths of the operating system.
func (w *Workspace) PatchCells(top []analysis.Patch, caption string, fsys fs.FS) ([]viz.PatchCell, error) {
	c, _ := w.snapshot()
	cells := make([]viz.PatchCell, 0, len(top))
	for _, p := range top {
		var img image.Image
		var err error
		if fsys != nil {
			img, err = prep.LoadFS(fsys, p.File)
			if err != nil {
				err = inputErr(p.File, err)
			}
		} else {
			img, err = LoadImage(p.File)
		}
		if err != nil {
			return nil, err
		}
		cells = append(cells, viz.PatchCell{Image: prep.Fit(img, c), Box: p.Rect(), Value: p.Value,
			Caption: caption + filepath.Base(p.File)})
	}
	return cells, nil
}

// TopPicture draws the strongest patches of the given channels of layer l,
// one row per channel.
func (w *Workspace) TopPicture(l *analysis.ScanLayer, channels []int, tile int, fsys fs.FS) (*image.NRGBA, error) {
	var cells []viz.PatchCell
	cols := 0
	for _, ch := range channels {
		if ch < 0 || ch >= len(l.Channels) {
			return nil, inputf("", "channel %d: %s has channels 0 to %d", ch, l.Name, len(l.Channels)-1)
		}
		top := l.Channels[ch].Top
		cols = max(cols, len(top))
		row, err := w.PatchCells(top, fmt.Sprintf("#%d ", ch), fsys)
		if err != nil {
			return nil, err
		}
		cells = append(cells, row...)
		for range cols - len(row) { // keep one channel per row
			cells = append(cells, viz.PatchCell{})
		}
	}
	if len(channels) == 1 {
		cols = min(3, cols)
	}
	what := "channel"
	if len(channels) > 1 {
		what = "channels"
	}
	title := fmt.Sprintf("%s: the probe patches that drive %s %s hardest", l.Name, what, joinInts(channels))
	img, err := viz.PatchGrid(cells, viz.PatchGridOptions{Tile: tile, Columns: cols, Title: title})
	if err != nil {
		return nil, fmt.Errorf("core: %s: %w", w.Model.Name, err)
	}
	return img, nil
}

func joinInts(v []int) string {
	s := make([]string, len(v))
	for i, x := range v {
		s[i] = fmt.Sprint(x)
	}
	return strings.Join(s, ", ")
}
