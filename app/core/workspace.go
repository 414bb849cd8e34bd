package core

import (
	"context"
	"fmt"
	"path/filepath"
	"slices"
	"strings"
	"sync"

	"fovea/modelio"
	"fovea/modelio/classes"
	"fovea/modelio/infer"
	"fovea/modelio/prep"
	"fovea/viz/analysis"
)

// Where labels and preprocessing settings came from, as shown to the user.
const (
	FromModel   = "model metadata"
	FromGuess   = "guessed from the model"
	FromSaved   = "saved settings"
	FromChosen  = "chosen"
	FromNowhere = "none (class numbers)"
)

// Workspace is one open model and what is needed to run it. Create it with
// [OpenModel] or [OpenDemo]; Close it when done. Model is shared and never
// changes; [Workspace.ObserveShapes] replaces it with one whose layer table
// holds the shapes a run observed.
type Workspace struct {
	Model *modelio.Model
	Demo  string // "" for a user's file; "healthy" or "unhealthy" for the embedded demo
	// Hash is the hex SHA-256 of the model file's content: the key of the
	// per-model settings (prep.Settings).
	Hash string

	mu         sync.Mutex
	cfg        prep.Config
	cfgFrom    string
	notes      []string // what the guess assumed and why
	labels     []string
	labelsFrom string
	sessions   [kinds]*infer.Session // by kind, made on first use
	retired    []*infer.Session      // replaced after a change of input size; closed by Close
	observed   bool
	output     string // the output holding the class scores, when named (SetOutput)
}

// OpenModel reads and checks the ONNX file at path and proposes
// preprocessing settings from it (prep.Guess) and labels from its metadata.
// Nothing runs yet: sessions are created on first use, after [Start].
func OpenModel(path string) (*Workspace, error) {
	m, err := modelio.Open(path)
	if err != nil {
		return nil, inputErr(path, err)
	}
	hash, err := prep.HashFile(path)
	if err != nil {
		return nil, inputErr(path, err)
	}
	return newWorkspace(m, "", hash)
}

func newWorkspace(m *modelio.Model, demo, hash string) (*Workspace, error) {
	if len(m.Outputs) == 0 {
		return nil, inputf(m.Name, "the model has no outputs")
	}
	w := &Workspace{Model: m, Demo: demo, Hash: hash}
	w.cfg, w.notes = guess(m)
	w.cfgFrom = FromGuess
	// Labels from the metadata, else a labels file beside the model
	// (classes.Labels), else none.
	labels, source, path, err := classes.Labels(m, "")
	switch {
	case err != nil || len(labels) == 0:
		w.labelsFrom = FromNowhere
	case source == classes.LabelsMetadata:
		w.labels, w.labelsFrom = slices.Clone(labels), FromModel
	default:
		w.labels, w.labelsFrom = slices.Clone(labels), path
	}
	if n := w.Classes(); n > 0 && len(w.labels) != 0 && len(w.labels) != n {
		// Labels that do not fit would name the wrong classes.
		w.labels, w.labelsFrom = nil, FromNowhere
	}
	return w, nil
}

// Close releases the sessions. Cancel running analyses and wait for them first.
func (w *Workspace) Close() error {
	w.mu.Lock()
	defer w.mu.Unlock()
	var first error
	for _, s := range append(w.retired, w.sessions[:]...) {
		if s != nil {
			if err := s.Close(); err != nil && first == nil {
				first = err
			}
		}
	}
	w.sessions, w.retired = [kinds]*infer.Session{}, nil
	return first
}

// Name is the model's file name, or the demo's name.
func (w *Workspace) Name() string { return w.Model.Name }

// Prep returns the preprocessing settings in force and where they came from
// ([FromGuess], [FromSaved] or [FromChosen]).
func (w *Workspace) Prep() (prep.Config, string) {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.cfg, w.cfgFrom
}

// SetPrep checks c against the model's image input and puts it in force for
// the analyses started from now on. It does not save it: see [Workspace.Remember].
func (w *Workspace) SetPrep(c prep.Config) error {
	if err := CheckPrep(w.Model, c); err != nil {
		return err
	}
	w.mu.Lock()
	if !slices.Equal(dims(w.Model, w.cfg), dims(w.Model, c)) {
		// Sessions of a model with symbolic input sizes are made for one
		// size. Analyses still running keep theirs; they are closed with w.
		for i, s := range w.sessions {
			if s != nil {
				w.retired = append(w.retired, s)
				w.sessions[i] = nil
			}
		}
	}
	w.cfg = c
	w.cfgFrom = FromChosen
	w.mu.Unlock()
	return nil
}

// SetOutput names the model output that holds the class scores (the
// command line's --output), instead of the model's own choice
// (modelio.Model.ScoreOutput). The name must be one of the model's outputs;
// sessions already made are retired like after a change of input size.
func (w *Workspace) SetOutput(name string) error {
	names := make([]string, len(w.Model.Outputs))
	for i, o := range w.Model.Outputs {
		names[i] = o.Name
	}
	if !slices.Contains(names, name) {
		return inputf(w.Model.Name, "no output named %q to read the scores from (outputs: %s)", name, strings.Join(names, ", "))
	}
	w.mu.Lock()
	defer w.mu.Unlock()
	for i, s := range w.sessions {
		if s != nil {
			w.retired = append(w.retired, s)
			w.sessions[i] = nil
		}
	}
	w.output = name
	return nil
}

// ScoreOutput is the name of the output the class scores are read from and
// why: named by SetOutput, or chosen by modelio.Model.ScoreOutput.
func (w *Workspace) ScoreOutput() (name, why string) {
	w.mu.Lock()
	out := w.output
	w.mu.Unlock()
	if out != "" {
		return out, "named by --output"
	}
	if len(w.Model.Outputs) == 0 {
		return "", ""
	}
	i, why := w.Model.ScoreOutput()
	return w.Model.Outputs[i].Name, why
}

// dims are the per-image input dimensions for c in the model's layout
// (infer.Options.Dims).
func dims(m *modelio.Model, c prep.Config) []int64 {
	layout := c.Layout
	if m.Image != nil && m.Image.Layout != "" {
		layout = m.Image.Layout
	}
	if layout == modelio.LayoutNHWC {
		return []int64{int64(c.Height), int64(c.Width), int64(c.Channels)}
	}
	return []int64{int64(c.Channels), int64(c.Height), int64(c.Width)}
}

// guess proposes preprocessing from the model's image input and metadata
// (prep.GuessFrom), with notes on what it assumed.
func guess(m *modelio.Model) (prep.Config, []string) {
	var in *prep.Input
	if im := m.Image; im != nil {
		in = &prep.Input{Layout: im.Layout, Channels: im.Channels, Height: im.Height, Width: im.Width}
	}
	return prep.GuessFrom(in, m.Metadata)
}

// GuessNotes says what the guessed preprocessing assumed and why (for
// example that the model's metadata says nothing about mean and std).
func (w *Workspace) GuessNotes() []string {
	w.mu.Lock()
	defer w.mu.Unlock()
	return slices.Clone(w.notes)
}

// Restore puts in force the settings the user saved for this model
// ([Workspace.Remember]; prep.LoadSettings, keyed by the file's content),
// and reports whether there were any. A saved label file that is gone or no
// longer fits is reported as an error after the preprocessing was restored.
func (w *Workspace) Restore() (bool, error) {
	dir, err := prep.SettingsDir()
	if err != nil {
		return false, err
	}
	s, found, err := prep.LoadSettings(dir, w.Hash)
	if err != nil || !found {
		return false, err
	}
	if err := CheckPrep(w.Model, s.Prep); err != nil {
		return false, fmt.Errorf("core: saved settings for %s no longer fit: %w", w.Model.Name, err)
	}
	w.mu.Lock()
	w.cfg, w.cfgFrom = s.Prep, FromSaved
	w.mu.Unlock()
	if s.Labels != "" {
		if err := w.LoadLabels(s.Labels); err != nil {
			return true, err
		}
	}
	return true, nil
}

// Remember saves the preprocessing in force and the label file (when labels
// came from one) as this model's settings, in the user's config folder
// (prep.SettingsDir), never beside the model.
func (w *Workspace) Remember() error {
	dir, err := prep.SettingsDir()
	if err != nil {
		return err
	}
	w.mu.Lock()
	s := prep.Settings{Hash: w.Hash, Model: w.Model.Path, Prep: w.cfg}
	switch w.labelsFrom {
	case FromModel, FromNowhere, FromSaved:
	default:
		if abs, err := filepath.Abs(w.labelsFrom); err == nil {
			s.Labels = abs
		}
	}
	w.mu.Unlock()
	return prep.SaveSettings(dir, &s)
}

// Labels returns the class labels in force (nil when there are none) and
// where they came from: [FromModel], [FromNowhere], [FromSaved] or the label
// file's path.
func (w *Workspace) Labels() ([]string, string) {
	w.mu.Lock()
	defer w.mu.Unlock()
	return append([]string(nil), w.labels...), w.labelsFrom
}

// Classes is the number of scores the model gives one image, in the output
// infer reads them from (ScoreOutput: named by SetOutput or chosen by
// modelio.Model.ScoreOutput): the product of
// that output's dimensions after the batch, as Result.Scores returns them.
// A convolutional head's [N,10,1,1] scores 10 classes, a [N,10] output 10,
// an output without a batch axis ([10]) 10. 0 when the dimensions that
// decide are not fixed in the file.
func (w *Workspace) Classes() int {
	perImage := func(s modelio.Shape) modelio.Shape {
		if len(s) <= 1 {
			return s // no batch axis: infer treats the whole output as one image's
		}
		return s[1:]
	}
	if len(w.Model.Outputs) == 0 {
		return 0
	}
	name, _ := w.ScoreOutput()
	pick := slices.IndexFunc(w.Model.Outputs, func(o modelio.Value) bool { return o.Name == name })
	if pick < 0 {
		return 0
	}
	for _, d := range perImage(w.Model.Outputs[pick].Shape) {
		if d.Size < 0 {
			return 0 // the run decides
		}
	}
	sh := perImage(w.Model.Outputs[pick].Shape)
	if len(sh) == 0 {
		return 0
	}
	n := int64(1)
	for _, d := range sh {
		if d.Size < 0 || d.Size > 1<<30 {
			return 0
		}
		n *= d.Size
		if n > 1<<30 {
			return 0
		}
	}
	return int(n)
}

// LoadLabels reads class labels from path (classes.ReadLabels: one per line,
// or a JSON array of strings) and puts them in force. The count must equal
// the model's number of classes when that is known.
func (w *Workspace) LoadLabels(path string) error {
	labels, err := classes.ReadLabels(path)
	if err != nil {
		return inputErr(path, err)
	}
	if n := w.Classes(); n > 0 && len(labels) != n {
		return inputf(path, "%d labels, but model %s has %d classes", len(labels), w.Model.Name, n)
	}
	w.mu.Lock()
	w.labels = labels
	w.labelsFrom = path
	w.mu.Unlock()
	return nil
}

// CheckPrep reports whether c can feed m's image input: c.Validate, and the
// sizes, channels and layout the model fixes respected.
func CheckPrep(m *modelio.Model, c prep.Config) error {
	if err := c.Validate(); err != nil {
		return &InputError{Err: err}
	}
	bad := func(format string, args ...any) error { return inputf("", format, args...) }
	if im := m.Image; im != nil {
		if im.Width > 0 && im.Width != c.Width || im.Height > 0 && im.Height != c.Height {
			return bad("input size %dx%d, but model %s takes %dx%d", c.Width, c.Height, m.Name, im.Width, im.Height)
		}
		if im.Channels > 0 && im.Channels != c.Channels {
			return bad("%d channels, but model %s takes %d", c.Channels, m.Name, im.Channels)
		}
		if im.Layout != "" && im.Layout != c.Layout && im.Channels > 0 && im.Width > 0 && im.Height > 0 && im.Width != im.Channels {
			return bad("layout %s, but model %s takes %s", c.Layout, m.Name, im.Layout)
		}
	}
	return nil
}

// kind is what a session returns besides the model's outputs.
type kind int

const (
	plainRun  kind = iota // the logits behind a final Softmax (analysis.OcclusionCapture): classification, occlusion
	layersRun             // every layer's output the window can show (modelio.OutputsOf of ActivationLayers)
	scanRun               // the ReLU-like maps a scan reads (analysis.ScanCapture)
	kinds
)

// session returns the session of kind k, creating it on first use. A scan
// has its own: it runs many images, and capturing only the maps it reads
// keeps the runtime's merged steps (modelio.CaptureEffect).
func (w *Workspace) session(k kind) (*infer.Session, error) {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.sessionLocked(k)
}

func (w *Workspace) sessionLocked(k kind) (*infer.Session, error) {
	if !infer.Initialized() {
		return nil, fmt.Errorf("core: ONNX Runtime is not loaded (call core.Start first)")
	}
	slot := &w.sessions[k]
	opt := infer.Options{Dims: dims(w.Model, w.cfg)}
	switch k {
	case plainRun:
		// The logits behind a final Softmax, for the occlusion's logit and
		// log-probability scores; the outputs stay those of a plain run.
		opt.Capture = analysis.OcclusionCapture(w.Model)
	case layersRun:
		opt.Capture = modelio.OutputsOf(w.Model.ActivationLayers())
	case scanRun:
		opt = analysis.ScanSession(w.Model, opt.Dims)
	}
	opt.Output = w.output
	if *slot == nil {
		weights := 0
		for _, in := range w.Model.Inputs {
			if in.Weight {
				weights++
			}
		}
		if weights > 0 {
			return nil, inputf(w.Model.Name, "%d weight tensors are declared as inputs without data (an architecture-only model): it cannot be run", weights)
		}
		if err := w.cfg.Validate(); err != nil {
			// e.g. an image input of 4 channels: no picture can fill it.
			return nil, inputf(w.Model.Name, "the image input cannot be fed from a picture: %s", strings.TrimPrefix(err.Error(), "prep: bad settings: "))
		}
		open := infer.NewSession
		if k == scanRun {
			open = analysis.OpenScanSession
		}
		s, err := open(w.Model, opt)
		if err != nil {
			return nil, inputErr(w.Model.Name, err)
		}
		if _, err := s.ImageDims(); err != nil {
			s.Close()
			return nil, inputErr(w.Model.Name, err)
		}
		*slot = s
	}
	return *slot, nil
}

// ObserveShapes runs the model once on a blank image when some layer's shape
// could not be inferred statically, and fills those shapes in from the run
// (infer.ObserveShapes). It does nothing when every shape is known or it
// already ran. It replaces w.Model (the old one stays valid for whoever
// holds it): call it before handing w.Model to code on other goroutines.
func (w *Workspace) ObserveShapes(ctx context.Context) error {
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.observed {
		return nil
	}
	if !infer.Initialized() {
		return fmt.Errorf("core: ONNX Runtime is not loaded (call core.Start first)")
	}
	m, _, err := infer.ObserveShapes(ctx, w.Model, infer.Options{Dims: dims(w.Model, w.cfg)})
	if err != nil {
		return fmt.Errorf("core: %s: a run to observe layer shapes failed: %w", w.Model.Name, err)
	}
	w.Model = m
	w.observed = true
	return nil
}
