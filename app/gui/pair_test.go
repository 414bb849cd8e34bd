package gui

import (
	"strings"
	"testing"

	"fyne.io/fyne/v2/test"
)

// TestPairViewDemoToOcclusion walks the checkpoint pair view as a user
// would: the window on the demo, the unhealthy demo chosen as candidate,
// Compare; the result must say what `fovea compare` says of the pair (the
// CLI's tests check that against the PyTorch-measured truth files), list the
// flipped images, and one click on a flipped image must draw the occlusion
// of both models for its true class.
func TestPairViewDemoToOcclusion(t *testing.T) {
	u := openWindow(t, Options{View: viewPair})
	v := u.vPair
	u.do(func() { test.Tap(button(t, u, "Unhealthy demo")) })
	u.wait()
	if v.b == nil || v.b.Name() != "parts_unhealthy.onnx" {
		t.Fatalf("candidate %v", v.b)
	}
	u.do(func() { test.Tap(button(t, u, "Compare")) })
	u.wait()
	c := v.result
	if c == nil || c.Health == nil || c.Predictions == nil {
		t.Fatalf("no full comparison: %+v", c)
	}
	if len(c.Health.NewlyDead) != 42 || c.Predictions.Worse != 35 || c.Predictions.Better != 7 {
		t.Errorf("newly dead %d, flips %d/%d; want 42 and 35/7 as the command line reports", len(c.Health.NewlyDead), c.Predictions.Worse, c.Predictions.Better)
	}
	if v.pageIm == nil || !strings.Contains(v.summary.Text, "McNemar") || v.pngBtn.Disabled() || v.jsonBtn.Disabled() {
		t.Errorf("page %v, summary %q, exports enabled %v %v", v.pageIm != nil, v.summary.Text, !v.pngBtn.Disabled(), !v.jsonBtn.Disabled())
	}
	if len(v.flips) != 42 {
		t.Fatalf("%d flipped images listed", len(v.flips))
	}
	if len(v.thumbs) != 42 || v.thumbs[0] == nil {
		t.Errorf("%d thumbnails loaded for 42 flipped images", len(v.thumbs))
	}
	u.do(func() { v.flipList.Select(0) })
	u.wait()
	if v.occ.img.Image == nil || !strings.Contains(v.occAbout.Text, v.flips[0].File) {
		t.Errorf("no side-by-side occlusion after choosing %s (%q)", v.flips[0].File, v.occAbout.Text)
	}
}
