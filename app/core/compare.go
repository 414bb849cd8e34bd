package core

import (
	"context"
	"fmt"

	"fovea/modelio"
	"fovea/viz/analysis"
)

// CompareInput says what a comparison of two models covers beyond their
// files: the probe images both are scanned over (none: no health part),
// how filters are paired and the scan's options.
type CompareInput struct {
	Probe []string
	// Data are labelled images both models answer (nil: no prediction part);
	// read them with a's class names (Workspace.OpenLabelled).
	Data  *analysis.Labelled
	Match analysis.Matching // "" = analysis.MatchIndex
	Scan  analysis.ScanOptions
}

// ModelID names a compared model: its file name and the SHA-256 of its
// bytes, so a reader of the comparison can tell which files it was made from.
type ModelID struct {
	Model  string `json:"model"`
	SHA256 string `json:"sha256"`
}

// Comparison is the comparison of a reference model A with a candidate B
// (Compare). Parts that were not computed are nil, with the reason in Notes.
type Comparison struct {
	A, B   ModelID
	Layers []analysis.LayerPair
	// Same: the architectures agree layer by layer; kernels and channels are
	// compared only then.
	Same           bool
	TotalA, TotalB modelio.Totals
	Match          analysis.Matching
	Filters        []analysis.FilterLayer
	FilterSkipped  []string
	Health         *analysis.HealthDiff
	ScanA, ScanB   *analysis.ScanReport
	Predictions    *analysis.PredictionDiff
	EvalA, EvalB   *analysis.Evaluation
	// Notes say why a part is missing and what the reader should keep in mind.
	Notes []string
}

// ID returns the comparison's name of the workspace's model.
func (w *Workspace) ID() ModelID { return ModelID{Model: w.Model.Name, SHA256: w.Hash} }

// Compare compares the models of a (reference) and b (candidate). b is run
// with a's preprocessing when the architectures agree (the same input):
// the same pictures then reach both. progress gets the stage ("scanning a",
// "scanning b") with its counts.
func Compare(ctx context.Context, a, b *Workspace, in CompareInput, progress func(stage string, done, total int)) (*Comparison, error) {
	if in.Match == "" {
		in.Match = analysis.MatchIndex
	}
	c := &Comparison{A: a.ID(), B: b.ID(), TotalA: a.Model.Total, TotalB: b.Model.Total, Match: in.Match}
	c.Layers, c.Same = analysis.AlignLayers(a.Model, b.Model)
	stage := func(name string) func(done, total int) {
		if progress == nil {
			return nil
		}
		return func(done, total int) { progress(name, done, total) }
	}
	if c.Same {
		// The same input: b sees exactly the pictures a sees.
		cfg, _ := a.Prep()
		if err := b.SetPrep(cfg); err != nil {
			return nil, fmt.Errorf("core: %s: the reference's preprocessing does not fit: %w", b.Name(), err)
		}
		if err := c.compareSame(ctx, a, b, in, stage); err != nil {
			return nil, err
		}
	} else {
		c.Notes = append(c.Notes, "the architectures differ (see the layer table): filters and channel health are compared only between identical architectures; b keeps its own preprocessing")
	}
	if in.Data == nil {
		c.Notes = append(c.Notes, "no labelled images: predictions not compared")
		return c, nil
	}
	var err error
	if c.EvalA, err = a.Evaluate(ctx, in.Data, analysis.EvalOptions{}, stage("evaluating a")); err != nil {
		return nil, err
	}
	if c.EvalB, err = b.Evaluate(ctx, in.Data, analysis.EvalOptions{}, stage("evaluating b")); err != nil {
		return nil, err
	}
	ansA, ansB := answers(c.EvalA), answers(c.EvalB)
	if both, dropped := common(ansA, ansB); dropped > 0 {
		ansA, ansB = both(ansA), both(ansB)
		c.Notes = append(c.Notes, fmt.Sprintf("%d labelled images were answered by one model only (skipped by the other) and are left out of the comparison", dropped))
	}
	if c.Predictions, err = analysis.ComparePredictions(ansA, ansB); err != nil {
		return nil, &InputError{Err: err}
	}
	if c.EvalA.Images == 0 {
		c.Notes = append(c.Notes, "none of the labelled images could be evaluated")
	}
	return c, nil
}

// answers turns an evaluation's rows into the answers ComparePredictions pairs.
func answers(e *analysis.Evaluation) []analysis.Answer {
	out := make([]analysis.Answer, len(e.Rows))
	for i, r := range e.Rows {
		out[i] = analysis.Answer{File: r.File, True: r.True, Predicted: r.Predicted}
	}
	return out
}

// common returns a filter keeping the files both a and b answered, and how
// many answers it drops.
func common(a, b []analysis.Answer) (func([]analysis.Answer) []analysis.Answer, int) {
	n := map[string]int{}
	for _, x := range a {
		n[x.File]++
	}
	for _, x := range b {
		n[x.File]++
	}
	dropped := 0
	for _, k := range n {
		if k != 2 {
			dropped++
		}
	}
	return func(s []analysis.Answer) []analysis.Answer {
		var out []analysis.Answer
		for _, x := range s {
			if n[x.File] == 2 {
				out = append(out, x)
			}
		}
		return out
	}, dropped
}

// compareSame compares filters and, with probe images, channel health of
// two models of the same architecture.
func (c *Comparison) compareSame(ctx context.Context, a, b *Workspace, in CompareInput, stage func(string) func(int, int)) error {
	var err error
	c.Filters, c.FilterSkipped, err = analysis.CompareFilters(a.Model, b.Model, in.Match)
	if err != nil {
		return &InputError{Err: err}
	}
	if len(in.Probe) == 0 {
		c.Notes = append(c.Notes, "no probe images: channel health not compared")
		return nil
	}
	if c.ScanA, err = a.Scan(ctx, in.Probe, in.Scan, stage("scanning a")); err != nil {
		return err
	}
	if c.ScanB, err = b.Scan(ctx, in.Probe, in.Scan, stage("scanning b")); err != nil {
		return err
	}
	c.Health, err = analysis.CompareHealth(c.ScanA, c.ScanB)
	return err
}

// CompareJSON is the JSON form of a comparison: the command line's
// contract (fovea compare --json) and the window's export.
type CompareJSON struct {
	A       ModelID               `json:"a"`
	B       ModelID               `json:"b"`
	Same    bool                  `json:"same_architecture"`
	Totals  map[string]totalJSON  `json:"totals"`
	Layers  []analysis.LayerPair  `json:"layers"`
	Match   analysis.Matching     `json:"matching"`
	Filters []analysis.FilterPair `json:"filters"` // most changed first
	Skipped []string              `json:"filters_skipped"`
	// NewlyDead and Revived are nil (null) when no health comparison ran.
	NewlyDead []analysis.ChannelRef   `json:"newly_dead"`
	Revived   []analysis.ChannelRef   `json:"revived"`
	Firing    []analysis.FiringChange `json:"firing"`
	Probe     int                     `json:"probe_images"`
	Accuracy  *AccuracyJSON           `json:"accuracy"`
	Flipped   []FlipJSON              `json:"flipped"`
	McNemarP  *float64                `json:"mcnemar_p"`
	Notes     []string                `json:"notes"`
}

type totalJSON struct {
	Params int64 `json:"params"`
	MACs   int64 `json:"macs"`
	Bytes  int64 `json:"bytes"`
}

// AccuracyJSON holds both accuracies (fractions) on the labelled images and
// their 95% intervals.
type AccuracyJSON struct {
	A      float64    `json:"a"`
	B      float64    `json:"b"`
	Images int        `json:"images"`
	A95    [2]float64 `json:"a_interval"`
	B95    [2]float64 `json:"b_interval"`
	Worse  int        `json:"right_to_wrong"`
	Better int        `json:"wrong_to_right"`
}

// FlipJSON is an image whose answer went from right to wrong or back.
type FlipJSON struct {
	File  string `json:"file"`
	True  string `json:"true"`
	A     string `json:"a"`
	B     string `json:"b"`
	Worse bool   `json:"right_to_wrong"`
}

// JSON returns the comparison's JSON form; labels name the classes of the
// flipped images (class numbers where there is none).
func (c *Comparison) JSON(labels []string) CompareJSON {
	j := CompareJSON{A: c.A, B: c.B, Same: c.Same, Layers: c.Layers, Match: c.Match,
		Totals: map[string]totalJSON{
			"a": {c.TotalA.Params, c.TotalA.MACs, c.TotalA.Bytes},
			"b": {c.TotalB.Params, c.TotalB.MACs, c.TotalB.Bytes},
		},
		Filters: analysis.MostChanged(c.Filters), Skipped: c.FilterSkipped, Notes: c.Notes}
	if j.Filters == nil {
		j.Filters = []analysis.FilterPair{}
	}
	if j.Skipped == nil {
		j.Skipped = []string{}
	}
	if j.Notes == nil {
		j.Notes = []string{}
	}
	if c.Health != nil {
		j.NewlyDead, j.Revived, j.Firing, j.Probe = c.Health.NewlyDead, c.Health.Revived, c.Health.Firing, c.ScanA.Images
	}
	if p := c.Predictions; p != nil {
		j.Accuracy = &AccuracyJSON{Images: p.Images, Worse: p.Worse, Better: p.Better}
		if p.Images > 0 {
			j.Accuracy.A = float64(p.CorrectA) / float64(p.Images)
			j.Accuracy.B = float64(p.CorrectB) / float64(p.Images)
			j.Accuracy.A95 = wilson95(p.CorrectA, p.Images)
			j.Accuracy.B95 = wilson95(p.CorrectB, p.Images)
		}
		j.Flipped = []FlipJSON{}
		for _, f := range p.Flips {
			j.Flipped = append(j.Flipped, FlipJSON{File: f.File, True: className(labels, f.True),
				A: className(labels, f.A), B: className(labels, f.B), Worse: f.Worse})
		}
		pv := p.P
		j.McNemarP = &pv
	}
	return j
}

// wilson95 is the 95% Wilson score interval of k successes in n trials.
func wilson95(k, n int) [2]float64 {
	lo, hi := analysis.Wilson(k, n, 1.959963984540054)
	return [2]float64{lo, hi}
}
