package gui

import (
	"context"
	"encoding/json"
	"fmt"
	"image"
	"io"
	"path/filepath"
	"strings"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/canvas"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"

	"fovea/app/core"
	"fovea/modelio/prep"
	"fovea/viz/analysis"
)

// pairView is the "Compare" tab: the open model (a, the reference)
// against a second model chosen here (b, the candidate). It shows the
// comparison's one-page picture, lists the images whose answer flipped, and
// from a flipped image draws the occlusion maps of both models for the true
// class side by side on one scale.
type pairView struct {
	u           *ui
	content     fyne.CanvasObject
	runner      *runner // the comparison
	occRunner   *runner // the side-by-side occlusion
	thumbRunner *runner // loading the flipped images' thumbnails

	cand     *widget.Label
	greedy   *widget.Check
	runBtn   *widget.Button
	pngBtn   *widget.Button
	jsonBtn  *widget.Button
	summary  *widget.Label
	page     *picture
	flipList *widget.List
	occ      *picture
	occAbout *widget.Label

	b      *core.Workspace  // the candidate (nil: none chosen)
	result *core.Comparison // the last comparison of u.ws against b
	pageIm *image.NRGBA
	flips  []analysis.Flip
	thumbs []image.Image      // the flipped images as the models saw them (nil until loaded)
	data   *analysis.Labelled // the labelled images of the last comparison
}

func newPairView(u *ui) *pairView {
	v := &pairView{u: u}
	v.runner = u.newRunner(true)
	v.occRunner = u.newRunner(true)
	v.thumbRunner = u.newRunner(false)
	v.cand = widget.NewLabel("no candidate chosen")
	v.cand.Truncation = fyne.TextTruncateEllipsis
	choose := widget.NewButtonWithIcon("Candidate…", theme.FolderOpenIcon(), v.choose)
	sick := widget.NewButton("Unhealthy demo", func() { v.openDemoCandidate(true) })
	v.greedy = widget.NewCheck("Pair filters by similarity", nil)
	v.runBtn = widget.NewButtonWithIcon("Compare", theme.MediaPlayIcon(), v.run)
	v.runBtn.Importance = widget.HighImportance
	v.pngBtn = widget.NewButtonWithIcon("Export PNG…", theme.DocumentSaveIcon(), v.exportPNG)
	v.jsonBtn = widget.NewButtonWithIcon("Export JSON…", theme.DocumentSaveIcon(), v.exportJSON)
	v.summary = widget.NewLabel("Choose a second model: the open one is the reference (a), the chosen one the candidate (b). The probe folder of Filter health and the labelled data of Scorecard are used (the demo's own by default).")
	v.summary.Wrapping = fyne.TextWrapWord
	v.page = newPicture(fyne.NewSize(300, 300), 1)
	v.flipList = widget.NewList(
		func() int { return len(v.flips) },
		func() fyne.CanvasObject {
			l := widget.NewLabel("right → wrong  file.png")
			l.Truncation = fyne.TextTruncateEllipsis
			img := &canvas.Image{FillMode: canvas.ImageFillContain, ScaleMode: canvas.ImageScalePixels}
			img.SetMinSize(fyne.NewSize(40, 40))
			return container.NewBorder(nil, nil, img, nil, l)
		},
		func(i widget.ListItemID, o fyne.CanvasObject) {
			if i >= len(v.flips) {
				return
			}
			f := v.flips[i]
			labels, _ := u.ws.Labels()
			dir := "wrong → right"
			if f.Worse {
				dir = "right → wrong"
			}
			row := o.(*fyne.Container)
			var l *widget.Label
			for _, obj := range row.Objects {
				switch x := obj.(type) {
				case *widget.Label:
					l = x
				case *canvas.Image:
					x.Image = nil
					if i < len(v.thumbs) {
						x.Image = v.thumbs[i]
					}
					x.Refresh()
				}
			}
			l.SetText(fmt.Sprintf("%s  %s  (true %s; a %s, b %s)", dir, f.File,
				label(labels, f.True), label(labels, f.A), label(labels, f.B)))
		})
	v.flipList.OnSelected = func(i widget.ListItemID) { v.occlude(i) }
	v.occ = newPicture(fyne.NewSize(300, 200), 2)
	v.occAbout = widget.NewLabel("Choose a flipped image to see where hiding a patch lowers the true class's probability in a and in b, on one scale.")
	v.occAbout.Wrapping = fyne.TextWrapWord
	v.refresh()

	bar := container.NewVBox(
		container.NewBorder(nil, nil, widget.NewLabel("Candidate (b):"), nil, v.cand),
		container.NewHBox(choose, sick, v.greedy, v.runBtn, v.pngBtn, v.jsonBtn))
	right := container.NewVSplit(
		container.NewBorder(widget.NewLabel("Images whose answer flipped"), nil, nil, nil, v.flipList),
		container.NewBorder(container.NewVBox(v.occRunner.box, v.occAbout), nil, nil, nil, container.NewScroll(v.occ.box)))
	split := container.NewHSplit(container.NewScroll(v.page.box), right)
	split.SetOffset(0.6)
	v.content = container.NewBorder(container.NewVBox(bar, v.runner.box, v.thumbRunner.box, v.summary), nil, nil, nil, split)
	return v
}

// label names class i.
func label(labels []string, i int) string {
	if i >= 0 && i < len(labels) && labels[i] != "" {
		return labels[i]
	}
	return fmt.Sprintf("class %d", i)
}

// refresh enables what the state allows.
func (v *pairView) refresh() {
	if v.b != nil {
		v.cand.SetText(v.b.Name() + "  (sha256 " + v.b.Hash[:16] + "…)")
		v.runBtn.Enable()
	} else {
		v.cand.SetText("no candidate chosen")
		v.runBtn.Disable()
	}
	if v.result != nil {
		v.pngBtn.Enable()
		v.jsonBtn.Enable()
	} else {
		v.pngBtn.Disable()
		v.jsonBtn.Disable()
	}
	if v.pageIm != nil {
		v.page.set(v.pageIm)
	} else {
		v.page.set(nil) // an untyped nil: picture.set hides it
	}
	v.flipList.Refresh()
}

// modelChanged forgets the comparison of the model that was open.
func (v *pairView) modelChanged() {
	v.result, v.pageIm, v.flips, v.data = nil, nil, nil, nil
	v.occ.set(nil)
	v.refresh()
}

// setCandidate replaces the candidate (closing the one before once its jobs end).
func (v *pairView) setCandidate(ws *core.Workspace) {
	if old := v.b; old != nil {
		// Jobs on the candidate are counted with the reference's.
		v.runner.cancel()
		v.occRunner.cancel()
		v.thumbRunner.cancel()
		wg := v.u.wsRunning(v.u.ws)
		go func() { wg.Wait(); old.Close() }()
	}
	v.b = ws
	v.modelChanged()
}

// choose asks for the candidate model and shows this view.
func (v *pairView) choose() {
	v.u.openDialog("Choose the model to compare with", []string{".onnx"}, func(path string) {
		v.u.showView(viewPair)
		v.openCandidate(path)
	})
}

func (v *pairView) openCandidate(path string) {
	v.u.modelRunner.launch("Opening "+filepath.Base(path), "", nil, func(ctx context.Context, _ func(int, int)) (result, error) {
		ws, err := core.OpenModel(path)
		if err != nil {
			return nil, err
		}
		return func(current bool) {
			if !current {
				ws.Close()
				return
			}
			v.setCandidate(ws)
		}, nil
	})
}

func (v *pairView) openDemoCandidate(unhealthy bool) {
	ws, err := core.OpenDemo(unhealthy)
	if err != nil {
		v.u.showError("Opening the demo", err)
		return
	}
	v.setCandidate(ws)
}

// run compares the open model with the candidate off the UI goroutine.
func (v *pairView) run() {
	u := v.u
	a, b := u.ws, v.b
	if a == nil || b == nil {
		u.showError("Comparing", fmt.Errorf("open a model and choose a candidate first"))
		return
	}
	probeDir := u.scanDir
	data := u.vScore.data
	in := core.CompareInput{Match: analysis.MatchIndex}
	if v.greedy.Checked {
		in.Match = analysis.MatchGreedy
	}
	v.runner.launch("Comparing", "images", a, func(ctx context.Context, progress func(int, int)) (result, error) {
		var err error
		switch {
		case probeDir != "":
			if in.Probe, err = core.ProbeFiles(probeDir); err != nil {
				return nil, err
			}
		case a.Demo != "":
			if in.Scan.FS, in.Probe, err = core.DemoProbes(); err != nil {
				return nil, err
			}
		}
		switch {
		case data != "":
			in.Data, err = a.OpenLabelled(data)
		case a.Demo != "":
			in.Data, err = a.DemoLabelled()
		}
		if err != nil {
			return nil, err
		}
		// Four stages (two scans, two evaluations): progress over all.
		stages := map[string]int{"scanning a": 0, "scanning b": 1, "evaluating a": 2, "evaluating b": 3}
		c, err := core.Compare(ctx, a, b, in, func(stage string, done, total int) {
			progress(stages[stage]*total+done, 4*total)
		})
		if err != nil {
			return nil, err
		}
		labels, _ := a.Labels()
		cfg, _ := a.Prep()
		page, err := c.ComparePage(labels, cfg.BGR)
		if err != nil {
			return nil, err
		}
		return func(current bool) {
			if !current || v.b != b {
				return
			}
			v.result, v.pageIm, v.data = c, page, in.Data
			v.flips = nil
			if c.Predictions != nil {
				v.flips = c.Predictions.Flips
			}
			v.summary.SetText(pairSummary(c))
			v.thumbs = nil
			v.refresh()
			v.loadThumbs()
		}, nil
	})
}

// maxPairThumbs bounds the thumbnails loaded for the flipped list.
const maxPairThumbs = 200

// loadThumbs loads the flipped images, as the reference prepares them, off
// the UI goroutine.
func (v *pairView) loadThumbs() {
	u, data, flips := v.u, v.data, v.flips
	if data == nil || len(flips) == 0 || u.ws == nil {
		return
	}
	flips = flips[:min(len(flips), maxPairThumbs)]
	cfg, _ := u.ws.Prep()
	v.thumbRunner.launch("Loading thumbnails", "images", u.ws, func(ctx context.Context, progress func(int, int)) (result, error) {
		imgs := make([]image.Image, len(flips))
		for i, f := range flips {
			if ctx.Err() != nil {
				return nil, ctx.Err()
			}
			if img, err := data.Load(f.File); err == nil {
				imgs[i] = prep.Fit(img, cfg)
			}
			progress(i+1, len(flips))
		}
		return func(current bool) {
			if current && len(v.flips) > 0 && &v.flips[0] == &flips[0] {
				v.thumbs = imgs
				v.flipList.Refresh()
			}
		}, nil
	})
}

// pairSummary is the line above the page.
func pairSummary(c *core.Comparison) string {
	var parts []string
	if !c.Same {
		parts = append(parts, "The architectures differ: only the layer table and the predictions are compared.")
	}
	if h := c.Health; h != nil {
		parts = append(parts, fmt.Sprintf("%d channels newly dead or rare in b, %d revived.", len(h.NewlyDead), len(h.Revived)))
	}
	if p := c.Predictions; p != nil && p.Images > 0 {
		parts = append(parts, fmt.Sprintf("Accuracy %.1f%% → %.1f%% on %d images; %d right → wrong, %d wrong → right; McNemar's exact p = %.3g.",
			100*float64(p.CorrectA)/float64(p.Images), 100*float64(p.CorrectB)/float64(p.Images), p.Images, p.Worse, p.Better, p.P))
	}
	parts = append(parts, "Evidence about these two files on these images only.")
	return strings.Join(parts, " ")
}

// occlude draws the occlusion of both models for flipped image i's true class.
func (v *pairView) occlude(i int) {
	u := v.u
	if i < 0 || i >= len(v.flips) || v.data == nil || v.b == nil {
		return
	}
	f := v.flips[i]
	a, b, data := u.ws, v.b, v.data
	v.occRunner.launch("Occlusion of "+f.File, "positions", a, func(ctx context.Context, progress func(int, int)) (result, error) {
		img, err := data.Load(f.File)
		if err != nil {
			return nil, err
		}
		pic, _, err := core.CompareOcclusion(ctx, a, b, img, f.True, progress)
		if err != nil {
			return nil, err
		}
		return func(current bool) {
			if current {
				v.occ.set(pic)
				labels, _ := a.Labels()
				v.occAbout.SetText(fmt.Sprintf("%s: drop in the probability of the true class %s when a patch is hidden, a left, b right, one scale.",
					f.File, label(labels, f.True)))
			}
		}, nil
	})
}

func (v *pairView) baseName() string {
	strip := func(s string) string { return strings.TrimSuffix(s, filepath.Ext(s)) }
	return strip(v.result.A.Model) + "-vs-" + strip(v.result.B.Model)
}

func (v *pairView) exportPNG() {
	if v.result == nil {
		return
	}
	pic := v.pageIm
	v.u.saveDialog("Export the comparison as PNG", v.baseName()+".png", []string{".png"}, func(path string) {
		v.u.fileRunner.launch("Exporting "+filepath.Base(path), "", nil, func(context.Context, func(int, int)) (result, error) {
			if err := core.SavePNG(path, pic); err != nil {
				return nil, err
			}
			return func(bool) { v.u.status.SetText("Saved the comparison to " + path) }, nil
		})
	})
}

func (v *pairView) exportJSON() {
	if v.result == nil {
		return
	}
	labels, _ := v.u.ws.Labels()
	j := v.result.JSON(labels)
	v.u.saveDialog("Export the comparison as JSON", v.baseName()+".json", []string{".json"}, func(path string) {
		v.u.fileRunner.launch("Exporting "+filepath.Base(path), "", nil, func(context.Context, func(int, int)) (result, error) {
			err := core.WriteFile(path, func(w io.Writer) error {
				enc := json.NewEncoder(w)
				enc.SetIndent("", "  ")
				return enc.Encode(j)
			})
			if err != nil {
				return nil, err
			}
			return func(bool) { v.u.status.SetText("Saved the comparison to " + path) }, nil
		})
	})
}
