package core

import (
	"context"
	"errors"
	"image"
	"time"

	"fovea/viz"
)

// ReportInput is what goes into the one-page "explain a misclassification"
// picture.
type ReportInput struct {
	Image     image.Image // the image as loaded
	ImageName string      // shown on the page (file name)
	K         int         // rows of the top-k table; 0 = 5
	// Versus is the class the image should have been, or -1 for none: the
	// page then shows the predicted class's heatmap alone.
	Versus    int
	Occlusion viz.OcclusionSettings
	// Occlusions already computed for this image and settings (the window has
	// them); nil = computed here for the predicted class and Versus.
	Occlusions []*viz.Occlusion
	Date       time.Time // printed on the page; zero = now
}

// Report composes the one-page picture (viz.Report): the image, the top-k
// predictions, the occlusion heatmaps of the predicted and the expected
// class side by side on a shared scale with their legend, the model's name,
// the preprocessing and occlusion settings, the date and the caution that a
// heatmap is evidence about one model on one image, not proof.
func (w *Workspace) Report(ctx context.Context, in ReportInput, progress func(done, total int)) (*image.NRGBA, error) {
	return nil, errors.New("core: report is not wired yet (waiting for viz.Report)")
}
