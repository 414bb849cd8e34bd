package core

import (
	"context"
	"fmt"
	"image"
	"time"

	"fovea/modelio/classes"
	"fovea/modelio/infer"
	"fovea/modelio/prep"
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
	Occlusion viz.OcclusionSettings // zero Patch and Stride: DefaultOcclusion
	// Occlusions already computed for this image with the settings in force
	// (the window has them): the first is drawn as the prediction's, a
	// second as Versus's. nil = computed here for the predicted class and
	// Versus.
	Occlusions []*viz.Occlusion
	Date       time.Time // printed on the page; zero = now
	// Grey draws the image under the heatmap's lines in grey instead of in
	// colour.
	Grey bool
}

// ReportContent is what a report page states, in the form `report --json`
// prints: where the model, the labels and the settings came from (with
// SHA-256 digests of the files, so a shared page can be traced to them) and
// the numbers on the page.
type ReportContent struct {
	Model        string          `json:"model"`
	ModelSHA256  string          `json:"sha256"` // hex SHA-256 of the model file's bytes
	Image        string          `json:"image"`
	Labels       string          `json:"labels"`                  // where the class names came from
	LabelsSHA256 string          `json:"labels_sha256,omitempty"` // of the label file, when they came from one
	Preprocess   prep.Config     `json:"preprocess"`
	Top          []ReportClass   `json:"top"`
	Expected     *ReportClass    `json:"expected"` // the class it should have been (--expected), or null
	Occlusion    ReportOcclusion `json:"occlusion"`
	Heatmaps     []ReportClass   `json:"heatmaps"` // the classes whose heatmaps the page shows, in order
	Softmax      bool            `json:"softmax_applied"`
	Runtime      string          `json:"runtime"`
	Date         string          `json:"date"`
}

// ReportClass is one class on the page.
type ReportClass struct {
	Index       int     `json:"index"`
	Label       string  `json:"label"`
	Probability float64 `json:"probability"`
}

// ReportOcclusion is the occlusion settings the heatmaps were made with.
type ReportOcclusion struct {
	Patch  int    `json:"patch"`
	Stride int    `json:"stride"`
	Fill   string `json:"fill"`
	Score  string `json:"score"`
	Scored string `json:"scored"` // which output and how the score was read
}

// Report composes the one-page picture; see [Workspace.ReportPage].
func (w *Workspace) Report(ctx context.Context, in ReportInput, progress func(done, total int)) (*image.NRGBA, error) {
	page, _, err := w.ReportPage(ctx, in, progress)
	return page, err
}

// ReportPage composes the one-page picture (viz.Report): the image as the model
// saw it, the top-k predictions, the occlusion heatmaps of the predicted and
// the expected class side by side on a shared scale with their legend, the
// model's name, the preprocessing and occlusion settings, the date and the
// caution that a heatmap is evidence about one model on one image, not
// proof. progress follows the occlusion run when one is needed.
// It also returns what the page states (ReportContent).
func (w *Workspace) ReportPage(ctx context.Context, in ReportInput, progress func(done, total int)) (*image.NRGBA, *ReportContent, error) {
	if in.Image == nil {
		return nil, nil, inputf(in.ImageName, "no image for the report")
	}
	k := in.K
	if k <= 0 {
		k = 5
	}
	cfg, labels := w.snapshot()
	_, labelsFrom := w.Labels()
	cl, err := w.Classify(ctx, in.Image, k)
	if err != nil {
		return nil, nil, err
	}
	occ := in.Occlusions
	if len(occ) == 0 {
		if in.Occlusion.Patch == 0 && in.Occlusion.Stride == 0 {
			c := cl.Input.Bounds()
			fill, score := in.Occlusion.Fill, in.Occlusion.Score
			in.Occlusion = DefaultOcclusion(c.Dx(), c.Dy())
			if fill != "" {
				in.Occlusion.Fill = fill
			}
			if score != "" {
				in.Occlusion.Score = score
			}
		}
		targets := []int{cl.Top[0].Index}
		if in.Versus >= 0 && in.Versus != targets[0] {
			targets = append(targets, in.Versus)
		}
		if occ, _, err = w.Occlude(ctx, in.Image, in.Occlusion, targets, progress); err != nil {
			return nil, nil, err
		}
	}
	set := occ[0].OcclusionSettings

	// Heatmaps on one scale, enlarged so the model's pixels stay visible.
	grids := make([][][]float64, len(occ))
	for i, o := range occ {
		grids[i] = o.Scores
	}
	scale := viz.ScoreScale(grids...)
	factor := max(1, 256/max(1, max(cl.Input.Bounds().Dx(), cl.Input.Bounds().Dy())))
	panels := make([]viz.Panel, len(occ))
	for i, o := range occ {
		heat := viz.OcclusionPair(cl.Input, o, scale, factor, in.Grey)
		role := "class asked for"
		switch {
		case o.Target == cl.Top[0].Index:
			role = "predicted"
		case in.Versus >= 0 && o.Target == in.Versus:
			role = "expected"
		}
		panels[i] = viz.Panel{Image: heat,
			Caption: fmt.Sprintf("%s (%s), probability %.1f%%", className(labels, o.Target), role, 100*o.Probability)}
	}
	// 100 pixels high: labels of 20 px, about 9.6 pt at the page's 150 dpi,
	// legible in print.
	legend := viz.ColorBar(900, 100, -scale, scale, occ[0].Unit(), viz.Diverging)

	expected := ""
	if in.Versus >= 0 {
		expected = className(labels, in.Versus)
	}
	date := in.Date
	if date.IsZero() {
		date = time.Now()
	}
	name := in.ImageName
	if name == "" {
		name = "(unnamed image)"
	}
	settings := []string{
		"model          " + w.Model.Name + "  SHA-256 " + ShortHash(w.Hash),
		"image          " + name,
		"preprocessing  " + cfg.String(),
		"class names    " + labelsFrom,
		fmt.Sprintf("occlusion      patch %d px, stride %d px, fill %s, score %s", set.Patch, set.Stride, set.Fill, occ[0].Unit()),
		"scored         " + occ[0].SourceNote,
		fmt.Sprintf("lines          on the image where the %s reaches %.2g (solid) or %.2g (dashed)", occ[0].Unit(), scale/2, -scale/2),
	}
	for _, o := range occ {
		if o.Saturated() {
			// The full note is too long for a settings line; this says the
			// same in short.
			settings = append(settings, fmt.Sprintf("saturated      %s: p barely moves (at most %.2g); score %s shows the patches",
				className(labels, o.Target), viz.ScoreScale(o.Scores), o.Suggested()))
		}
	}
	settings = append(settings, "softmax        "+softmaxNote(cl), "runtime        ONNX Runtime "+infer.Version())
	content := &ReportContent{
		Model: w.Model.Name, ModelSHA256: w.Hash, Image: name, Labels: labelsFrom,
		Preprocess: cfg, Softmax: !cl.Softmaxed, Runtime: "ONNX Runtime " + infer.Version(),
		Date:      date.Format("2006-01-02"),
		Occlusion: ReportOcclusion{Patch: set.Patch, Stride: set.Stride, Fill: string(set.Fill), Score: occ[0].Unit(), Scored: occ[0].SourceNote},
	}
	if sum, err := prep.HashFile(labelsFrom); err == nil {
		content.LabelsSHA256 = sum
	}
	for _, p := range cl.Top {
		content.Top = append(content.Top, ReportClass{Index: p.Index, Label: className(labels, p.Index), Probability: p.Probability})
	}
	if in.Versus >= 0 {
		c := ReportClass{Index: in.Versus, Label: className(labels, in.Versus)}
		if in.Versus < len(cl.Probs) {
			c.Probability = float64(cl.Probs[in.Versus])
		}
		content.Expected = &c
	}
	for _, o := range occ {
		content.Heatmaps = append(content.Heatmaps, ReportClass{Index: o.Target, Label: className(labels, o.Target), Probability: o.Probability})
	}
	page := viz.Report(viz.ReportInput{
		Image:     Enlarge(cl.Input, factor),
		TopK:      withNames(cl.Top, labels),
		Expected:  expected,
		Panels:    panels,
		Legend:    legend,
		ModelName: w.Model.Name + " (SHA-256 " + ShortHash(w.Hash) + ")",
		Settings:  settings,
		Date:      date.Format("2006-01-02"),
	})
	return page, content, nil
}

// className is the label of class i, or "class i" when there is none.
func className(labels []string, i int) string {
	if i >= 0 && i < len(labels) && labels[i] != "" {
		return labels[i]
	}
	return fmt.Sprintf("class %d", i)
}

// withNames gives unlabelled predictions their class number as a label, so
// the page never shows an empty name.
func withNames(top []classes.Prediction, labels []string) []classes.Prediction {
	out := make([]classes.Prediction, len(top))
	for i, p := range top {
		p.Label = className(labels, p.Index)
		out[i] = p
	}
	return out
}

func softmaxNote(cl *Classification) string {
	if cl.Softmaxed {
		return "the model's output is already a probability distribution"
	}
	return "applied by Fovea to the model's output"
}

// ShortHash is the short form of a model's SHA-256 printed on pages: its
// first 12 hex digits (48 bits, enough to tell two files named last.onnx
// apart at a glance; the full digest goes into data, e.g. report --json).
// A hash shorter than that is returned as it is.
func ShortHash(h string) string {
	if len(h) > 12 {
		return h[:12]
	}
	return h
}
