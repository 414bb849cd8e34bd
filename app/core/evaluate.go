package core

import (
	"context"
	"fmt"
	"os"

	"fovea/assets"
	"fovea/viz/analysis"
)

// DemoLabelledName is how the demo's labelled probe images are named to the
// user (they are read from the embedded files, never written out).
const DemoLabelledName = "demo probe images (labels.csv)"

// resolver resolves class folder names and list labels with the labels in
// force and the model's number of classes.
func (w *Workspace) resolver() analysis.ClassResolver {
	_, labels := w.snapshot()
	return analysis.ClassResolver{Labels: labels, Classes: w.Classes()}
}

// OpenLabelled reads labelled data for this model: a folder whose
// sub-folders are the classes (analysis.OpenFolder) or a list file of
// path,label lines (analysis.OpenList). Errors are *InputError naming it.
func (w *Workspace) OpenLabelled(path string) (*analysis.Labelled, error) {
	st, err := os.Stat(path)
	if err != nil {
		return nil, inputErr(path, unwrapPath(err))
	}
	var l *analysis.Labelled
	if st.IsDir() {
		l, err = analysis.OpenFolder(path, w.resolver())
	} else {
		l, err = analysis.OpenList(path, w.resolver())
	}
	if err != nil {
		return nil, inputErr(path, err)
	}
	return l, nil
}

// DemoLabelled returns the demo's 280 probe images with their true classes,
// read from the embedded files (assets.ProbeLabelsFile).
func (w *Workspace) DemoLabelled() (*analysis.Labelled, error) {
	l, err := analysis.ReadListFS(assets.Files, assets.ProbeLabelsFile, w.resolver())
	if err != nil {
		return nil, fmt.Errorf("core: embedded demo: %w", err)
	}
	l.Source = DemoLabelledName
	return l, nil
}

// Evaluate runs the model over the labelled images with the preprocessing
// and labels in force, as Classify runs one image (analysis.Evaluate).
// o.Model and o.Labels are filled in when empty.
func (w *Workspace) Evaluate(ctx context.Context, data *analysis.Labelled, o analysis.EvalOptions,
	progress func(done, total int)) (*analysis.Evaluation, error) {
	c, labels := w.snapshot()
	if o.Model == "" {
		o.Model = w.Name()
	}
	if o.Labels == nil {
		o.Labels = labels
	}
	s, err := w.session(plainRun)
	if err != nil {
		return nil, err
	}
	e, err := analysis.Evaluate(ctx, s, data, c, o, progress)
	if err != nil {
		if IsInput(err) || ctx.Err() != nil {
			return nil, err
		}
		return nil, fmt.Errorf("core: %s: evaluate: %w", w.Model.Name, err)
	}
	return e, nil
}
