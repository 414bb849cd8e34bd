package gui

import (
	"strings"
	"testing"

	"fovea/modelio"
)

// TestLayerTableNeverCutsNumbers: with VGG-16-sized volumes and a long
// exporter-style layer name, every number cell fits its column whole (no
// "224×224×…"), and a long name is shortened in the middle at a separator,
// keeping its start and its end. (Common practice: a table shows a number
// whole or not at all.)
func TestLayerTableNeverCutsNumbers(t *testing.T) {
	u := openWindow(t, Options{})
	p := u.layers
	u.do(func() {
		p.rows = []modelio.Layer{
			{Name: "/features/features.0/Conv", Op: "Conv", Width: 224, Height: 224, Depth: 64, Params: 1792, MACs: 86704128, Bytes: 12845056, RF: 3},
			{Name: "/encoder/layer4/layer4.1/downsample/downsample.0/Conv", Op: "Conv", Width: 7, Height: 7, Depth: 2048, Params: 2359296, MACs: 115605504, Bytes: 401408, RF: 427},
		}
		p.fitColumns()
	})
	for r := range p.rows {
		for c := 1; c < len(layerColumns); c++ {
			text := p.cell(r, c)
			if w := cellWidth(text, false); w > p.widths[c] {
				t.Errorf("row %d column %s: %q needs %.0f, the column is %.0f", r, layerColumns[c].title, text, w, p.widths[c])
			}
		}
	}
	long := p.rows[1].Name
	short := middleEllipsis(long, nameMax)
	if short == long || !strings.Contains(short, "…") || !strings.HasPrefix(short, "/encoder/") || !strings.HasSuffix(short, "/Conv") ||
		cellWidth(short, false) > nameMax {
		t.Errorf("long name shortened to %q", short)
	}
	if got := middleEllipsis("/features/features.0/Conv", nameMax); got != "/features/features.0/Conv" {
		t.Errorf("a name that fits became %q", got)
	}
}
