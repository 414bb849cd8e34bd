package main

// Tests of the command-line mode. Each subcommand runs in-process
// through cli.run with stdout and stderr captured, on the embedded demo model
// and images, with the real ONNX Runtime. Every output is checked against
// the libraries called directly in the test (modelio, infer, prep, viz) and,
// where the demo's generator measured something independently (the dead
// channels of the unhealthy checkpoint, measured with PyTorch), against that.
// PNGs are also compared with goldens in testdata/golden/cli: pictures drawn
// by this program and checked by eye, a regression pin rather than an
// outside reference; rewrite them with
//
//	go test ./app -run CLI -update
//
// No display is needed.

import (
	"bytes"
	"crypto/sha256"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"image"
	"image/draw"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strconv"
	"strings"
	"testing"

	"fovea/app/core"
	"fovea/assets"
	"fovea/modelio"
	"fovea/modelio/classes"
	"fovea/modelio/infer"
	"fovea/modelio/prep"
	"fovea/viz"
	"fovea/viz/analysis"

	"fovea/modelio/testkit"
)

// runCLI runs one command line in-process and returns its stdout, stderr and
// exit status. Progress is off, as when stderr is not a terminal.
func runCLI(t *testing.T, args ...string) (string, string, int) {
	t.Helper()
	var out, errb bytes.Buffer
	code := newCLI(&out, &errb, false).run(args)
	return out.String(), errb.String(), code
}

// mustRun runs a command line that must succeed.
func mustRun(t *testing.T, args ...string) string {
	t.Helper()
	out, errs, code := runCLI(t, args...)
	if code != exitOK {
		t.Fatalf("fovea %s: exit %d, stderr: %s", strings.Join(args, " "), code, errs)
	}
	return out
}

// startRuntime loads ONNX Runtime for the tests that call the libraries
// directly. The library comes from the same search as the CLI's ($FOVEA_ORT_LIB,
// the user cache: `make test` fetches it first).
func startRuntime(t *testing.T) {
	t.Helper()
	if err := core.Start(""); err != nil {
		t.Fatalf("ONNX Runtime is needed for this test: %v", err)
	}
}

// demoFiles writes the model, one demo image and the labels into a new
// folder whose names have spaces and non-ASCII letters, so every test also
// exercises such paths ("Paths with spaces and unicode work").
type demoFiles struct {
	dir, model, unhealthy, image, image2, labels string
	imageName                                    string // the demo image's own name
	mistake                                      string // the demo image the healthy model gets wrong
	info                                         demoInfo
}

// demoInfo is the part of assets/demo/demo.json the tests use: what the
// demo's generator measured with PyTorch on each demo image, and the one
// image the healthy model misclassifies.
type demoInfo struct {
	Images []struct {
		File                 string  `json:"file"`
		Index                int     `json:"index"`
		HealthyPredicted     int     `json:"healthy_predicted"`
		HealthyProbability   float64 `json:"healthy_probability"`
		UnhealthyPredicted   int     `json:"unhealthy_predicted"`
		UnhealthyProbability float64 `json:"unhealthy_probability"`
	} `json:"images"`
	Misclassified struct {
		File           string  `json:"file"`
		Label          string  `json:"label"`
		Predicted      string  `json:"predicted"`
		PredictedIndex int     `json:"predicted_index"`
		Probability    float64 `json:"probability"`
	} `json:"misclassified"`
}

func newDemoFiles(t *testing.T) demoFiles {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "Prüfung 検査 files")
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	names := core.DemoImages()
	if len(names) < 2 {
		t.Fatalf("the demo has %d images, want at least 2", len(names))
	}
	d := demoFiles{
		dir:       dir,
		model:     filepath.Join(dir, "parts model é.onnx"),
		unhealthy: filepath.Join(dir, "parts unhealthy ü.onnx"),
		image:     filepath.Join(dir, "demo image ñ "+names[0]),
		image2:    filepath.Join(dir, "demo image ñ "+names[1]),
		labels:    filepath.Join(dir, "labels ø.txt"),
		imageName: names[0],
	}
	write := func(path string, b []byte) {
		if err := os.WriteFile(path, b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	write(d.model, assets.Model())
	write(d.unhealthy, assets.UnhealthyModel())
	for i, p := range []string{d.image, d.image2} {
		b, err := core.DemoImageData(names[i])
		if err != nil {
			t.Fatal(err)
		}
		write(p, b)
	}
	write(d.labels, []byte(strings.Join(assets.Labels(), "\n")+"\n"))
	b, err := assets.Files.ReadFile(assets.InfoFile)
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &d.info); err != nil {
		t.Fatalf("%s: %v", assets.InfoFile, err)
	}
	mistake := filepath.Base(d.info.Misclassified.File)
	d.mistake = filepath.Join(dir, "Fehler ñ "+mistake)
	b, err = core.DemoImageData(mistake)
	if err != nil {
		t.Fatal(err)
	}
	write(d.mistake, b)
	return d
}

// library is what the tests compute by calling the packages directly.
type library struct {
	m   *modelio.Model
	cfg prep.Config
	fit *image.NRGBA
	in  []float32
}

// direct opens a model and prepares an image with the libraries alone,
// using the preprocessing the model's metadata states (prep.GuessFrom).
func direct(t *testing.T, model, imagePath string) library {
	t.Helper()
	startRuntime(t)
	m, err := modelio.Open(model)
	if err != nil {
		t.Fatal(err)
	}
	var in *prep.Input
	if im := m.Image; im != nil {
		in = &prep.Input{Layout: im.Layout, Channels: im.Channels, Height: im.Height, Width: im.Width}
	}
	cfg, _ := prep.GuessFrom(in, m.Metadata)
	l := library{m: m, cfg: cfg}
	if imagePath != "" {
		img, err := prep.Load(imagePath)
		if err != nil {
			t.Fatal(err)
		}
		l.fit = prep.Fit(img, cfg)
		l.in = make([]float32, cfg.Len())
		cfg.Tensor(prep.Planes(l.fit), l.in)
	}
	return l
}

func (l library) session(t *testing.T, capture []string) *infer.Session {
	t.Helper()
	s, err := infer.NewSession(l.m, infer.Options{Capture: capture})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { s.Close() })
	return s
}

func decodeJSON(t *testing.T, out string, v any) {
	t.Helper()
	if err := json.Unmarshal([]byte(out), v); err != nil {
		t.Fatalf("output is not the expected JSON: %v\n%s", err, out)
	}
}

// near compares measured values: float32 results converted to float64 and
// printed by encoding/json round-trip exactly, so 1e-6 absolute only
// absorbs a different but equally valid summation order in the runtime.
func near(a, b float64) bool { return math.Abs(a-b) <= 1e-6 }

// ---- layers ----

func TestCLILayers(t *testing.T) {
	d := newDemoFiles(t)
	lib := direct(t, d.model, "")
	var doc struct {
		Model  string `json:"model"`
		Inputs []struct {
			Name  string  `json:"name"`
			Shape []int64 `json:"shape"`
		} `json:"inputs"`
		Layers []struct {
			Name        string  `json:"name"`
			Op          string  `json:"op"`
			Shape       []int64 `json:"shape"`
			Params      int64   `json:"params"`
			MACs        int64   `json:"macs"`
			Bytes       int64   `json:"bytes"`
			RF          int     `json:"receptive_field"`
			Jump        int     `json:"jump"`
			ShapeSource string  `json:"shape_source"`
		} `json:"layers"`
		Total struct{ Params, MACs, Bytes int64 } `json:"total"`
	}
	decodeJSON(t, mustRun(t, "layers", "--model", d.model, "--json"), &doc)

	// Agreement with modelio, field by field.
	m := lib.m
	if doc.Model != m.Name || len(doc.Layers) != len(m.Layers) || len(doc.Inputs) != len(m.Inputs) {
		t.Fatalf("model %q with %d layers, %d inputs; modelio says %q, %d, %d",
			doc.Model, len(doc.Layers), len(doc.Inputs), m.Name, len(m.Layers), len(m.Inputs))
	}
	if doc.Inputs[0].Name != "image" || !slices.Equal(doc.Inputs[0].Shape[1:], []int64{3, 64, 64}) {
		// assets package doc: input "image", float32 [batch, 3, 64, 64].
		t.Errorf("input %s %v, want image [batch 3 64 64] (assets/assets.go)", doc.Inputs[0].Name, doc.Inputs[0].Shape)
	}
	var sum struct{ params, macs, bytes int64 }
	for i, l := range doc.Layers {
		w := m.Layers[i]
		if l.Name != w.Name || l.Op != w.Op || !slices.Equal(l.Shape, w.Shape.Ints()) || l.Params != w.Params ||
			l.MACs != w.MACs || l.Bytes != w.Bytes || l.RF != w.RF || l.Jump != w.Jump || l.ShapeSource != string(w.ShapeSource) {
			t.Errorf("layer %d: CLI %+v, modelio %+v", i, l, w)
		}
		if l.ShapeSource != "static" && l.ShapeSource != "observed" {
			t.Errorf("layer %s: shape_source %q, want static or observed", l.Name, l.ShapeSource)
		}
		sum.params += l.Params
		sum.macs += l.MACs
		sum.bytes += l.Bytes
	}
	// The totals are the column sums (common practice for a layer table).
	if doc.Total.Params != sum.params || doc.Total.MACs != sum.macs || doc.Total.Bytes != sum.bytes {
		t.Errorf("total %+v, column sums %+v", doc.Total, sum)
	}
	// Independent of modelio: the parameters of every convolution are
	// M·C/group·kH·kW weights plus M biases (ONNX Operators.md, Conv), and
	// its output memory at float32 is 4 bytes per value.
	for i, l := range doc.Layers {
		if l.Op != "Conv" {
			continue
		}
		k, err := m.Kernels(l.Name)
		if err != nil {
			t.Fatal(err)
		}
		if want := int64(k.M*k.C*k.KH*k.KW + len(k.Bias)); l.Params != want {
			t.Errorf("conv %s: %d params, M·C·kH·kW + bias = %d", l.Name, l.Params, want)
		}
		vol := int64(4)
		for _, s := range l.Shape[1:] {
			vol *= s
		}
		if l.Bytes != vol {
			t.Errorf("layer %d %s: %d bytes, 4 bytes × %v = %d", i, l.Name, l.Bytes, l.Shape[1:], vol)
		}
	}

	// The text table: the columns, one row per layer, a totals row
	// whose numbers are the JSON totals.
	text := mustRun(t, "layers", "--model", d.model)
	for _, col := range []string{"name", "op", "volume (W×H×D)", "params", "MACs", "memory", "receptive field", "jump", "shape source"} {
		if !strings.Contains(text, col) {
			t.Errorf("table lacks column %q:\n%s", col, text)
		}
	}
	lines := strings.Split(text, "\n")
	for _, l := range m.Layers {
		found := false
		for _, line := range lines {
			f := strings.Fields(line)
			if len(f) > 3 && f[0] == l.Name && f[1] == l.Op && f[2] == l.WHD() && f[3] == core.Exact.Count(l.Params) {
				found = true
			}
		}
		if !found {
			t.Errorf("no table row for %s %s %s %s:\n%s", l.Name, l.Op, l.WHD(), core.Exact.Count(l.Params), text)
		}
	}
	totalRow := ""
	for _, line := range lines {
		if strings.HasPrefix(line, "total ") {
			totalRow = line
		}
	}
	if !strings.Contains(totalRow, core.Exact.Count(doc.Total.Params)) || !strings.Contains(totalRow, core.Exact.Count(doc.Total.MACs)) {
		t.Errorf("totals row %q lacks params %s and MACs %s", totalRow, core.Exact.Count(doc.Total.Params), core.Exact.Count(doc.Total.MACs))
	}
	// Alignment: every row of the table has its "op" column at the same place.
	header := -1
	for i, line := range lines {
		if strings.HasPrefix(line, "name ") {
			header = i
		}
	}
	if header < 0 {
		t.Fatalf("no header row:\n%s", text)
	}
	opAt := strings.Index(lines[header], "op ")
	for _, line := range lines[header+1 : header+1+len(m.Layers)] {
		r := []rune(line)
		hdr := []rune(lines[header])
		if opAt >= len(r) || r[opAt-1] != ' ' || r[len([]rune(lines[header][:opAt]))] == ' ' {
			t.Errorf("row not aligned with the header's op column:\n%s\n%s", string(hdr), line)
		}
	}

	// The demo is the default model: same JSON without --model.
	if a, b := mustRun(t, "layers", "--json"), mustRun(t, "layers", "--model", d.model, "--json"); a != strings.Replace(b, filepath.Base(d.model), "parts.onnx", 1) {
		t.Errorf("layers of the default model differ from the demo file's")
	}
}

// ---- classify ----

func TestCLIClassify(t *testing.T) {
	d := newDemoFiles(t)
	lib := direct(t, d.model, d.image)
	res, err := lib.session(t, nil).Run(t.Context(), lib.in, 1)
	if err != nil {
		t.Fatal(err)
	}
	p, already := classes.Probabilities(res.Scores(0))
	if already {
		t.Errorf("demo model returns logits (assets/assets.go), but Probabilities says they are probabilities")
	}
	want := classes.TopK(p, assets.Labels(), 3)

	var doc struct {
		Top []struct {
			Index       int     `json:"index"`
			Label       string  `json:"label"`
			Probability float64 `json:"probability"`
		} `json:"top"`
	}
	decodeJSON(t, mustRun(t, "classify", "--model", d.model, "--image", d.image, "--k", "3", "--json"), &doc)
	if len(doc.Top) != 3 {
		t.Fatalf("%d predictions, want --k 3", len(doc.Top))
	}
	for i, g := range doc.Top {
		if g.Index != want[i].Index || g.Label != want[i].Label || !near(g.Probability, want[i].Probability) {
			t.Errorf("prediction %d: CLI %+v, library %+v", i, g, want[i])
		}
	}
	// Softmax by hand (its definition: exp(s_i) / Σ exp(s_j)), from the raw
	// logits: independent of classes.Probabilities.
	scores := res.Scores(0)
	var z float64
	for _, s := range scores {
		z += math.Exp(float64(s))
	}
	for _, g := range doc.Top {
		if want := math.Exp(float64(scores[g.Index])) / z; math.Abs(g.Probability-want) > 1e-5 {
			t.Errorf("class %d: probability %.7f, softmax by hand %.7f", g.Index, g.Probability, want)
		}
	}

	// Every demo image, both models: the top class and its probability as
	// the demo's generator measured them with PyTorch (demo/demo.json; the
	// probabilities are rounded there to 4 decimals, hence 1e-4).
	for _, im := range d.info.Images {
		path := filepath.Join(d.dir, "each "+filepath.Base(im.File))
		b, err := assets.Files.ReadFile("demo/" + im.File)
		if err != nil {
			t.Fatal(err)
		}
		os.WriteFile(path, b, 0o644)
		for _, c := range []struct {
			model string
			index int
			p     float64
		}{{d.model, im.HealthyPredicted, im.HealthyProbability}, {d.unhealthy, im.UnhealthyPredicted, im.UnhealthyProbability}} {
			var one struct {
				Top []struct {
					Index       int     `json:"index"`
					Probability float64 `json:"probability"`
				} `json:"top"`
			}
			decodeJSON(t, mustRun(t, "classify", "--model", c.model, "--image", path, "--k", "1", "--json"), &one)
			if one.Top[0].Index != c.index || math.Abs(one.Top[0].Probability-c.p) > 1e-4 {
				t.Errorf("%s on %s: class %d p %.5f; PyTorch (demo.json): class %d p %.4f",
					filepath.Base(c.model), im.File, one.Top[0].Index, one.Top[0].Probability, c.index, c.p)
			}
		}
	}
	if len(d.info.Images) == 0 {
		t.Errorf("%s lists no demo images", assets.InfoFile)
	}

	// Text form: one line per class with the probability in percent.
	text := mustRun(t, "classify", "--model", d.model, "--image", d.image, "--k", "2")
	for _, w := range want[:2] {
		if !strings.Contains(text, fmt.Sprintf("%.2f%%", 100*w.Probability)) || !strings.Contains(text, w.Label) {
			t.Errorf("text lacks %s %.2f%%:\n%s", w.Label, 100*w.Probability, text)
		}
	}

	// A labels file replaces the metadata's labels; --verbose says so.
	alt := filepath.Join(d.dir, "other labels.txt")
	var altLabels []string
	for i := range assets.Labels() {
		altLabels = append(altLabels, fmt.Sprintf("bin %d", i))
	}
	os.WriteFile(alt, []byte(strings.Join(altLabels, "\n")), 0o644)
	out, errs, code := runCLI(t, "classify", "--model", d.model, "--image", d.image, "--labels", alt, "--json", "--verbose")
	if code != 0 {
		t.Fatal(errs)
	}
	decodeJSON(t, out, &doc)
	if doc.Top[0].Label != fmt.Sprintf("bin %d", want[0].Index) {
		t.Errorf("with --labels the top label is %q, want %q", doc.Top[0].Label, fmt.Sprintf("bin %d", want[0].Index))
	}
	if !strings.Contains(errs, "other labels.txt") || !strings.Contains(errs, "preprocessing:") {
		t.Errorf("--verbose does not state the preprocessing and the labels file:\n%s", errs)
	}
}

// The preprocessing flags reach the tensor: with --mean and --std set to
// other values than the metadata's, the result is what the library gives
// for a Config changed the same way.
func TestCLIPreprocessingFlags(t *testing.T) {
	d := newDemoFiles(t)
	lib := direct(t, d.model, "")
	cfg := lib.cfg
	cfg.Mean, cfg.Std = [3]float32{0.5, 0.25, 0.125}, [3]float32{0.5, 0.5, 2}
	cfg.BGR = true
	cfg.Resize = prep.ResizeCrop
	img, err := prep.Load(d.image)
	if err != nil {
		t.Fatal(err)
	}
	in := make([]float32, cfg.Len())
	cfg.Tensor(prep.Planes(prep.Fit(img, cfg)), in)
	res, err := lib.session(t, nil).Run(t.Context(), in, 1)
	if err != nil {
		t.Fatal(err)
	}
	p, _ := classes.Probabilities(res.Scores(0))
	want := classes.TopK(p, assets.Labels(), 7)

	out, errs, code := runCLI(t, "classify", "--model", d.model, "--image", d.image, "--k", "7", "--json", "--verbose",
		"--mean", "0.5,0.25,0.125", "--std", "0.5,0.5,2", "--bgr", "--resize", "crop", "--size", "64x64", "--range", "0-1", "--layout", "nchw")
	if code != 0 {
		t.Fatal(errs)
	}
	var doc struct {
		Top []struct {
			Index       int     `json:"index"`
			Probability float64 `json:"probability"`
		} `json:"top"`
	}
	decodeJSON(t, out, &doc)
	for i, g := range doc.Top {
		if g.Index != want[i].Index || !near(g.Probability, want[i].Probability) {
			t.Errorf("prediction %d: CLI %+v, library %+v", i, g, want[i])
		}
	}
	if !strings.Contains(errs, cfg.String()) {
		t.Errorf("--verbose does not print the settings in force %q:\n%s", cfg.String(), errs)
	}
}

// --resize crop:S is a setting of the command line: accepted (the settings
// in force say crop:72), and an S below the input's side is bad input (exit
// 2) with a message that says what S must be. The pixels crop:S makes are
// checked against torchvision in modelio/prep (TestFitMatchesTorchvision).
func TestCLIResizeCropS(t *testing.T) {
	d := newDemoFiles(t)
	_, errs, code := runCLI(t, "classify", "--model", d.model, "--image", d.image, "--json", "--verbose", "--resize", "crop:72")
	if code != exitOK || !strings.Contains(errs, "64x64 RGB, crop:72,") {
		t.Errorf("--resize crop:72: exit %d, stderr %s", code, errs)
	}
	_, errs, code = runCLI(t, "classify", "--model", d.model, "--image", d.image, "--resize", "crop:32")
	if code != 2 || !strings.Contains(errs, "at least the input's longer side (64)") {
		t.Errorf("--resize crop:32 on a 64×64 model: exit %d, stderr %s", code, errs)
	}
}

// ---- filters ----

func TestCLIFilters(t *testing.T) {
	d := newDemoFiles(t)
	lib := direct(t, d.model, "")
	outDir := filepath.Join(t.TempDir(), "Ausgabe ü")
	os.Mkdir(outDir, 0o755)
	out := filepath.Join(outDir, "first layer é.png")
	var doc struct {
		Layer string `json:"layer"`
		Tiles []struct {
			Index int      `json:"index"`
			Norm  float64  `json:"norm"`
			Flags []string `json:"flags"`
		} `json:"tiles"`
	}
	decodeJSON(t, mustRun(t, "filters", "--model", d.model, "--out", out, "--json"), &doc)
	got := readPNG(t, out)

	k, err := lib.m.Kernels("")
	if err != nil {
		t.Fatal(err)
	}
	want, info, err := viz.Tiles(k, viz.TileOptions{Slice: -1})
	if err != nil {
		t.Fatal(err)
	}
	// The tiles at (8, 8), the colour legend under them (core.Tiles).
	samePixels(t, "filters vs viz.Tiles", cropTo(got, want.Bounds().Add(image.Pt(8, 8))), want, 0)
	legendRow := got.Bounds().Dy() - 56 - 8 + 10 // inside the bar (56 px high, 8 px margin)
	if c := got.NRGBAAt(8+180, legendRow); c == viz.Light {
		t.Errorf("no colour legend under the tiles (pixel %v at row %d)", c, legendRow)
	}
	if doc.Layer != k.Node || len(doc.Tiles) != k.M || len(info) != k.M {
		t.Fatalf("layer %q with %d tiles; the first conv is %q with %d filters", doc.Layer, len(doc.Tiles), k.Node, k.M)
	}
	for i, tile := range doc.Tiles {
		// L2 norm by its definition, from the raw weights.
		var ss float64
		per := k.C * k.KH * k.KW
		for _, w := range k.W[tile.Index*per : (tile.Index+1)*per] {
			ss += float64(w) * float64(w)
		}
		if math.Abs(tile.Norm-math.Sqrt(ss)) > 1e-6*math.Max(1, math.Sqrt(ss)) {
			t.Errorf("tile %d: norm %v, √Σw² = %v", i, tile.Norm, math.Sqrt(ss))
		}
	}
	golden(t, "filters.png", got)
	noTempFiles(t, outDir)

	// --layer names a later convolution; a name that is none fails with 2.
	var second string
	for _, l := range lib.m.Layers {
		if l.Op == "Conv" && l.Name != k.Node {
			second = l.Name
			break
		}
	}
	if second == "" {
		t.Fatal("the demo has one convolution only")
	}
	out2 := filepath.Join(outDir, "second.png")
	mustRun(t, "filters", "--model", d.model, "--layer", second, "--out", out2, "--captions", "--sort")
	k2, _ := lib.m.Kernels(second)
	// More than 3 input channels: the CLI draws input channel 0.
	w2, _, err := viz.Tiles(k2, viz.TileOptions{Slice: 0, Labels: true, SortByNorm: true})
	if err != nil {
		t.Fatal(err)
	}
	samePixels(t, "filters --layer "+second, cropTo(readPNG(t, out2), w2.Bounds().Add(image.Pt(8, 8))), w2, 0)
	_, errs, code := runCLI(t, "filters", "--model", d.model, "--layer", "no such layer", "--out", out2)
	if code != exitUsage || !strings.Contains(errs, "no such layer") {
		t.Errorf("--layer 'no such layer': exit %d, %q; want 2 naming it", code, errs)
	}
}

// ---- maps ----

func TestCLIMaps(t *testing.T) {
	d := newDemoFiles(t)
	lib := direct(t, d.model, d.image)
	acts := lib.m.ActivationLayers()
	if len(acts) == 0 {
		t.Fatal("the demo has no activation layers")
	}
	layer := acts[0]
	for _, l := range acts {
		if l.Op == "Relu" {
			layer = l
			break
		}
	}
	res, err := lib.session(t, []string{layer.Output}).Run(t.Context(), lib.in, 1)
	if err != nil {
		t.Fatal(err)
	}
	tensor := res.Maps[layer.Output]
	_, stats, err := viz.MapGrid(tensor, "nchw", viz.GridOptions{})
	if err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(d.dir, "maps ü.png")
	var doc struct {
		Layer    string  `json:"layer"`
		Shape    []int64 `json:"shape"`
		Channels []struct {
			Index          int
			Min, Max, Mean float64
			// active_fraction: the share of positions above zero (was
			// "fires", which in scan --json means a share of images).
			Active float64 `json:"active_fraction"`
		} `json:"channels"`
	}
	decodeJSON(t, mustRun(t, "maps", "--model", d.model, "--image", d.image, "--layer", layer.Name, "--out", out, "--json"), &doc)
	if doc.Layer != layer.Name || !slices.Equal(doc.Shape, tensor.Shape) || len(doc.Channels) != len(stats) {
		t.Fatalf("layer %s %v with %d channels; library: %s %v %d", doc.Layer, doc.Shape, len(doc.Channels), layer.Name, tensor.Shape, len(stats))
	}
	// Each channel's statistics by their definitions, from the raw tensor
	// (NCHW: ONNX Operators.md, Conv/Relu outputs are N×C×H×W).
	hw := int(tensor.Shape[2] * tensor.Shape[3])
	for c, g := range doc.Channels {
		vals := tensor.Data[c*hw : (c+1)*hw]
		lo, hi, sum, pos := math.Inf(1), math.Inf(-1), 0.0, 0
		for _, v := range vals {
			f := float64(v)
			lo, hi, sum = math.Min(lo, f), math.Max(hi, f), sum+f
			if f > 0 {
				pos++
			}
		}
		if g.Index != c || !near(g.Min, lo) || !near(g.Max, hi) || math.Abs(g.Mean-sum/float64(hw)) > 1e-5 || !near(g.Active, float64(pos)/float64(hw)) {
			t.Errorf("channel %d: CLI %+v; by definition min %v max %v mean %v active fraction %v", c, g, lo, hi, sum/float64(hw), float64(pos)/float64(hw))
		}
	}
	got := readPNG(t, out)
	// The grid is the top-left part of the picture (a legend follows under
	// it): it must be viz.MapGrid's picture exactly.
	grid, _, _ := viz.MapGrid(tensor, "nchw", viz.GridOptions{})
	const margin = 8
	sub := got.SubImage(grid.Bounds().Add(image.Pt(margin, margin))).(*image.NRGBA)
	samePixels(t, "maps grid vs viz.MapGrid", sub, grid, 0)
	golden(t, "maps.png", got)

	// One channel over the image.
	ov := filepath.Join(d.dir, "overlay.png")
	mustRun(t, "maps", "--model", d.model, "--image", d.image, "--layer", layer.Output, "--channel", "0", "--out", ov)
	golden(t, "maps_channel0.png", readPNG(t, ov))
	_, errs, code := runCLI(t, "maps", "--model", d.model, "--image", d.image, "--layer", layer.Name, "--channel", "9999", "--out", ov)
	if code != exitUsage || !strings.Contains(errs, "9999") {
		t.Errorf("--channel 9999: exit %d, %q; want 2 naming the channel", code, errs)
	}
}

// ---- occlude ----

type occDoc struct {
	Target struct {
		Index       int     `json:"index"`
		Label       string  `json:"label"`
		Probability float64 `json:"probability"`
	} `json:"target"`
	Patch    int         `json:"patch"`
	Stride   int         `json:"stride"`
	Fill     string      `json:"fill"`
	Ys       []int       `json:"ys"`
	Xs       []int       `json:"xs"`
	Scores   [][]float64 `json:"scores"`
	Expected *occDoc     `json:"expected"`
	Method   struct {
		Name, Why string
	} `json:"method"`
	Seconds *float64 `json:"seconds"`
}

func TestCLIOcclude(t *testing.T) {
	d := newDemoFiles(t)
	lib := direct(t, d.model, d.image)
	s := lib.session(t, nil)
	res, err := s.Run(t.Context(), lib.in, 1)
	if err != nil {
		t.Fatal(err)
	}
	p, _ := classes.Probabilities(res.Scores(0))
	top := classes.TopK(p, assets.Labels(), 2)
	set := viz.OcclusionSettings{Patch: 16, Stride: 8, Fill: viz.FillGrey, Score: viz.ScoreProbability}
	want, err := analysis.Occlude(t.Context(), s, lib.cfg, lib.fit, set, []int{top[0].Index, top[1].Index}, nil)
	if err != nil {
		t.Fatal(err)
	}

	var doc occDoc
	out := filepath.Join(d.dir, "heat map ü.png")
	decodeJSON(t, mustRun(t, "occlude", "--model", d.model, "--image", d.image, "--patch", "16", "--stride", "8",
		"--expected", top[1].Label, "--json", "--out", out), &doc)
	check := func(name string, g *occDoc, w *viz.Occlusion) {
		if g == nil {
			t.Fatalf("%s: missing", name)
		}
		if g.Target.Index != w.Target || g.Target.Label != assets.Labels()[w.Target] || !near(g.Target.Probability, w.Probability) ||
			g.Patch != 16 || g.Stride != 8 || g.Fill != "grey" || !slices.Equal(g.Ys, w.Ys) || !slices.Equal(g.Xs, w.Xs) {
			t.Errorf("%s: CLI target %+v patch %d stride %d fill %s ys %v xs %v; library %d %v %v %v",
				name, g.Target, g.Patch, g.Stride, g.Fill, g.Ys, g.Xs, w.Target, w.Probability, w.Ys, w.Xs)
		}
		// Patch positions by hand (corners in model input pixels):
		// 0, 8, ..., 48 for a 16-pixel patch moved by 8 over 64 pixels.
		if !slices.Equal(g.Xs, []int{0, 8, 16, 24, 32, 40, 48}) {
			t.Errorf("%s: xs %v, want 0..48 by 8", name, g.Xs)
		}
		for i := range w.Scores {
			for j := range w.Scores[i] {
				if !near(g.Scores[i][j], w.Scores[i][j]) {
					t.Errorf("%s: score (%d,%d) %v, library %v", name, i, j, g.Scores[i][j], w.Scores[i][j])
				}
			}
		}
	}
	check("target", &doc, want[0])
	check("expected", doc.Expected, want[1])
	got := readPNG(t, out)
	for _, w := range want {
		w.Label = assets.Labels()[w.Target] // viz leaves labels to the caller (viz.Occlusion)
	}
	samePixels(t, "occlude PNG vs viz.RenderOcclusion", got, viz.RenderOcclusion(lib.fit, want, viz.HeatOptions{Captions: true}), 0)
	golden(t, "occlude_versus.png", got)

	// --json says which method ran and why, and how long the occlusion
	// took; --no-reuse forces running every occluded image. The demo is too
	// small to gain from incremental occlusion, so both run every image.
	if doc.Method.Name != "every-image" || doc.Method.Why == "" || doc.Seconds == nil || *doc.Seconds <= 0 {
		t.Errorf("method %+v seconds %v: want every-image with a reason and a positive time", doc.Method, doc.Seconds)
	}
	doc = occDoc{}
	decodeJSON(t, mustRun(t, "occlude", "--model", d.model, "--image", d.image, "--patch", "16", "--stride", "8", "--no-reuse", "--json"), &doc)
	if doc.Method.Name != "every-image" || !strings.Contains(doc.Method.Why, "no reuse") {
		t.Errorf("--no-reuse: method %+v", doc.Method)
	}
	check("--no-reuse", &doc, want[0])

	// Without --class the target is the predicted class; the default patch
	// and stride depend on the input size only.
	doc = occDoc{}
	decodeJSON(t, mustRun(t, "occlude", "--model", d.model, "--image", d.image, "--json"), &doc)
	if doc.Target.Index != top[0].Index || doc.Expected != nil {
		t.Errorf("default target %d (expected %v), want the predicted class %d alone", doc.Target.Index, doc.Expected, top[0].Index)
	}
	// --class by number, --fill and --score reach viz.
	doc = occDoc{}
	decodeJSON(t, mustRun(t, "occlude", "--model", d.model, "--image", d.image, "--json", "--class", strconv.Itoa(top[1].Index),
		"--fill", "zero", "--score", "logit", "--patch", "32", "--stride", "32"), &doc)
	set = viz.OcclusionSettings{Patch: 32, Stride: 32, Fill: viz.FillZero, Score: viz.ScoreLogit}
	w2, err := analysis.Occlude(t.Context(), s, lib.cfg, lib.fit, set, []int{top[1].Index}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if doc.Target.Index != top[1].Index || doc.Fill != "zero" || len(doc.Scores) != 2 {
		t.Fatalf("--class %d --fill zero: target %d fill %s %d rows", top[1].Index, doc.Target.Index, doc.Fill, len(doc.Scores))
	}
	for i := range w2[0].Scores {
		for j := range w2[0].Scores[i] {
			if !near(doc.Scores[i][j], w2[0].Scores[i][j]) {
				t.Errorf("logit score (%d,%d) %v, library %v", i, j, doc.Scores[i][j], w2[0].Scores[i][j])
			}
		}
	}
}

// ---- scan ----

// truth is the part of the demo's truth file the test needs: per ReLU node,
// the channels PyTorch found never firing on the probe images
// (assets/make_demo.py measures it independently of Fovea).
type truth struct {
	DeadTotal int `json:"dead_total"`
	Relus     []struct {
		Node   string `json:"node"`
		Output string `json:"output"`
		Dead   []int  `json:"dead"`
	} `json:"relus"`
}

func readTruth(t *testing.T, file string) truth {
	b, err := assets.Files.ReadFile(file)
	if err != nil {
		t.Fatal(err)
	}
	var tr truth
	if err := json.Unmarshal(b, &tr); err != nil {
		t.Fatalf("%s: %v", file, err)
	}
	return tr
}

// scanDead lists "node/channel" for every channel flagged dead.
type scanDoc struct {
	Images int `json:"images"`
	Layers []struct {
		Name     string `json:"name"`
		Output   string `json:"output"`
		Channels []struct {
			Index int      `json:"index"`
			Fires float64  `json:"fires"`
			Max   float64  `json:"max"`
			Mean  float64  `json:"mean"`
			Flags []string `json:"flags"`
		} `json:"channels"`
	} `json:"layers"`
}

func (s scanDoc) dead() []string {
	var out []string
	for _, l := range s.Layers {
		for _, c := range l.Channels {
			if slices.Contains(c.Flags, "dead") {
				out = append(out, fmt.Sprintf("%s/%d", l.Output, c.Index))
			}
		}
	}
	sort.Strings(out)
	return out
}

func (tr truth) dead() []string {
	var out []string
	for _, r := range tr.Relus {
		for _, c := range r.Dead {
			out = append(out, fmt.Sprintf("%s/%d", r.Output, c))
		}
	}
	sort.Strings(out)
	return out
}

func TestCLIScanUnhealthy(t *testing.T) {
	d := newDemoFiles(t)
	probe, err := assets.Probe()
	if err != nil {
		t.Fatal(err)
	}
	probeDir := filepath.Join(d.dir, "Probe Bilder ü")
	os.Mkdir(probeDir, 0o755)
	for _, p := range probe {
		b, _ := assets.Files.ReadFile(p.File)
		os.WriteFile(filepath.Join(probeDir, filepath.Base(p.File)), b, 0o644)
	}

	// Exactly the truth file's dead channels.
	tr := readTruth(t, assets.UnhealthyTruthFile)
	if tr.DeadTotal == 0 {
		t.Fatal("the unhealthy demo's truth file lists no dead channel: the gate test below could not fail")
	}
	out, errs, code := runCLI(t, "scan", "--model", d.unhealthy, "--probe", probeDir, "--json")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var doc scanDoc
	decodeJSON(t, out, &doc)
	if doc.Images != len(probe) {
		t.Errorf("%d images scanned, the probe folder has %d", doc.Images, len(probe))
	}
	if got, want := doc.dead(), tr.dead(); !slices.Equal(got, want) {
		t.Errorf("dead channels\n got  %v\n want %v (%s, measured with PyTorch)", got, want, assets.UnhealthyTruthFile)
	}
	// The healthy model: its own truth file (usually no dead channel).
	out = mustRun(t, "scan", "--model", d.model, "--probe", probeDir, "--json")
	var healthy scanDoc
	decodeJSON(t, out, &healthy)
	if got, want := healthy.dead(), readTruth(t, assets.HealthyTruthFile).dead(); !slices.Equal(got, want) {
		t.Errorf("healthy model: dead channels %v, truth %v", got, want)
	}

	// The rare threshold is a percentage, as in the window; the old
	// --rare FRACTION still works and means the same; the JSON keeps it as
	// a fraction of the images.
	for _, args := range [][]string{{"--rare-percent", "30"}, {"--rare", "0.3"}} {
		var r struct {
			Rare float64 `json:"rare"`
		}
		decodeJSON(t, mustRun(t, append([]string{"scan", "--demo", "unhealthy", "--json"}, args...)...), &r)
		if r.Rare != 0.3 {
			t.Errorf("scan %v: rare %v in the JSON, want the fraction 0.3", args, r.Rare)
		}
	}

	// The gate: more dead channels than --max-dead is exit status 3, with
	// the report still printed; at the limit it passes.
	out, errs, code = runCLI(t, "scan", "--demo", "unhealthy", "--max-dead", "0")
	if code != exitGate || !strings.Contains(errs, "--max-dead") || !strings.Contains(out, "dead") {
		t.Errorf("--max-dead 0 on the unhealthy demo: exit %d, stderr %q; want 3 and a table", code, errs)
	}
	if _, errs, code = runCLI(t, "scan", "--demo", "unhealthy", "--max-dead", strconv.Itoa(tr.DeadTotal), "--verbose"); code != exitOK {
		t.Errorf("--max-dead %d (the number dead): exit %d, %s", tr.DeadTotal, code, errs)
	}
	// --verbose says where the time went, stage by stage.
	for _, want := range []string{"scan time:", "decoding", "preparing", "running", "summarising", "waiting for images"} {
		if !strings.Contains(errs, want) {
			t.Errorf("scan --verbose does not say %q:\n%s", want, errs)
		}
	}

	// CSV: one row per channel, same numbers as the JSON.
	out = mustRun(t, "scan", "--model", d.unhealthy, "--probe", probeDir, "--csv")
	rows, err := csv.NewReader(strings.NewReader(out)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	for _, l := range doc.Layers {
		n += len(l.Channels)
	}
	if len(rows) != n+1 {
		t.Fatalf("CSV has %d rows, want a header and %d channels", len(rows), n)
	}
	deadCSV := 0
	for _, r := range rows[1:] {
		if slices.Contains(strings.Fields(r[len(r)-1]), "dead") {
			deadCSV++
		}
	}
	if deadCSV != tr.DeadTotal {
		t.Errorf("CSV flags %d channels dead, truth %d", deadCSV, tr.DeadTotal)
	}
	// The table names each dead channel's layer.
	table := mustRun(t, "scan", "--model", d.unhealthy, "--probe", probeDir)
	for _, r := range tr.Relus {
		if len(r.Dead) > 0 && !strings.Contains(table, r.Node) {
			t.Errorf("table does not list layer %s:\n%s", r.Node, table)
		}
	}
}

// ---- report ----

func TestCLIReport(t *testing.T) {
	d := newDemoFiles(t)
	out := filepath.Join(d.dir, "Bericht für Kollegen.png")
	// The demo's genuine mistake (demo/demo.json): explain why the model
	// said its predicted class and not the true one.
	mis := d.info.Misclassified
	// --versus is the old name of --expected, kept for scripts (README: Renamed).
	mustRun(t, "report", "--model", d.model, "--image", d.mistake, "--versus", mis.Label, "--date", "2026-01-02", "--out", out)
	got := readPNG(t, out)
	if got.Bounds().Dx() != viz.ReportWidth || got.Bounds().Dy() != viz.ReportHeight {
		t.Errorf("report is %v, want %d×%d", got.Bounds(), viz.ReportWidth, viz.ReportHeight)
	}
	golden(t, "report.png", got)
	// The same mistake through classify: PyTorch's class and probability.
	var doc struct {
		Top []struct {
			Index       int     `json:"index"`
			Label       string  `json:"label"`
			Probability float64 `json:"probability"`
		} `json:"top"`
	}
	decodeJSON(t, mustRun(t, "classify", "--model", d.model, "--image", d.mistake, "--json"), &doc)
	if doc.Top[0].Index != mis.PredictedIndex || doc.Top[0].Label != mis.Predicted || math.Abs(doc.Top[0].Probability-mis.Probability) > 1e-4 {
		t.Errorf("the demo's mistake: %+v; demo.json (PyTorch) %s %d %.4f", doc.Top[0], mis.Predicted, mis.PredictedIndex, mis.Probability)
	}
	// SOURCE_DATE_EPOCH (the reproducible-builds convention) gives the same
	// page: 2026-01-02T00:00:00Z = 1767312000 s.
	t.Setenv("SOURCE_DATE_EPOCH", "1767312000")
	out2 := filepath.Join(d.dir, "again.png")
	mustRun(t, "report", "--model", d.model, "--image", d.mistake, "--expected", mis.Label, "--out", out2)
	samePixels(t, "report with SOURCE_DATE_EPOCH", readPNG(t, out2), got, 0)
}

// report --json states what the page shows, checked against values found
// outside Fovea: the SHA-256 of the model and label files computed here
// (crypto/sha256, FIPS 180-4), the preprocessing exactly as the flags set
// it, and the top-5 probabilities PyTorch computed for the same model and
// picture (modelio/prep/testdata/torchvision: tiny224.onnx on torchvision's
// Resize(256)+CenterCrop(224) of a 400×300 picture, stored as a 224×224 PNG,
// so Fovea's resize leaves it as it is), within 5e-4.
func TestCLIReportJSON(t *testing.T) {
	tv := filepath.Join("..", "modelio", "prep", "testdata", "torchvision")
	dir := filepath.Join(t.TempDir(), "Bericht ü")
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	modelBytes, err := os.ReadFile(filepath.Join(tv, "tiny224.onnx"))
	if err != nil {
		t.Fatal(err)
	}
	model := filepath.Join(dir, "tiny 224.onnx")
	labelText := "zero\none\ntwo\nthree\nfour\nfive\nsix\nseven\neight\nnine\n"
	labels := filepath.Join(dir, "classes ü.txt")
	for p, b := range map[string][]byte{model: modelBytes, labels: []byte(labelText)} {
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	var ref struct {
		Top5 map[string][][2]float64 `json:"top5"`
	}
	raw, err := os.ReadFile(filepath.Join(tv, "reference.json"))
	if err != nil {
		t.Fatal(err)
	}
	decodeJSON(t, string(raw), &ref)
	want := ref.Top5["400x300-crop-256"]
	out := filepath.Join(dir, "page.png")
	stdout := mustRun(t, "report", "--json", "--model", model, "--labels", labels,
		"--image", filepath.Join(tv, "400x300-crop-256.png"), "--versus", "three", "--date", "2026-01-02", "--out", out,
		"--range", "0-1", "--mean", "0.485,0.456,0.406", "--std", "0.229,0.224,0.225", "--resize", "stretch")
	var doc struct {
		Model, SHA256, Image, Labels string
		LabelsSHA256                 string `json:"labels_sha256"`
		Preprocess                   struct {
			Width, Height, Channels int
			Resize, Range, Layout   string
			Mean, Std               []float32
		}
		Top []struct {
			Index       int
			Label       string
			Probability float64
		}
		Expected *struct {
			Index int
			Label string
		}
		Heatmaps []struct{ Index int }
		Softmax  bool `json:"softmax_applied"`
		Date     string
	}
	decodeJSON(t, stdout, &doc)
	hex := func(b []byte) string { s := sha256.Sum256(b); return fmt.Sprintf("%x", s) }
	if doc.Model != "tiny 224.onnx" || doc.SHA256 != hex(modelBytes) {
		t.Errorf("model %q sha256 %s, want tiny 224.onnx %s", doc.Model, doc.SHA256, hex(modelBytes))
	}
	if doc.Labels != labels || doc.LabelsSHA256 != hex([]byte(labelText)) {
		t.Errorf("labels %q sha256 %s, want %s %s", doc.Labels, doc.LabelsSHA256, labels, hex([]byte(labelText)))
	}
	p := doc.Preprocess
	if p.Width != 224 || p.Height != 224 || p.Channels != 3 || p.Resize != "stretch" || p.Range != "0-1" || p.Layout != "nchw" ||
		!slices.Equal(p.Mean, []float32{0.485, 0.456, 0.406}) || !slices.Equal(p.Std, []float32{0.229, 0.224, 0.225}) {
		t.Errorf("preprocess %+v, want the flags' 224x224 stretch 0-1 ImageNet mean/std NCHW", p)
	}
	if len(doc.Top) != 5 {
		t.Fatalf("%d predictions, want 5", len(doc.Top))
	}
	names := strings.Fields(labelText)
	for i, w := range want {
		g := doc.Top[i]
		if g.Index != int(w[0]) || g.Label != names[int(w[0])] || math.Abs(g.Probability-w[1]) > 5e-4 {
			t.Errorf("rank %d: %+v, PyTorch class %d (%s) %.6f", i+1, g, int(w[0]), names[int(w[0])], w[1])
		}
	}
	if doc.Expected == nil || doc.Expected.Index != 3 || doc.Expected.Label != "three" {
		t.Errorf("expected %+v, want class 3 (three)", doc.Expected)
	}
	if len(doc.Heatmaps) != 2 || doc.Heatmaps[0].Index != int(want[0][0]) || doc.Heatmaps[1].Index != 3 {
		t.Errorf("heatmaps of %+v, want the predicted class %d then 3", doc.Heatmaps, int(want[0][0]))
	}
	if !doc.Softmax || doc.Date != "2026-01-02" || doc.Image != "400x300-crop-256.png" {
		t.Errorf("softmax_applied %v, date %q, image %q", doc.Softmax, doc.Date, doc.Image)
	}
	if pg := readPNG(t, out); pg.Bounds().Dx() != viz.ReportWidth || pg.Bounds().Dy() != viz.ReportHeight {
		t.Errorf("page %v", pg.Bounds())
	}
	if _, errs, code := runCLI(t, "report", "--json", "--model", model, "--image", filepath.Join(tv, "400x300-crop-256.png"), "--out", "-"); code != 2 || !strings.Contains(errs, "--json") {
		t.Errorf("--json with --out -: exit %d: %s", code, errs)
	}
}

// ---- exit statuses and messages ----

func TestCLIExitStatus(t *testing.T) {
	d := newDemoFiles(t)
	bad := filepath.Join(d.dir, "broken model ü.onnx")
	// Random bytes: not an ONNX model (a fixed pseudo-random sequence so
	// the test is repeatable).
	junk := make([]byte, 4096)
	x := uint32(2463534242)
	for i := range junk {
		x ^= x << 13
		x ^= x >> 17
		x ^= x << 5
		junk[i] = byte(x)
	}
	os.WriteFile(bad, junk, 0o644)
	missing := filepath.Join(d.dir, "no such file ü.png")
	notImage := filepath.Join(d.dir, "notes ü.png")
	os.WriteFile(notImage, []byte("this is text, not a picture"), 0o644)
	out := filepath.Join(d.dir, "x.png")

	for _, c := range []struct {
		args  []string
		code  int
		needs []string // in stderr
	}{
		{[]string{"help"}, 0, nil},
		{[]string{"--help"}, 0, nil},
		{[]string{"version"}, 0, nil},
		{[]string{"occlude", "--help"}, 0, nil},
		{[]string{"help", "scan"}, 0, nil},
		{[]string{"fetch-runtime", "--help"}, 0, nil},
		{[]string{"fetch-runtime", "--into"}, 2, []string{"--into"}},
		{[]string{"fetch-runtime", "somewhere"}, 2, []string{"somewhere"}},
		// bad usage
		{[]string{"frobnicate"}, 2, []string{"frobnicate"}},
		{[]string{"layers", "--frobnicate"}, 2, []string{"--frobnicate"}},
		{[]string{"classify", "--model", d.model}, 2, []string{"--image"}},
		{[]string{"classify", "--image", d.image, "--k", "x"}, 2, []string{"--k"}},
		// classify takes several images now; a command that takes none still refuses extras.
		{[]string{"layers", "--model", d.model, "extra"}, 2, []string{"extra"}},
		{[]string{"filters"}, 2, []string{"--out"}},
		{[]string{"scan", "--model", d.model}, 2, []string{"--probe"}},
		{[]string{"scan", "--csv", "--json"}, 2, nil},
		{[]string{"occlude", "--image", d.image}, 2, []string{"--out", "--json"}},
		{[]string{"classify", "--image", d.image, "--size", "32x32"}, 2, []string{"32x32", "64x64"}},
		{[]string{"classify", "--image", d.image, "--range", "0-100"}, 2, []string{"--range"}},
		{[]string{"classify", "--image", d.image, "--std", "0,1,1"}, 2, []string{"--std"}},
		{[]string{"occlude", "--image", d.image, "--json", "--patch", "65"}, 2, []string{"patch 65"}},
		{[]string{"occlude", "--image", d.image, "--json", "--fill", "pink"}, 2, []string{"pink"}},
		{[]string{"occlude", "--image", d.image, "--json", "--class", "bolt"}, 2, []string{"bolt"}},
		{[]string{"layers", "--demo", "sick"}, 2, []string{"sick"}},
		{[]string{"layers", "--demo", "healthy", "--model", d.model}, 2, nil},
		// bad input: each message names the file
		{[]string{"layers", "--model", missing}, 2, []string{"no such file ü.png"}},
		{[]string{"layers", "--model", bad}, 2, []string{"broken model ü.onnx"}},
		{[]string{"classify", "--model", bad, "--image", d.image}, 2, []string{"broken model ü.onnx"}},
		{[]string{"classify", "--image", missing}, 2, []string{"no such file ü.png"}},
		{[]string{"classify", "--image", notImage}, 2, []string{"notes ü.png"}},
		{[]string{"classify", "--image", d.image, "--labels", missing}, 2, []string{"no such file ü.png"}},
		{[]string{"classify", "--image", d.image, "--labels", notImage}, 2, []string{"notes ü.png"}},
		{[]string{"scan", "--probe", missing}, 2, []string{"no such file ü.png"}},
		{[]string{"scan", "--probe", d.image}, 2, []string{filepath.Base(d.image)}},
		{[]string{"filters", "--out", filepath.Join(d.dir, "no folder", "x.png")}, 2, []string{"no folder"}},
		{[]string{"maps", "--image", d.image, "--layer", "nope", "--out", out}, 2, []string{"nope"}},
		// the library: exit 2, naming the file and the fetch command
		{[]string{"layers", "--ort-lib", "/nonexistent"}, 2, []string{"/nonexistent", "fovea fetch-runtime"}},
		{[]string{"--ort-lib", "/nonexistent"}, 2, []string{"/nonexistent", "fovea fetch-runtime"}},
		// the window takes one model file after its flags (the desktop entry passes it so)
		{[]string{"a.onnx", "b.onnx"}, 2, []string{"b.onnx"}},
		{[]string{"--model", "a.onnx", "b.onnx"}, 2, []string{"b.onnx"}},
		{[]string{"--theme", "dark", "frobnicate"}, 2, []string{"frobnicate"}},
	} {
		stdout, stderr, code := runCLI(t, c.args...)
		if code != c.code {
			t.Errorf("fovea %q: exit %d, want %d; stderr %q", c.args, code, c.code, stderr)
			continue
		}
		if c.code == 0 && stdout == "" {
			t.Errorf("fovea %q: nothing on stdout", c.args)
		}
		if c.code != 0 {
			if n := strings.Count(strings.TrimRight(stderr, "\n"), "\n"); n != 0 || stderr == "" {
				t.Errorf("fovea %q: want a one-line reason on stderr, got %q", c.args, stderr)
			}
			if strings.Contains(stderr, "panic") || strings.Contains(stderr, "goroutine") {
				t.Errorf("fovea %q: %q", c.args, stderr)
			}
			// Plain words: no internal package prefix after "fovea CMD: ".
			for _, p := range []string{"core: ", "modelio: ", "infer: ", "prep: ", "viz: ", "analysis: "} {
				if strings.Contains(stderr, " "+p) {
					t.Errorf("fovea %q: stderr %q shows the internal prefix %q", c.args, stderr, p)
				}
			}
		}
		for _, s := range c.needs {
			if !strings.Contains(stderr, s) {
				t.Errorf("fovea %q: stderr %q does not mention %q", c.args, stderr, s)
			}
		}
	}
	// Every subcommand has its own --help, listing its flags.
	for _, cmd := range commands {
		out := mustRun(t, cmd.name, "--help")
		for _, f := range []string{"--model FILE", "--ort-lib FILE", "--size WxH", "--labels FILE", "--verbose"} {
			if !strings.Contains(out, f) {
				t.Errorf("fovea %s --help lacks %s", cmd.name, f)
			}
		}
	}
	// One word for the class the image should have been: --expected is
	// listed, its old name --versus still works but is not.
	for _, name := range []string{"occlude", "report"} {
		out := mustRun(t, name, "--help")
		if !strings.Contains(out, "--expected CLASS") || strings.Contains(out, "--versus") {
			t.Errorf("fovea %s --help: want --expected listed and --versus hidden:\n%s", name, out)
		}
	}
	help := mustRun(t, "help")
	for _, cmd := range append([]string{"fetch-runtime", "help", "version"}, names()...) {
		if !strings.Contains(help, "  "+cmd+" ") {
			t.Errorf("fovea help does not list %s", cmd)
		}
	}
}

func names() []string {
	var n []string
	for _, c := range commands {
		n = append(n, c.name)
	}
	return n
}

// Outputs go only where the user points: nothing new appears in the
// model's folder, and no temporary file is left anywhere.
func TestCLIWritesOnlyTheOutput(t *testing.T) {
	d := newDemoFiles(t)
	before := listDir(t, d.dir)
	outDir := filepath.Join(t.TempDir(), "out ü")
	os.Mkdir(outDir, 0o755)
	mustRun(t, "filters", "--model", d.model, "--out", filepath.Join(outDir, "a.png"))
	mustRun(t, "maps", "--model", d.model, "--image", d.image, "--out", filepath.Join(outDir, "b.png"))
	mustRun(t, "occlude", "--model", d.model, "--image", d.image, "--out", filepath.Join(outDir, "c.png"))
	mustRun(t, "report", "--model", d.model, "--image", d.image, "--out", filepath.Join(outDir, "d.png"))
	if after := listDir(t, d.dir); !slices.Equal(before, after) {
		t.Errorf("the model's folder changed: %v -> %v", before, after)
	}
	if got := listDir(t, outDir); !slices.Equal(got, []string{"a.png", "b.png", "c.png", "d.png"}) {
		t.Errorf("output folder holds %v", got)
	}
	// --out - writes the PNG to stdout.
	out := mustRun(t, "filters", "--model", d.model, "--out", "-")
	if _, err := png.Decode(strings.NewReader(out)); err != nil {
		t.Errorf("--out -: stdout is not a PNG: %v", err)
	}
}

func listDir(t *testing.T, dir string) []string {
	t.Helper()
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, e := range ents {
		names = append(names, e.Name())
	}
	return names
}

func noTempFiles(t *testing.T, dir string) {
	t.Helper()
	for _, n := range listDir(t, dir) {
		if strings.HasPrefix(n, ".") || strings.HasSuffix(n, ".tmp") {
			t.Errorf("temporary file %s left in %s", n, dir)
		}
	}
}

// ---- pictures ----

func readPNG(t *testing.T, path string) *image.NRGBA {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return toNRGBA(img)
}

func toNRGBA(img image.Image) *image.NRGBA {
	b := img.Bounds()
	out := image.NewNRGBA(image.Rect(0, 0, b.Dx(), b.Dy()))
	for y := 0; y < b.Dy(); y++ {
		for x := 0; x < b.Dx(); x++ {
			out.Set(x, y, img.At(b.Min.X+x, b.Min.Y+y))
		}
	}
	return out
}

// samePixels compares two pictures channel by channel with a tolerance in
// 8-bit levels.
func samePixels(t *testing.T, what string, got, want image.Image, tol int) bool {
	t.Helper()
	g, w := toNRGBA(got), toNRGBA(want)
	if g.Bounds() != w.Bounds() {
		t.Errorf("%s: size %v, want %v", what, g.Bounds().Size(), w.Bounds().Size())
		return false
	}
	bad := 0
	for i := range g.Pix {
		d := int(g.Pix[i]) - int(w.Pix[i])
		if d < -tol || d > tol {
			bad++
		}
	}
	if bad > 0 {
		t.Errorf("%s: %d of %d channel values differ by more than %d", what, bad, len(g.Pix), tol)
		return false
	}
	return true
}

// goldens are this package's golden pictures (see testdata/README.md),
// compared with a tolerance of 2 levels of 255: the pictures come from ONNX
// Runtime's float32 arithmetic, whose summation order may differ on another
// CPU (other SIMD kernels); a colour two levels off is invisible, a wrong
// picture is off by far more. Rewrite them with go test ./app -run CLI
// -update (testkit.Update).
var goldens = testkit.Goldens{Dir: "../testdata/golden/cli", Failed: "../testdata/failed/cli", Tol: 2,
	Rewrite: "go test ./app -run CLI -update"}

// golden compares a picture with testdata/golden/cli/name (goldens.Check).
func golden(t *testing.T, name string, got *image.NRGBA) {
	t.Helper()
	goldens.Check(t, name, got)
}

// cropTo copies the part r of img into a picture of its own at the origin.
func cropTo(img *image.NRGBA, r image.Rectangle) *image.NRGBA {
	out := image.NewNRGBA(image.Rect(0, 0, r.Dx(), r.Dy()))
	draw.Draw(out, out.Rect, img, r.Min, draw.Src)
	return out
}
