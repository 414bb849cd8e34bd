package gui

import (
	"path"
	"slices"
	"strconv"
	"strings"
	"testing"

	"fyne.io/fyne/v2/test"
	"fyne.io/fyne/v2/widget"

	"fovea/modelio"
	"fovea/viz/analysis"
)

// TestPatchesFromScanRow: after a scan of the unhealthy demo, the
// "Strongest patches" button of a dead row opens that channel's patches
// (the scan's strongest images, in its order) with why it is dead; jumping
// to a channel number and sorting by firing keep the list whole; clicking a
// patch opens its image in the prediction view. (The patches themselves are
// checked against per-image runs in the CLI's and the analysis' tests.)
func TestPatchesFromScanRow(t *testing.T) {
	u := openWindow(t, Options{View: viewHealth})
	u.do(func() { test.Tap(button(t, u, "Unhealthy demo")) })
	u.wait()
	v := u.vHealth
	u.do(func() { test.Tap(v.scanBtn) })
	u.wait()
	if u.scan == nil || u.errShown > 0 {
		t.Fatalf("no scan (error: %s)", dialogText(u))
	}
	row := slices.IndexFunc(v.rows, func(r analysis.ScanRow) bool { return slices.Contains(r.Flags, modelio.FlagDead) })
	if row < 0 {
		t.Fatal("the unhealthy demo's scan has no dead row")
	}
	u.do(func() { v.table.Select(widget.TableCellID{Row: row, Col: 0}) })
	u.do(func() { test.Tap(v.patchBtn) })
	u.wait()
	p := u.vPatches
	if u.tabs.Selected() != u.tabByView[viewPatches] || p.cur == nil || p.cur.Name != v.rows[row].Layer || p.ch != v.rows[row].Index {
		t.Fatalf("the patches view does not show %s channel %d", v.rows[row].Layer, v.rows[row].Index)
	}
	c := p.cur.Channels[p.ch]
	var want []string
	for _, pt := range c.Top {
		want = append(want, pt.File)
	}
	if len(want) == 0 || !slices.Equal(p.shown, want) || len(p.cells.Objects) != len(want) {
		t.Fatalf("patches shown %v, the scan kept %v", p.shown, want)
	}
	if !strings.Contains(p.about.Text, "largest value reaching its activation") {
		t.Errorf("no reason given for a dead channel: %q", p.about.Text)
	}
	// Jump to the last channel, then sort: every channel stays listed.
	last := len(p.cur.Channels) - 1
	u.do(func() { p.jump.SetText(strconv.Itoa(last)); p.jumpTo() })
	u.wait()
	if p.ch != last {
		t.Errorf("jump to %d shows channel %d", last, p.ch)
	}
	u.do(func() { p.sortBy.SetSelected(sortLeast) })
	u.wait()
	if len(p.order) != len(p.cur.Channels) || p.cur.Channels[p.order[0]].Fires > p.cur.Channels[p.order[len(p.order)-1]].Fires {
		t.Errorf("sorted by least firing: %v", p.order)
	}
	// A patch opens its image in the prediction view.
	file := p.shown[0]
	u.do(func() { test.Tap(p.cells.Objects[0].(*clickPicture)) })
	u.wait()
	// The demo's probes are embedded files: the image opens by its name.
	if u.imgName != path.Base(file) || u.img == nil || u.tabs.Selected() != u.tabByView[viewPredict] {
		t.Errorf("clicking a patch opened %q (want %q)", u.imgName, path.Base(file))
	}
}
