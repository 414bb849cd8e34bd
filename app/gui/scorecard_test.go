package gui

import (
	"path"
	"strings"
	"testing"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/test"
)

// TestScorecardFromMatrixToOcclusion walks the scorecard as a user would:
// the window opens on it with the demo, which evaluates the demo's probe
// images at once (demo.json: the healthy model gets 256 of 280 right); a
// click on the grid's most populated error cell lists its images; a click on
// one opens it in the prediction view with its true class expected; one
// more click shows the occlusion of the predicted and the true class.
func TestScorecardFromMatrixToOcclusion(t *testing.T) {
	u := openWindow(t, Options{View: viewScorecard})
	v := u.vScore
	e := v.eval
	if e == nil || e.Images != 280 || e.Correct != 256 {
		t.Fatalf("the scorecard did not evaluate the demo's 280 probe images with 256 right: %+v", e)
	}
	if !strings.Contains(v.summary.Text, "91.4 %") || !strings.Contains(v.summary.Text, "Wilson") {
		t.Errorf("summary %q does not give the accuracy and its interval", v.summary.Text)
	}
	tr, pr := worstCell(e)
	if tr < 0 || tr == pr {
		t.Fatalf("no error cell in %v", e.Confusion)
	}
	// Click the middle of that cell, through the picture's own scaling.
	img := v.matrix.p.img
	k := img.Size().Width / float32(img.Image.Bounds().Dx())
	c := v.cells
	at := fyne.NewPos(img.Position().X+k*float32(c.Origin.X+pr*c.Cell+c.Cell/2), img.Position().Y+k*float32(c.Origin.Y+tr*c.Cell+c.Cell/2))
	v.showCell(-1, -1) // another list first, so the click is what changes it
	u.do(func() { test.TapAt(v.matrix, at) })
	u.wait()
	if len(v.items) != e.Confusion[tr][pr] {
		t.Fatalf("clicking cell (%d,%d) lists %d images, the cell counts %d", tr, pr, len(v.items), e.Confusion[tr][pr])
	}
	for i, it := range v.items {
		if it.img == nil || it.row.True != tr || it.row.Predicted != pr {
			t.Errorf("thumbnail %d: %+v, image loaded %v", i, it.row, it.img != nil)
		}
	}
	u.do(func() { test.Tap(button(t, u, "Least sure right")) })
	u.wait()
	if len(v.items) != min(len(e.LeastSure), maxThumbs) || len(v.items) == 0 || !v.items[0].row.Correct() {
		t.Errorf("least sure right: %d thumbnails for %d rows", len(v.items), len(e.LeastSure))
	}
	u.do(func() { test.TapAt(v.matrix, at) })
	u.wait()
	row := v.items[0].row
	u.do(func() { v.grid.OnSelected(0) })
	u.wait()
	if u.tabs.Selected() != u.tabByView[viewPredict] || u.imgName != path.Base(row.File) {
		t.Fatalf("after clicking a thumbnail: tab %q, image %q; want the prediction view on %s", u.tabs.Selected().Text, u.imgName, row.File)
	}
	if u.vOcc.expected() != row.True || !strings.Contains(u.vPredict.caption.Text, "Expected class: "+e.Labels[row.True]) {
		t.Errorf("expected class %d, caption %q; want %d (%s)", u.vOcc.expected(), u.vPredict.caption.Text, row.True, e.Labels[row.True])
	}
	if got := u.acts.Class.Top[0].Index; got != row.Predicted {
		t.Errorf("the prediction view says class %d, the scorecard %d", got, row.Predicted)
	}
	u.do(func() { test.Tap(button(t, u, "Explain with occlusion")) })
	u.wait()
	if len(u.occ) != 2 || u.occ[0].Target != row.Predicted || u.occ[1].Target != row.True {
		t.Fatalf("one click after the prediction view: %d heatmaps; want the predicted %d and the true class %d", len(u.occ), row.Predicted, row.True)
	}
}
