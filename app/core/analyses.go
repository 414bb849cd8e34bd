package core

import (
	"context"
	"errors"
	"fmt"
	"image"
	"image/draw"
	"slices"
	"strings"

	"fovea/modelio"
	"fovea/modelio/classes"
	"fovea/modelio/infer"
	"fovea/modelio/prep"
	"fovea/viz"
	"fovea/viz/analysis"
)

// LoadImage decodes the image file at path (prep.Load: size limits, EXIF
// orientation, any supported format). Errors are *InputError naming the file.
func LoadImage(path string) (image.Image, error) {
	img, err := prep.Load(path)
	if err != nil {
		return nil, inputErr(path, err)
	}
	return img, nil
}

// tensor turns img into the model's input tensor for one image, with c.
func tensor(img image.Image, c prep.Config) (*image.NRGBA, []float32) {
	fit := prep.Fit(img, c)
	dst := make([]float32, c.Channels*c.Width*c.Height)
	c.Tensor(prep.Planes(fit), dst)
	return fit, dst
}

// Classification is the model's answer for one image.
type Classification struct {
	Top    []classes.Prediction // the k most probable classes, most probable first
	Probs  []float32            // probability of every class
	Scores []float32            // the model's raw output for every class
	// Softmaxed is true when the model's output already was a probability
	// distribution, so Probs equals Scores; false when Fovea applied softmax.
	Softmaxed bool
	Input     *image.NRGBA // the picture the model saw, after resizing
}

// classification reads the first output of a run for one image.
func classification(res *infer.Result, labels []string, k int, fit *image.NRGBA) (*Classification, error) {
	scores := res.Scores(0)
	if len(scores) == 0 {
		return nil, fmt.Errorf("core: the model returned no scores")
	}
	p, already := classes.Probabilities(scores)
	return &Classification{
		Top:       classes.TopK(p, labels, k),
		Probs:     p,
		Scores:    slices.Clone(scores),
		Softmaxed: already,
		Input:     fit,
	}, nil
}

// Classify runs the model on img with the settings in force and returns its
// k most probable classes.
func (w *Workspace) Classify(ctx context.Context, img image.Image, k int) (*Classification, error) {
	res, fit, labels, err := w.runOne(ctx, img, plainRun)
	if err != nil {
		return nil, err
	}
	return classification(res, labels, k, fit)
}

// runOne runs the model once on img with the settings and labels in force,
// in the session of kind k.
func (w *Workspace) runOne(ctx context.Context, img image.Image, k kind) (*infer.Result, *image.NRGBA, []string, error) {
	c, labels := w.snapshot()
	s, err := w.session(k)
	if err != nil {
		return nil, nil, nil, err
	}
	fit, in := tensor(img, c)
	res, err := s.Run(ctx, in, 1)
	if err != nil {
		return nil, nil, nil, fmt.Errorf("core: %s: %w", w.Model.Name, err)
	}
	return res, fit, labels, nil
}

func (w *Workspace) snapshot() (prep.Config, []string) {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.cfg, w.labels
}

// Activations holds every activation map of one run.
type Activations struct {
	Input  *image.NRGBA              // the picture the model saw
	Layers []modelio.Layer           // the captured layers, in execution order
	Maps   map[string]modelio.Tensor // by the layer's output tensor name, batch of 1
	Class  *Classification           // the model's answer on the same run (top 5)
}

// MapLayout is the layout of activation maps: ONNX's Conv, pooling and
// normalisation operators produce NCHW whatever layout the image input has
// (ONNX Operators.md, Conv: "(N x C x H x W)"), so maps are always "nchw".
const MapLayout = modelio.LayoutNCHW

// Activations runs the model once on img, capturing every activation layer
// (modelio.Model.ActivationLayers).
func (w *Workspace) Activations(ctx context.Context, img image.Image) (*Activations, error) {
	res, fit, labels, err := w.runOne(ctx, img, layersRun)
	if err != nil {
		return nil, err
	}
	cl, err := classification(res, labels, 5, fit)
	if err != nil {
		return nil, err
	}
	return &Activations{Input: fit, Layers: w.Model.ActivationLayers(), Maps: res.Maps, Class: cl}, nil
}

// Layer finds a layer by node name or by output tensor name.
func (w *Workspace) Layer(name string) (modelio.Layer, bool) {
	for _, l := range w.Model.Layers {
		if l.Name == name || l.Output == name {
			return l, true
		}
	}
	return modelio.Layer{}, false
}

// CheckOcclusion checks occlusion settings against an input of w×h pixels.
func CheckOcclusion(set viz.OcclusionSettings, width, height int) error {
	bad := func(format string, args ...any) error { return inputf("", format, args...) }
	switch {
	case set.Patch < 1 || set.Patch > width || set.Patch > height:
		return bad("patch %d is outside 1…%d (the model's input is %dx%d)", set.Patch, min(width, height), width, height)
	case set.Stride < 1 || set.Stride > max(width, height):
		return bad("stride %d is outside 1…%d", set.Stride, max(width, height))
	}
	switch set.Fill {
	case "", viz.FillGrey, viz.FillMean, viz.FillBlur, viz.FillZero:
	default:
		return bad("fill %q: use grey, mean, blur or zero", set.Fill)
	}
	switch set.Score {
	case "", viz.ScoreProbability, viz.ScoreLogit, viz.ScoreLogProb:
	default:
		return bad("score %q: use probability, logit or logprob", set.Score)
	}
	return nil
}

// DefaultOcclusion proposes occlusion settings for an input of w×h pixels:
// a patch of about a sixth of the shorter side, moved by half a patch, grey
// fill, probability score (common practice: a patch much smaller than the
// object, strides of half the patch keep the run count moderate).
func DefaultOcclusion(width, height int) viz.OcclusionSettings {
	p := max(1, min(width, height)/6)
	return viz.OcclusionSettings{Patch: p, Stride: max(1, p/2), Fill: viz.FillGrey, Score: viz.ScoreProbability}
}

// Occlude measures how much hiding each part of img lowers the score of each
// target class (analysis.Occlude). With no targets it uses the predicted class.
// Several targets share one pass over the patch positions.
func (w *Workspace) Occlude(ctx context.Context, img image.Image, set viz.OcclusionSettings, targets []int,
	progress func(done, total int)) ([]*viz.Occlusion, *image.NRGBA, error) {
	c, labels := w.snapshot()
	if err := CheckOcclusion(set, c.Width, c.Height); err != nil {
		return nil, nil, err
	}
	s, err := w.session(plainRun)
	if err != nil {
		return nil, nil, err
	}
	fit, in := tensor(img, c)
	if len(targets) == 0 {
		res, err := s.Run(ctx, in, 1)
		if err != nil {
			return nil, nil, fmt.Errorf("core: %s: %w", w.Model.Name, err)
		}
		cl, err := classification(res, labels, 1, fit)
		if err != nil {
			return nil, nil, err
		}
		targets = []int{cl.Top[0].Index}
	}
	if n := w.Classes(); n > 0 {
		for _, t := range targets {
			if t < 0 || t >= n {
				return nil, nil, inputf("", "class %d is outside 0…%d", t, n-1)
			}
		}
	}
	occ, err := analysis.Occlude(ctx, s, c, fit, set, targets, progress)
	if errors.Is(err, analysis.ErrNoLogits) {
		// A condition of the model, not a failure of the run.
		return nil, nil, inputf(w.Model.Name, "%s", strings.TrimPrefix(err.Error(), "viz: occlusion: "))
	}
	if err != nil {
		return nil, nil, fmt.Errorf("core: %s: occlusion: %w", w.Model.Name, err)
	}
	for _, o := range occ {
		if o.Label == "" && o.Target >= 0 && o.Target < len(labels) {
			o.Label = labels[o.Target]
		}
	}
	return occ, fit, nil
}

// ClassIndex resolves a class given as a label (exact, then
// case-insensitive) or as a number.
func (w *Workspace) ClassIndex(s string) (int, error) {
	_, labels := w.snapshot()
	return classIndex(s, labels, w.Classes())
}

// Scan runs the model on every file and reports, per activation layer and
// channel, how often the channel fired (analysis.Scan): dead, rare and constant
// channels, and zero or duplicate kernels.
func (w *Workspace) Scan(ctx context.Context, files []string, o analysis.ScanOptions,
	progress func(done, total int)) (*analysis.ScanReport, error) {
	if len(files) == 0 {
		return nil, inputf("", "no probe images to scan")
	}
	c, _ := w.snapshot()
	s, err := w.session(scanRun)
	if err != nil {
		return nil, err
	}
	if len(w.Model.ReluLayers()) == 0 && len(o.Layers) == 0 {
		// A property of the model the user chose, not a failure while running.
		return nil, inputf(w.Model.Name, "no ReLU-like activation layer to scan (a scan counts how often the channels after Relu, Clip, LeakyRelu and the like fire)")
	}
	if len(o.Layers) > 0 {
		// Layers besides the activations: a session of their own that
		// also captures them (the kept scan session does not).
		extra, err := analysis.LayerOutputs(w.Model, o.Layers)
		if err != nil {
			return nil, inputErr(w.Model.Name, err)
		}
		opt := analysis.ScanSession(w.Model, dims(w.Model, c), extra...)
		opt.Output = w.output
		one, err := analysis.OpenScanSession(w.Model, opt)
		if err != nil {
			return nil, inputErr(w.Model.Name, err)
		}
		defer one.Close()
		s = one
	}
	r, err := analysis.Scan(ctx, s, w.Model, c, files, o, progress)
	if err != nil {
		if IsInput(err) || ctx.Err() != nil {
			return nil, err
		}
		return nil, fmt.Errorf("core: %s: scan: %w", w.Model.Name, err)
	}
	return r, nil
}

// Kernels returns the weights of a convolution: "" = the first layer.
func (w *Workspace) Kernels(layer string) (*modelio.Kernels, error) {
	k, err := w.Model.Kernels(layer)
	if err != nil {
		return nil, inputErr(w.Model.Name, err)
	}
	return k, nil
}

// Tiles draws the filters of a convolution ("" = the first layer) as tiles
// (viz.Tiles, which flags zero and duplicate kernels itself) and, when scan is
// not nil, marks them with the scan's findings for the channels that
// convolution feeds. Flags already in o are kept; o.BGR follows the
// preprocessing in force.
func (w *Workspace) Tiles(layer string, o viz.TileOptions, scan *analysis.ScanReport) (*image.NRGBA, []viz.TileInfo, error) {
	k, err := w.Kernels(layer)
	if err != nil {
		return nil, nil, err
	}
	flags := map[int][]modelio.Flag{}
	add := func(m map[int][]modelio.Flag) {
		for i, fs := range m {
			for _, f := range fs {
				if !slices.Contains(flags[i], f) {
					flags[i] = append(flags[i], f)
				}
			}
		}
	}
	add(o.Flags)
	add(ScanFlags(scan, k.Node))
	o.Flags = flags
	c, _ := w.snapshot()
	o.BGR = c.BGR
	img, info, err := viz.Tiles(k, o)
	if err != nil {
		return nil, nil, fmt.Errorf("%s: filters of %s: %w", w.Model.Name, k.Node, err)
	}
	// The colour legend under the tiles; the tiles' places move with them.
	const margin = 8
	pw, ph := img.Bounds().Dx(), img.Bounds().Dy()
	barW := max(260, min(pw, 560))
	bar, err := viz.TileLegend(k, o, barW, legendHeight)
	if err != nil {
		return nil, nil, fmt.Errorf("%s: filters of %s: %w", w.Model.Name, k.Node, err)
	}
	page := image.NewNRGBA(image.Rect(0, 0, max(pw, barW)+2*margin, ph+legendHeight+3*margin))
	draw.Draw(page, page.Rect, &image.Uniform{viz.Light}, image.Point{}, draw.Src)
	draw.Draw(page, image.Rect(margin, margin, margin+pw, margin+ph), img, image.Point{}, draw.Src)
	draw.Draw(page, image.Rect(margin, 2*margin+ph, margin+barW, 2*margin+ph+legendHeight), bar, image.Point{}, draw.Src)
	for i := range info {
		info[i].Rect = info[i].Rect.Add(image.Pt(margin, margin))
	}
	return page, info, nil
}

// ScanFlags returns the scan's flags per channel for the activation layer fed
// by the convolution node conv (nil when r is nil or has no such layer).
func ScanFlags(r *analysis.ScanReport, conv string) map[int][]modelio.Flag {
	if r == nil {
		return nil
	}
	for _, l := range r.Layers {
		if l.Conv == conv {
			m := map[int][]modelio.Flag{}
			for _, ch := range l.Channels {
				if len(ch.Flags) > 0 {
					m[ch.Index] = slices.Clone(ch.Flags)
				}
			}
			return m
		}
	}
	return nil
}
