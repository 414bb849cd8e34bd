package core

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"image"
	"image/color"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"fovea/assets"
	"fovea/modelio"
	"fovea/modelio/classes"
	"fovea/modelio/infer"
	"fovea/modelio/prep"
	"fovea/viz"
	"fovea/viz/analysis"
)

// These tests run the embedded demo model in the real ONNX Runtime (found
// as the command line finds it: $FOVEA_ORT_LIB or the user cache, which
// `make test` fills first) and compare what the workspace returns with the
// libraries called directly.

func start(t *testing.T) {
	t.Helper()
	if err := Start(""); err != nil {
		t.Fatalf("ONNX Runtime is needed: %v", err)
	}
}

func demo(t *testing.T, unhealthy bool) *Workspace {
	t.Helper()
	start(t)
	w, err := OpenDemo(unhealthy)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { w.Close() })
	return w
}

func demoImage(t *testing.T, i int) image.Image {
	t.Helper()
	names := DemoImages()
	if len(names) <= i {
		t.Fatalf("the demo has %d images", len(names))
	}
	img, err := DemoImage(names[i])
	if err != nil {
		t.Fatal(err)
	}
	return img
}

func TestStartMissingLibrary(t *testing.T) {
	err := Start(filepath.Join(t.TempDir(), "libonnxruntime.so.1"))
	var le *infer.LibraryError
	if !errors.As(err, &le) {
		t.Fatalf("Start with a missing file: %v, want *infer.LibraryError", err)
	}
	if !IsInput(err) || !strings.Contains(err.Error(), "libonnxruntime.so.1") || !strings.Contains(err.Error(), infer.FetchCommand) {
		t.Errorf("message %q should name the file and %q", err, infer.FetchCommand)
	}
}

func TestDemoSettings(t *testing.T) {
	w := demo(t, false)
	c, from := w.Prep()
	// assets/assets.go: input [batch, 3, 64, 64] NCHW RGB, values 0..1 then
	// mean/std from the metadata.
	if c.Width != 64 || c.Height != 64 || c.Channels != 3 || c.Layout != "nchw" || c.BGR || c.Range != "0-1" || from != FromGuess {
		t.Errorf("demo preprocessing %s (%s), want 64x64 RGB NCHW range 0-1 guessed", c, from)
	}
	if c.Mean == ([3]float32{}) || c.Std == ([3]float32{1, 1, 1}) {
		t.Errorf("demo preprocessing %s ignores the metadata's mean and std", c)
	}
	labels, lfrom := w.Labels()
	if !slices.Equal(labels, assets.Labels()) || lfrom != FromModel {
		t.Errorf("labels %q from %s, want %q from the metadata", labels, lfrom, assets.Labels())
	}
	// Seven bins: the demo's own scenario (assets/assets.go, demo/labels.txt).
	if w.Classes() != 7 || w.Demo != DemoHealthy {
		t.Errorf("%d classes, demo %q; want 7, healthy", w.Classes(), w.Demo)
	}
}

func TestClassifyMatchesLibrary(t *testing.T) {
	w := demo(t, false)
	img := demoImage(t, 0)
	got, err := w.Classify(t.Context(), img, 7)
	if err != nil {
		t.Fatal(err)
	}
	c, _ := w.Prep()
	in := make([]float32, c.Len())
	c.Tensor(prep.Planes(prep.Fit(img, c)), in)
	s, err := infer.NewSession(w.Model, infer.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	res, err := s.Run(t.Context(), in, 1)
	if err != nil {
		t.Fatal(err)
	}
	p, already := classes.Probabilities(res.Scores(0))
	want := classes.TopK(p, assets.Labels(), 7)
	if got.Softmaxed != already || !slices.Equal(got.Scores, res.Scores(0)) {
		t.Errorf("scores %v (softmaxed %v), library %v (%v)", got.Scores, got.Softmaxed, res.Scores(0), already)
	}
	if !slices.Equal(got.Top, want) {
		t.Errorf("top %v, library %v", got.Top, want)
	}
	// Probabilities sum to 1 (definition of a distribution; float32 sum).
	var sum float64
	for _, v := range got.Probs {
		sum += float64(v)
	}
	if math.Abs(sum-1) > 1e-5 {
		t.Errorf("probabilities sum to %v", sum)
	}
}

func TestActivationsOneRun(t *testing.T) {
	w := demo(t, false)
	a, err := w.Activations(t.Context(), demoImage(t, 0))
	if err != nil {
		t.Fatal(err)
	}
	if len(a.Layers) == 0 || len(a.Layers) != len(w.Model.ActivationLayers()) {
		t.Fatalf("%d layers captured, model has %d activation layers", len(a.Layers), len(w.Model.ActivationLayers()))
	}
	for _, l := range a.Layers {
		m, ok := a.Maps[l.Output]
		if !ok {
			t.Errorf("no map for %s", l.Name)
			continue
		}
		// The captured shape is the layer table's (static) shape for one image.
		want := l.Shape.Ints()
		want[0] = 1
		if !slices.Equal(m.Shape, want) {
			t.Errorf("%s: map shape %v, layer table %v", l.Name, m.Shape, want)
		}
	}
	// The same run's classification equals Classify's.
	cl, err := w.Classify(t.Context(), demoImage(t, 0), 5)
	if err != nil {
		t.Fatal(err)
	}
	for i := range cl.Top {
		if cl.Top[i].Index != a.Class.Top[i].Index || math.Abs(cl.Top[i].Probability-a.Class.Top[i].Probability) > 1e-6 {
			t.Errorf("rank %d: Activations %v, Classify %v", i, a.Class.Top[i], cl.Top[i])
		}
	}
	if _, _, err := a.MapLayer("no such layer"); !IsInput(err) {
		t.Errorf("MapLayer of an unknown name: %v, want an input error", err)
	}
}

// Analyses from several goroutines at once, with the settings changed meanwhile:
// run under the race detector. Each analysis uses the settings in force when it
// started, whole: its picture and its probabilities are those of one
// setting (the same setting for both, no mixture of one setting's resize
// and another's mean), and that setting was in force at some moment between
// the analysis's start and its end. Every setting has its own mean and alternates
// crop and stretch on a 96×64 picture, so each run tells which it used; the
// reference for each is a run with no other work going on.
func TestConcurrentJobs(t *testing.T) {
	w := demo(t, false)
	img := widePicture(demoImage(t, 1))
	base, _ := w.Prep()
	const nSet = 6
	cfgs := make([]prep.Config, nSet)
	refs := make([]*Classification, nSet)
	for k := range cfgs {
		c := base
		c.Resize = []string{prep.ResizeCrop, prep.ResizeStretch}[k%2]
		v := float32(k) * 0.05
		c.Mean = [3]float32{v, v, v}
		cfgs[k] = c
		if err := w.SetPrep(c); err != nil {
			t.Fatal(err)
		}
		r, err := w.Classify(t.Context(), img, 3)
		if err != nil {
			t.Fatal(err)
		}
		refs[k] = r
	}
	// which returns the setting whose reference run gave exactly this
	// picture and these probabilities, or -1.
	which := func(in *image.NRGBA, probs []float32) int {
		for k, r := range refs {
			if slices.Equal(in.Pix, r.Input.Pix) && slices.Equal(probs, r.Probs) {
				return k
			}
		}
		return -1
	}
	if err := w.SetPrep(cfgs[0]); err != nil {
		t.Fatal(err)
	}
	// started counts the SetPrep calls begun, done those returned: a analysis
	// that starts when done = d and ends when started = s must use a
	// setting d..s.
	var started, done atomic.Int32
	var wg sync.WaitGroup
	errs := make(chan error, 64)
	check := func(what string, d int32, in *image.NRGBA, probs []float32) {
		s := started.Load()
		if k := which(in, probs); k < 0 {
			errs <- fmt.Errorf("%s: picture and probabilities match no single setting's run", what)
		} else if int32(k) < d || int32(k) > s {
			errs <- fmt.Errorf("%s: used setting %d, but settings %d..%d were in force while it ran", what, k, d, s)
		}
	}
	for range 3 {
		wg.Add(2)
		go func() {
			defer wg.Done()
			for range 4 {
				d := done.Load()
				r, err := w.Classify(t.Context(), img, 3)
				if err != nil {
					errs <- err
					return
				}
				check("Classify", d, r.Input, r.Probs)
			}
		}()
		go func() {
			defer wg.Done()
			for range 2 {
				d := done.Load()
				a, err := w.Activations(t.Context(), img)
				if err != nil {
					errs <- err
					return
				}
				check("Activations", d, a.Input, a.Class.Probs)
			}
		}()
	}
	wg.Add(2)
	go func() {
		defer wg.Done()
		for k := 1; k < nSet; k++ {
			started.Store(int32(k))
			if err := w.SetPrep(cfgs[k]); err != nil {
				errs <- err
			}
			done.Store(int32(k))
			w.Prep()
			w.Labels()
		}
	}()
	go func() {
		defer wg.Done()
		_, _, err := w.Occlude(t.Context(), img, viz.OcclusionSettings{Patch: 32, Stride: 32}, nil, nil)
		errs <- err
	}()
	wg.Wait()
	close(errs)
	for err := range errs {
		if err != nil {
			t.Error(err)
		}
	}
}

// widePicture puts img (64×64) in the middle of a 96×64 picture with a
// coloured band on each side, so that crop and stretch give different inputs.
func widePicture(img image.Image) *image.NRGBA {
	out := image.NewNRGBA(image.Rect(0, 0, 96, 64))
	for y := range 64 {
		for x := range 96 {
			if x < 16 || x >= 80 {
				out.SetNRGBA(x, y, color.NRGBA{200, uint8(3 * y), 40, 255})
			} else {
				out.Set(x, y, img.At(img.Bounds().Min.X+x-16, img.Bounds().Min.Y+y))
			}
		}
	}
	return out
}

func TestOccludeMatchesLibrary(t *testing.T) {
	w := demo(t, false)
	img := demoImage(t, 0)
	set := viz.OcclusionSettings{Patch: 16, Stride: 16, Fill: viz.FillMean, Score: viz.ScoreProbability}
	var calls, last int
	got, fit, err := w.Occlude(t.Context(), img, set, []int{2, 5}, func(done, total int) { calls++; last = done - total })
	if err != nil {
		t.Fatal(err)
	}
	if calls == 0 || last != 0 {
		t.Errorf("progress called %d times, ending %d short of the total", calls, -last)
	}
	c, _ := w.Prep()
	s, _ := infer.NewSession(w.Model, infer.Options{})
	defer s.Close()
	want, err := analysis.Occlude(t.Context(), s, c, prep.Fit(img, c), set, []int{2, 5}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if fit.Bounds().Dx() != 64 || len(got) != 2 {
		t.Fatalf("fit %v, %d results", fit.Bounds(), len(got))
	}
	for i := range want {
		if got[i].Target != want[i].Target || got[i].Label != assets.Labels()[want[i].Target] {
			t.Errorf("result %d: target %d %q, want %d %q", i, got[i].Target, got[i].Label, want[i].Target, assets.Labels()[want[i].Target])
		}
		for y := range want[i].Scores {
			for x := range want[i].Scores[y] {
				if math.Abs(got[i].Scores[y][x]-want[i].Scores[y][x]) > 1e-6 {
					t.Errorf("result %d (%d,%d): %v, library %v", i, y, x, got[i].Scores[y][x], want[i].Scores[y][x])
				}
			}
		}
	}
	// Bad settings and classes are input errors, before any run.
	for _, bad := range []struct {
		set     viz.OcclusionSettings
		targets []int
	}{
		{viz.OcclusionSettings{Patch: 0, Stride: 4}, nil},
		{viz.OcclusionSettings{Patch: 65, Stride: 4}, nil},
		{viz.OcclusionSettings{Patch: 8, Stride: 0}, nil},
		{viz.OcclusionSettings{Patch: 8, Stride: 4, Fill: "plaid"}, nil},
		{viz.OcclusionSettings{Patch: 8, Stride: 4}, []int{7}},
	} {
		if _, _, err := w.Occlude(t.Context(), img, bad.set, bad.targets, nil); !IsInput(err) {
			t.Errorf("Occlude(%+v, %v): %v, want an input error", bad.set, bad.targets, err)
		}
	}
}

// A analysis cancelled while it runs returns the context's error and stops
// promptly. In flight deterministically: the cancel comes from the analysis's
// own first progress report (stride 1 over 64×64 is 3969 occluded runs, so
// the first report comes long before the end); promptly: no progress is
// reported after the one that cancelled beyond the batch then running, and
// the analysis stops far short of the total (a analysis that ignored the context
// would report every run).
func TestCancel(t *testing.T) {
	w := demo(t, false)
	img := demoImage(t, 0)
	ctx, cancel := context.WithCancel(t.Context())
	defer cancel()
	var atCancel, last, total int
	progress := func(done, all int) {
		if done > 0 && atCancel == 0 {
			atCancel = done
			cancel()
		}
		last, total = done, all
	}
	_, _, err := w.Occlude(ctx, img, viz.OcclusionSettings{Patch: 2, Stride: 1}, []int{0, 1, 2}, progress)
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("cancelled occlusion: %v", err)
	}
	if atCancel == 0 || total == 0 {
		t.Fatalf("no progress reported before the end (cancelled at %d of %d)", atCancel, total)
	}
	// One batch may finish after the cancel; a batch is far below half the
	// runs (the session's batch for the 64×64 demo).
	if last >= total || last-atCancel > total/2 {
		t.Errorf("cancelled at %d of %d runs, went on to %d", atCancel, total, last)
	}
}

func TestScanUnhealthyMatchesTruth(t *testing.T) {
	w := demo(t, true)
	fsys, files, err := DemoProbes()
	if err != nil {
		t.Fatal(err)
	}
	r, err := w.Scan(t.Context(), files, analysis.ScanOptions{FS: fsys}, nil)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := assets.Files.ReadFile(assets.UnhealthyTruthFile)
	var tr struct {
		DeadTotal int `json:"dead_total"`
	}
	if err := json.Unmarshal(b, &tr); err != nil {
		t.Fatal(err)
	}
	if got := r.Count(modelio.FlagDead); got != tr.DeadTotal || got == 0 {
		t.Errorf("%d dead channels, %s says %d (measured with PyTorch)", got, assets.UnhealthyTruthFile, tr.DeadTotal)
	}
	// The scan's flags reach the filter tiles of the convolution feeding
	// each layer.
	for _, l := range r.Layers {
		if l.Conv == "" {
			continue
		}
		flags := ScanFlags(r, l.Conv)
		_, info, err := w.Tiles(l.Conv, viz.TileOptions{Slice: 0}, r)
		if err != nil {
			t.Fatal(err)
		}
		for _, ti := range info {
			for _, f := range flags[ti.Index] {
				if !slices.Contains(ti.Flags, f) {
					t.Errorf("%s filter %d: tile flags %v lack the scan's %q", l.Conv, ti.Index, ti.Flags, f)
				}
			}
		}
	}
	// Every probe image listed in the demo's labels.csv was read from the
	// embedded files (nothing is copied to disk any more).
	if probe, err := assets.Probe(); err != nil || r.Images != len(probe) || len(r.Skipped) != 0 {
		t.Errorf("scanned %d images (skipped %v), labels.csv lists %d (%v)", r.Images, r.Skipped, len(probe), err)
	}
}

func TestLabelsAndPrepChecks(t *testing.T) {
	w := demo(t, false)
	dir := t.TempDir()
	short := filepath.Join(dir, "three labels ü.txt")
	os.WriteFile(short, []byte("a\nb\nc\n"), 0o644)
	err := w.LoadLabels(short)
	if !IsInput(err) || !strings.Contains(err.Error(), "three labels ü.txt") || !strings.Contains(err.Error(), "3 labels") {
		t.Errorf("3 labels for 7 classes: %v", err)
	}
	good := filepath.Join(dir, "seven.txt")
	os.WriteFile(good, []byte("0 a\n1 b\n2 c\n3 d\n4 e\n5 f\n6 g\n"), 0o644)
	if err := w.LoadLabels(good); err != nil {
		t.Fatal(err)
	}
	if l, from := w.Labels(); l[6] != "g" || from != good {
		t.Errorf("labels %q from %s", l, from)
	}
	c, _ := w.Prep()
	for _, bad := range []func(*prep.Config){
		func(c *prep.Config) { c.Width = 32 },    // the model fixes 64×64
		func(c *prep.Config) { c.Channels = 1 },  // and 3 channels
		func(c *prep.Config) { c.Std[1] = 0 },    // divides
		func(c *prep.Config) { c.Range = "0-9" }, // unknown
	} {
		c2 := c
		bad(&c2)
		if err := w.SetPrep(c2); !IsInput(err) {
			t.Errorf("SetPrep(%s): %v, want an input error", c2, err)
		}
	}
	if got, _ := w.Prep(); got != c {
		t.Errorf("a refused SetPrep changed the settings to %s", got)
	}
}

// Remember writes the settings into the user's config folder, keyed by the
// model's content; Restore reads them back. Nothing is written beside the
// model.
func TestRememberRestore(t *testing.T) {
	cfgDir := t.TempDir()
	t.Setenv("XDG_CONFIG_HOME", cfgDir)
	start(t)
	modelDir := filepath.Join(t.TempDir(), "models ü")
	os.Mkdir(modelDir, 0o755)
	path := filepath.Join(modelDir, "parts copy.onnx")
	os.WriteFile(path, assets.Model(), 0o644)
	w, err := OpenModel(path)
	if err != nil {
		t.Fatal(err)
	}
	defer w.Close()
	c, _ := w.Prep()
	c.Resize = prep.ResizeCrop
	if err := w.SetPrep(c); err != nil {
		t.Fatal(err)
	}
	if err := w.Remember(); err != nil {
		t.Fatal(err)
	}
	if ents, _ := os.ReadDir(modelDir); len(ents) != 1 {
		t.Errorf("Remember wrote into the model's folder: %d entries", len(ents))
	}
	// The demo is the same content: it finds the settings.
	d := demo(t, false)
	found, err := d.Restore()
	if err != nil || !found {
		t.Fatalf("Restore: %v, %v", found, err)
	}
	if got, from := d.Prep(); got != c || from != FromSaved {
		t.Errorf("restored %s (%s), want %s (saved)", got, from, c)
	}
}

func TestReportPage(t *testing.T) {
	w := demo(t, false)
	page, err := w.Report(t.Context(), ReportInput{Image: demoImage(t, 0), ImageName: "x.png", Versus: 1,
		Occlusion: viz.OcclusionSettings{Patch: 16, Stride: 16}, Date: time.Date(2026, 1, 2, 0, 0, 0, 0, time.UTC)}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if page.Bounds().Dx() != viz.ReportWidth || page.Bounds().Dy() != viz.ReportHeight {
		t.Errorf("page %v", page.Bounds())
	}
	if _, err := w.Report(t.Context(), ReportInput{}, nil); !IsInput(err) {
		t.Errorf("report without an image: %v", err)
	}
}

func TestOpenModelErrors(t *testing.T) {
	dir := t.TempDir()
	junk := filepath.Join(dir, "junk é.onnx")
	os.WriteFile(junk, []byte("not a model at all"), 0o644)
	for _, p := range []string{junk, filepath.Join(dir, "missing.onnx"), dir} {
		_, err := OpenModel(p)
		if err == nil || !IsInput(err) || !strings.Contains(err.Error(), filepath.Base(p)) {
			t.Errorf("OpenModel(%q): %v, want an input error naming it", p, err)
		}
	}
}

// TestMessage: what a user reads names the file and the problem in plain
// words: the internal package prefixes go (at the start, after a space or a
// parenthesis), a file named twice by wrapping is named once, the message
// is one line, and a word that merely ends like a prefix ("encore: ") stays.
// Cases written by hand from messages the packages produce (common practice).
func TestMessage(t *testing.T) {
	for _, c := range []struct{ in, want string }{
		{"prep: /x/a.png: not a PNG, JPEG, GIF, BMP, TIFF or WebP image", "/x/a.png: not a PNG, JPEG, GIF, BMP, TIFF or WebP image"},
		{"/tmp/a/broken.onnx: modelio: broken.onnx: not an ONNX model", "/tmp/a/broken.onnx: not an ONNX model"},
		{"activation maps of /conv1: viz: tensor \"x\": shape [2] (rank 1)", "activation maps of /conv1: tensor \"x\": shape [2] (rank 1)"},
		{"core: m.onnx: filters of c (infer: no kernel)", "m.onnx: filters of c (no kernel)"},
		{"encore: fine\nsecond line", "encore: fine; second line"},
	} {
		if got := Message(errors.New(c.in)); got != c.want {
			t.Errorf("Message(%q) = %q, want %q", c.in, got, c.want)
		}
	}
}
