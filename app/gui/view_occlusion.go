package gui

import (
	"context"
	"fmt"
	"image"
	"path/filepath"
	"strconv"
	"strings"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"

	"fovea/app/core"
	"fovea/viz"
)

// occlusionView is the "Occlusion" tab: where hiding parts of the image
// lowers the predicted class's score and, to explain a misclassification,
// the expected class's too, side by side on one scale.
type occlusionView struct {
	u       *ui
	content fyne.CanvasObject
	runner  *runner

	patch, stride *widget.Entry
	fill, score   *widget.Select
	expect        *widget.Select
	runBtn        *widget.Button
	exportBtn     *widget.Button
	// switchBtn reruns with the suggested score when a probability heatmap
	// is saturated (viz.Occlusion.Saturated); hidden otherwise.
	switchBtn *widget.Button
	switchTo  viz.Score
	// grey draws the image beside the heatmap in grey (colour by default).
	grey    *widget.Check
	pic     *picture
	verdict *widget.RichText
	caution *widget.Label

	classes []int        // class index of each expect option after the first ("none")
	fit     *image.NRGBA // the image the shown occlusion was computed on
	zoom    int          // the enlargement it is drawn at (heatZoom)
	set     viz.OcclusionSettings
	expectN int // the expected class of the shown result, -1 none
	runs    int // occlusions shown so far (tests read it)
}

// noExpected is the first choice of the expected-class select.
const noExpected = "(none: predicted class only)"

// cautionText goes once under the heatmap, which is drawn without the
// picture's own copy of it (viz.HeatOptions.NoCaution): a heatmap is easy
// to over-read. An exported picture carries it itself.
const cautionText = "Evidence about this model on this image, not proof. The colours show where hiding a patch changed the score, " +
	"not why the model decided; other settings or images can tell a different story. Do not base safety-critical decisions on it without proper validation."

func newOcclusionView(u *ui) *occlusionView {
	v := &occlusionView{u: u, expectN: -1}
	v.runner = u.newRunner(true)
	v.patch = widget.NewEntry()
	v.stride = widget.NewEntry()
	var fills, scores []string
	for _, f := range viz.Fills {
		fills = append(fills, string(f))
	}
	for _, s := range viz.Scores {
		scores = append(scores, string(s))
	}
	v.fill = widget.NewSelect(fills, nil)
	v.fill.SetSelected(string(viz.FillGrey))
	v.score = widget.NewSelect(scores, nil)
	v.score.SetSelected(string(viz.ScoreProbability))
	v.switchBtn = widget.NewButton("", v.switchScore)
	v.switchBtn.Importance = widget.WarningImportance
	v.switchBtn.Hide()
	v.expect = widget.NewSelect([]string{noExpected}, nil)
	v.expect.SetSelected(noExpected)
	v.runBtn = widget.NewButtonWithIcon("Run occlusion", theme.MediaPlayIcon(), v.run)
	v.runBtn.Importance = widget.HighImportance
	v.exportBtn = widget.NewButtonWithIcon("Export picture…", theme.DocumentSaveIcon(), v.export)
	v.grey = widget.NewCheck("Grey image", func(bool) { v.redraw() })
	v.pic = newPicture(fyne.NewSize(360, 240), 2)
	v.verdict = widget.NewRichText()
	v.caution = widget.NewLabel(cautionText)
	v.caution.Wrapping = fyne.TextWrapWord
	v.caution.Importance = widget.WarningImportance

	num := func(e *widget.Entry) fyne.CanvasObject {
		return container.NewGridWrap(fyne.NewSize(64, e.MinSize().Height), e)
	}
	settings := container.NewHBox(
		widget.NewLabel("Patch"), num(v.patch), widget.NewLabel("px   Stride"), num(v.stride), widget.NewLabel("px   Fill"), v.fill,
		widget.NewLabel("Score"), v.score, v.grey)
	question := container.NewBorder(nil, nil, widget.NewLabel("Expected class"), container.NewHBox(v.runBtn, v.exportBtn), v.expect)
	v.content = container.NewBorder(
		container.NewVBox(settings, question, v.runner.box, v.verdict, container.NewHBox(v.switchBtn)),
		v.caution, nil, nil, v.pic.box)
	return v
}

// modelChanged resets the settings for the open model's input size and
// lists its classes as choices for the expected class.
func (v *occlusionView) modelChanged() {
	u := v.u
	v.pic.set(nil)
	v.verdict.Segments = nil
	v.verdict.Refresh()
	if u.ws == nil {
		return
	}
	c, _ := u.ws.Prep()
	d := core.DefaultOcclusion(c.Width, c.Height)
	v.patch.SetText(strconv.Itoa(d.Patch))
	v.stride.SetText(strconv.Itoa(d.Stride))
	labels, _ := u.ws.Labels()
	n := max(u.ws.Classes(), len(labels))
	opts := []string{noExpected}
	v.classes = v.classes[:0]
	for i := range n {
		name := fmt.Sprintf("class %d", i)
		if i < len(labels) {
			name = labels[i]
		}
		opts = append(opts, name)
		v.classes = append(v.classes, i)
	}
	prev := v.expect.Selected
	v.expect.Options = opts
	v.expect.Selected = noExpected
	if containsStr(opts, prev) {
		v.expect.Selected = prev
	}
	if u.opts.Expect != "" {
		if i, err := u.ws.ClassIndex(u.opts.Expect); err == nil && i+1 < len(opts) {
			v.expect.Selected = opts[i+1]
		}
	}
	v.expect.Refresh()
	v.imageChanged()
}

// expectDemoTruth chooses the true class of a demo image as the expected
// one (unless the command line chose one).
func (v *occlusionView) expectDemoTruth(name string) {
	if v.u.opts.Expect != "" {
		return
	}
	if i, ok := demoTruth(v.u.ws, name); ok && i+1 < len(v.expect.Options) {
		v.expect.SetSelected(v.expect.Options[i+1])
	}
}

// demoTruth is the true class of a demo image: they are named
// "NN-<class>.png", with spaces written as "-".
func demoTruth(ws *core.Workspace, name string) (int, bool) {
	base := strings.TrimSuffix(name, filepath.Ext(name))
	if i := strings.IndexByte(base, '-'); i > 0 {
		base = base[i+1:]
	}
	i, err := ws.ClassIndex(strings.ReplaceAll(base, "-", " "))
	return i, err == nil
}

// imageChanged clears the heatmap: it belonged to another image or model.
func (v *occlusionView) imageChanged() {
	u := v.u
	v.pic.set(nil)
	v.expectN = -1
	if u.acts == nil {
		v.setVerdict("Open an image, then run occlusion (Ctrl+R).")
		return
	}
	v.setVerdict(fmt.Sprintf("The model says %s. Choose the class it should have been, if any, and run occlusion (Ctrl+R).",
		predText(u.acts.Class.Top[0].Label, u.acts.Class.Top[0].Index, u.acts.Class.Top[0].Probability)))
}

func predText(label string, index int, p float64) string {
	if label == "" {
		label = fmt.Sprintf("class %d", index)
	}
	return fmt.Sprintf("%s (%s)", label, percent(p))
}

func (v *occlusionView) setVerdict(text string) {
	v.verdict.Segments = []widget.RichTextSegment{&widget.TextSegment{Text: text, Style: widget.RichTextStyleParagraph}}
	v.verdict.Wrapping = fyne.TextWrapWord
	v.verdict.Refresh()
}

// expected returns the expected class chosen, or -1.
func (v *occlusionView) expected() int {
	for i, o := range v.expect.Options {
		if i > 0 && o == v.expect.Selected && i-1 < len(v.classes) {
			return v.classes[i-1]
		}
	}
	return -1
}

// settings reads the occlusion settings from the fields.
func (v *occlusionView) settings() (viz.OcclusionSettings, error) {
	patch, err1 := strconv.Atoi(strings.TrimSpace(v.patch.Text))
	stride, err2 := strconv.Atoi(strings.TrimSpace(v.stride.Text))
	if err1 != nil || err2 != nil {
		return viz.OcclusionSettings{}, fmt.Errorf("patch %q and stride %q must be whole numbers of pixels", v.patch.Text, v.stride.Text)
	}
	set := viz.OcclusionSettings{Patch: patch, Stride: stride, Fill: viz.Fill(v.fill.Selected), Score: viz.Score(v.score.Selected)}
	c, _ := v.u.ws.Prep()
	return set, core.CheckOcclusion(set, c.Width, c.Height)
}

// run measures the occlusion sensitivity of the predicted class and, when
// one is chosen, of the expected class, in one pass off the UI goroutine.
func (v *occlusionView) run() {
	u := v.u
	ws, img := u.ws, u.img
	if ws == nil || img == nil || u.acts == nil {
		u.showError("Occlusion", fmt.Errorf("open an image first (Ctrl+I)"))
		return
	}
	set, err := v.settings()
	if err != nil {
		u.showError("Occlusion", err)
		return
	}
	pred := u.acts.Class.Top[0].Index
	targets := []int{pred}
	exp := v.expected()
	if exp >= 0 && exp != pred {
		targets = append(targets, exp)
	}
	u.showView(viewOcclusion)
	c, _ := ws.Prep()
	v.zoom = heatZoom(u.area(fyne.NewSize(24, 230)), c.Width, c.Height, len(targets))
	zoom := v.zoom
	v.runner.launch("Occlusion", "patch positions", ws, func(ctx context.Context, progress func(int, int)) (result, error) {
		occ, fit, err := ws.Occlude(ctx, img, set, targets, progress)
		if err != nil {
			return nil, err
		}
		grey := v.grey.Checked
		pic := viz.RenderOcclusion(fit, occ, viz.HeatOptions{Captions: true, Grey: grey, NoCaution: true, Zoom: zoom})
		return func(current bool) {
			if current {
				v.fit = fit
				v.show(occ, pic, set, exp)
			}
		}, nil
	})
}

// show puts an occlusion result on screen.
func (v *occlusionView) show(occ []*viz.Occlusion, pic *image.NRGBA, set viz.OcclusionSettings, exp int) {
	u := v.u
	u.occ, u.occPic = occ, pic
	v.set, v.expectN = set, exp
	v.runs++
	v.pic.set(pic)
	name := func(o *viz.Occlusion) string { return predText(o.Label, o.Target, o.Probability) }
	var segs []widget.RichTextSegment
	add := func(text string, style widget.RichTextStyle) {
		style.Inline = true
		segs = append(segs, &widget.TextSegment{Text: text, Style: style})
	}
	add("Predicted ", widget.RichTextStyleInline)
	add(name(occ[0]), widget.RichTextStyleStrong)
	switch {
	case len(occ) > 1:
		add(" versus expected ", widget.RichTextStyleInline)
		add(name(occ[1]), widget.RichTextStyleStrong)
		add(". Both heatmaps share one colour scale: warm where hiding the patch lowered that class's "+scoreNoun(occ[0].Score)+", cool where it raised it.", widget.RichTextStyleInline)
		if occ[1].Score == viz.ScoreProbability && occ[1].Probability < 0.05 {
			add(" The expected class is so improbable that its changes look faint on this scale; Score: "+string(occ[1].Suggested())+" shows them plainly.", widget.RichTextStyleInline)
		}
	case exp >= 0:
		add(". The expected class is the predicted one: nothing to contrast.", widget.RichTextStyleInline)
	default:
		add(". Warm where hiding the patch lowered the class's "+scoreNoun(occ[0].Score)+", cool where it raised it.", widget.RichTextStyleInline)
	}
	add(" Scored: "+occ[0].SourceNote+".", widget.RichTextStyleInline)
	v.switchBtn.Hide()
	for _, o := range occ {
		if note := o.SaturationNote(); note != "" {
			add(" "+note, widget.RichTextStyleStrong)
			v.switchTo = o.Suggested()
			v.switchBtn.SetText("Score " + string(v.switchTo) + " instead")
			v.switchBtn.Show()
			break
		}
	}
	add(" "+methodText(occ[0]), widget.RichTextStyleInline)
	v.verdict.Segments = segs
	v.verdict.Refresh()
}

// heatZoom is the largest whole enlargement (1 to 8) at which n pairs of
// w×h pictures (viz.RenderOcclusion: 12-pixel margins, 6 pixels inside a
// pair, 16 between pairs, about 190 pixels of captions, colour bar and
// notes) fit in area, so that the window shows the picture at its own
// size and its text stays legible rather than being scaled down.
func heatZoom(area fyne.Size, w, h, n int) int {
	z := 8
	for ; z > 1; z-- {
		width := 24 + n*(2*w*z+6) + (n-1)*16
		height := h*z + 190
		if float32(width) <= area.Width && float32(height) <= area.Height {
			break
		}
	}
	return z
}

// redraw draws the shown occlusion again (the grey/colour choice changed).
func (v *occlusionView) redraw() {
	u := v.u
	if u.occ == nil || v.fit == nil {
		return
	}
	u.occPic = viz.RenderOcclusion(v.fit, u.occ, viz.HeatOptions{Captions: true, Grey: v.grey.Checked, NoCaution: true, Zoom: v.zoom})
	v.pic.set(u.occPic)
}

// switchScore reruns the occlusion with the score a saturation warning
// suggested.
func (v *occlusionView) switchScore() {
	v.switchBtn.Hide()
	v.score.SetSelected(string(v.switchTo))
	v.run()
}

// export saves the one-page explanation picture: the image, the top
// classes, the heatmaps with their legend, the settings and the caution.
func (v *occlusionView) export() {
	u := v.u
	ws, img := u.ws, u.img
	if ws == nil || img == nil {
		u.showError("Exporting the explanation", fmt.Errorf("open an image first (Ctrl+I)"))
		return
	}
	set, err := v.settings()
	if err != nil {
		u.showError("Exporting the explanation", err)
		return
	}
	exp := v.expected()
	var occ []*viz.Occlusion
	if u.occ != nil && set == v.set && exp == v.expectN {
		occ = u.occ // what is on screen: no need to compute it again
	}
	imgName := u.imgName
	base := strings.TrimSuffix(imgName, filepath.Ext(imgName))
	u.saveDialog("Export the explanation picture", base+"-explained.png", []string{".png"}, func(path string) {
		v.writeReport(path, core.ReportInput{Image: img, ImageName: imgName, Versus: exp, Occlusion: set, Occlusions: occ, Grey: v.grey.Checked})
	})
}

// writeReport composes the one-page picture and saves it at path,
// atomically, off the UI goroutine.
func (v *occlusionView) writeReport(path string, in core.ReportInput) {
	u := v.u
	ws := u.ws
	u.fileRunner.launch("Exporting "+filepath.Base(path), "patch positions", ws, func(ctx context.Context, progress func(int, int)) (result, error) {
		pic, err := ws.Report(ctx, in, progress)
		if err != nil {
			return nil, err
		}
		if err := core.SavePNG(path, pic); err != nil {
			return nil, err
		}
		return func(bool) { u.status.SetText("Saved the explanation picture to " + path) }, nil
	})
}

// scoreNoun names what an occlusion compares: "probability", "logit" or
// "log-probability".
func scoreNoun(score viz.Score) string {
	switch score {
	case viz.ScoreLogit:
		return "logit"
	case viz.ScoreLogProb:
		return "log-probability"
	}
	return "probability"
}

// methodText says how the heatmap was computed; both methods give the same
// scores, so this is about time, not about trust.
func methodText(o *viz.Occlusion) string {
	switch o.Method {
	case viz.MethodIncremental:
		return "(Computed incrementally: the clean image's activations were reused and only what each patch can change was recomputed; " + o.MethodWhy + ".)"
	case viz.MethodEveryImage:
		return "(Computed by running every occluded image: " + o.MethodWhy + ".)"
	}
	return ""
}
