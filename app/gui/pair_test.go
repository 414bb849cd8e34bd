package gui

import (
	"encoding/json"
	"os"
	"path/filepath"
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
	// The flips PyTorch's predictions of the two checkpoints give
	// (assets/demo/demo.json, probe.predictions).
	var demo struct {
		Probe struct {
			Predictions []struct{ Label, Healthy, Unhealthy int }
		}
	}
	raw, err := os.ReadFile(filepath.Join("..", "..", "assets", "demo", "demo.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(raw, &demo); err != nil {
		t.Fatal(err)
	}
	worse, better := 0, 0
	for _, p := range demo.Probe.Predictions {
		switch {
		case p.Healthy == p.Label && p.Unhealthy != p.Label:
			worse++
		case p.Healthy != p.Label && p.Unhealthy == p.Label:
			better++
		}
	}
	if len(c.Health.NewlyDead) == 0 || c.Predictions.Worse != worse || c.Predictions.Better != better || worse == 0 {
		t.Errorf("newly dead %d, flips %d/%d; PyTorch's predictions give %d/%d", len(c.Health.NewlyDead), c.Predictions.Worse, c.Predictions.Better, worse, better)
	}
	if v.pageIm == nil || !strings.Contains(v.summary.Text, "McNemar") || v.pngBtn.Disabled() || v.jsonBtn.Disabled() {
		t.Errorf("page %v, summary %q, exports enabled %v %v", v.pageIm != nil, v.summary.Text, !v.pngBtn.Disabled(), !v.jsonBtn.Disabled())
	}
	if len(v.flips) != worse+better {
		t.Fatalf("%d flipped images listed", len(v.flips))
	}
	if len(v.thumbs) != len(v.flips) || v.thumbs[0] == nil {
		t.Errorf("%d thumbnails loaded for %d flipped images", len(v.thumbs), len(v.flips))
	}
	u.do(func() { v.flipList.Select(0) })
	u.wait()
	if v.occ.img.Image == nil || !strings.Contains(v.occAbout.Text, v.flips[0].File) {
		t.Errorf("no side-by-side occlusion after choosing %s (%q)", v.flips[0].File, v.occAbout.Text)
	}
}
