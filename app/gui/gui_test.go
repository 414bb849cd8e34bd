package gui

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"image"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/storage"
	"fyne.io/fyne/v2/test"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"

	"fovea/app/core"
	"fovea/assets"
	"fovea/modelio"
	"fovea/modelio/infer"
	"fovea/viz"
	"fovea/viz/analysis"
)

// The tests drive the real window (Fyne's headless driver) against the real
// embedded demo model and the real ONNX Runtime library. A missing library
// fails the tests: it is installed by `make test`.
func TestMain(m *testing.M) {
	lib, err := infer.FindLibrary("")
	if err == nil {
		err = core.Start(lib)
	}
	if err != nil {
		fmt.Fprintln(os.Stderr, "gui tests need ONNX Runtime:", err)
		os.Exit(1)
	}
	code := m.Run()
	os.Exit(code)
}

// openWindow builds the window on a headless test app, opens what o says
// (the demo by default) and waits until every task has ended. Settings saved
// per model go to a scratch folder.
func openWindow(t *testing.T, o Options) *ui {
	t.Helper()
	t.Setenv("XDG_CONFIG_HOME", t.TempDir())
	a := test.NewTempApp(t)
	return openWindowIn(t, a, o)
}

func openWindowIn(t *testing.T, a fyne.App, o Options) *ui {
	t.Helper()
	w := test.NewTempWindow(t, nil)
	u := newUI(a, w, o)
	t.Cleanup(func() { u.close(); u.wait() })
	u.do(u.start)
	u.wait()
	if u.errShown > 0 {
		t.Fatalf("the window showed an error at start: %s", dialogText(u))
	}
	return u
}

// do runs f as the bridge's callbacks run: under the lock that keeps it
// from touching widgets while a task's callback does (the headless driver
// runs those on the task's goroutine).
func (u *ui) do(f func()) {
	u.uiMu.Lock()
	defer u.uiMu.Unlock()
	f()
}

// dialogText returns the text of the dialog on top of the window, "" when
// none is shown.
func dialogText(u *ui) string {
	top := u.win.Canvas().Overlays().Top()
	if top == nil {
		return ""
	}
	var b strings.Builder
	for _, o := range test.LaidOutObjects(top) {
		if l, ok := o.(*widget.Label); ok && l.Visible() {
			b.WriteString(l.Text + "\n")
		}
	}
	return b.String()
}

// button finds a visible button by its text in the window or its overlays.
func button(t *testing.T, u *ui, text string) *widget.Button {
	t.Helper()
	roots := []fyne.CanvasObject{u.win.Canvas().Content()}
	if top := u.win.Canvas().Overlays().Top(); top != nil {
		roots = append([]fyne.CanvasObject{top}, roots...)
	}
	for _, r := range roots {
		for _, o := range test.LaidOutObjects(r) {
			if b, ok := o.(*widget.Button); ok && b.Text == text && b.Visible() {
				return b
			}
		}
	}
	t.Fatalf("no button %q on screen", text)
	return nil
}

// labelsIn returns the texts of the visible labels inside o.
func labelsIn(o fyne.CanvasObject) []string {
	var out []string
	for _, c := range test.LaidOutObjects(o) {
		if l, ok := c.(*widget.Label); ok && l.Visible() {
			out = append(out, l.Text)
		}
	}
	return out
}

// demoInfo is the part of assets/demo/demo.json the tests read: PyTorch's
// answers for the demo images, written when the demo was made.
type demoInfo struct {
	Labels []string `json:"labels"`
	Images []struct {
		File        string  `json:"file"`
		Label       string  `json:"label"`
		HealthyPred string  `json:"healthy_label"`
		HealthyProb float64 `json:"healthy_probability"`
		Wrong       bool    `json:"misclassified"`
	} `json:"images"`
}

func readDemoInfo(t *testing.T) demoInfo {
	t.Helper()
	b, err := assets.Files.ReadFile(assets.InfoFile)
	if err != nil {
		t.Fatal(err)
	}
	var d demoInfo
	if err := json.Unmarshal(b, &d); err != nil {
		t.Fatalf("%s: %v", assets.InfoFile, err)
	}
	return d
}

// truth is the part of assets/demo/truth_unhealthy.json the tests read:
// which ReLU channels never fire on the probe images, measured with PyTorch
// by assets/make_demo.py (and re-checked there with a numpy evaluation of the
// ONNX graph).
type truth struct {
	DeadTotal int `json:"dead_total"`
	Relus     []struct {
		Node     string `json:"node"`
		Output   string `json:"output"`
		Follows  string `json:"follows"`
		Dead     []int  `json:"dead"`
		Rare     []int  `json:"rare"`
		Fires    []int  `json:"fire_count"`
		NearZero []int  `json:"images_within_margin"`
	} `json:"relus"`
	Margins struct {
		Tolerance float64  `json:"tolerance"`
		DeadMax   *float64 `json:"dead_channel_max_preactivation"`
	} `json:"margins"`
}

// deadStable reports whether no dead/live verdict of the truth file could
// flip between PyTorch and ONNX Runtime: every dead channel's largest input
// is below -tolerance, and every live channel fires on some image by more
// than the tolerance (make_demo.py's float-rounding margin).
func (tr truth) deadStable() bool {
	if tr.Margins.DeadMax != nil && *tr.Margins.DeadMax >= -tr.Margins.Tolerance {
		return false
	}
	for _, r := range tr.Relus {
		for i, n := range r.Fires {
			if n > 0 && n <= r.NearZero[i] {
				return false
			}
		}
	}
	return true
}

func readTruth(t *testing.T, file string) truth {
	t.Helper()
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

// TestStartsOnDemoAndShowsEveryView opens the window as `make run` does and
// goes through every view, checking each shows what it is for.
func TestStartsOnDemoAndShowsEveryView(t *testing.T) {
	u := openWindow(t, Options{View: viewModel})
	if u.ws == nil || u.ws.Demo == "" {
		t.Fatal("the window did not start on the demo model")
	}
	name := u.ws.Name()
	if !strings.Contains(u.win.Title(), name) {
		t.Errorf("title %q does not name the model %q", u.win.Title(), name)
	}
	var heading string
	for _, s := range u.heading.Segments {
		heading += s.Textual()
	}
	if !strings.Contains(heading, name) || !strings.Contains(heading, u.imgName) {
		t.Errorf("header %q should name the model %q and the image %q", heading, name, u.imgName)
	}

	// The layer panel lists every layer ("shows the loaded model's
	// name and its layer list").
	layers := u.ws.Model.Layers
	if rows, cols := u.layers.table.Length(); rows != len(layers) || cols != len(layerColumns) {
		t.Fatalf("layer table is %d×%d, want %d×%d", rows, cols, len(layers), len(layerColumns))
	}
	shown := test.RenderToMarkup(u.win.Canvas())
	for _, want := range []string{layers[0].Name, layers[0].WHD(), layers[len(layers)-1].Name, "W × H × D", "RF"} {
		if !strings.Contains(shown, ">"+want+"<") {
			t.Errorf("the window does not show %q in the layer panel", want)
		}
	}

	// Demo images and PyTorch's answers for them (demo.json).
	info := readDemoInfo(t)
	if len(core.DemoImages()) == 0 {
		t.Fatal("no demo images")
	}
	labels, _ := u.ws.Labels()
	if !slices.Equal(labels, info.Labels) {
		t.Errorf("labels in force %q, demo.json says %q", labels, info.Labels)
	}
	// The window opens on the demo model's genuine mistake, with its true
	// class chosen as the one it should have been.
	for _, im := range info.Images {
		if im.Wrong && (filepath.Base(im.File) != u.imgName || u.vOcc.expect.Selected != im.Label) {
			t.Errorf("the window opens on %s expecting %q; demo.json's mistake is %s, a %s", u.imgName, u.vOcc.expect.Selected, im.File, im.Label)
		}
	}

	for i, v := range Views {
		u.tabs.SelectIndex(i)
		if got := u.prefs.String(prefView); got != v.Name {
			t.Errorf("after choosing %s the remembered view is %q", v.Title, got)
		}
		if img := u.win.Canvas().(test.WindowlessCanvas).Capture(); img.Bounds().Dx() < 1000 {
			t.Errorf("%s: the window renders at %v", v.Title, img.Bounds())
		}
		switch v.Name {
		case viewModel:
			text := strings.Join(labelsIn(u.vModel.summary), "\n")
			if !strings.Contains(text, fmt.Sprint(len(info.Labels))) || !strings.Contains(text, name) {
				t.Errorf("model summary does not give the file and the %d classes:\n%s", len(info.Labels), text)
			}
		case viewKernels:
			k, err := u.ws.Kernels("")
			if err != nil {
				t.Fatal(err)
			}
			if len(u.vKernels.info) != k.M || u.vKernels.pic.img.Image == nil {
				t.Errorf("kernels view draws %d tiles, the first layer has %d filters", len(u.vKernels.info), k.M)
			}
		case viewPredict:
			checkPrediction(t, u, info)
		case viewMaps:
			if u.vMaps.grid.img.Image == nil || u.vMaps.overlay.img.Image == nil {
				t.Errorf("layer maps view shows no maps for layer %q", u.vMaps.layer.Selected)
			}
		case viewOcclusion:
			text := richText(u.vOcc.verdict)
			if !strings.Contains(text, u.acts.Class.Top[0].Label) {
				t.Errorf("occlusion view does not name the predicted class: %q", text)
			}
			if !u.vOcc.caution.Visible() || !strings.Contains(u.vOcc.caution.Text, "not proof") {
				t.Error("occlusion view shows no caution")
			}
		case viewHealth:
			if u.vHealth.tiles.img.Image == nil || u.vHealth.summary.Text == "" {
				t.Error("filter health view shows no filters or no explanation")
			}
		}
	}

	// Choosing a row in the layer panel brings up that layer's maps.
	u.tabs.SelectIndex(0)
	act := u.ws.Model.ActivationLayers()
	last := act[len(act)-1]
	for i, l := range layers {
		if l.Output == last.Output {
			u.layers.table.Select(widget.TableCellID{Row: i, Col: 0})
		}
	}
	if u.tabs.Selected() != u.tabByView[viewMaps] || u.vMaps.layer.Selected != last.Name || u.vMaps.grid.img.Image == nil {
		t.Errorf("choosing layer %s in the panel shows tab %q, layer %q", last.Name, u.tabs.Selected().Text, u.vMaps.layer.Selected)
	}
	if u.errShown > 0 {
		t.Errorf("an error was shown: %s", dialogText(u))
	}
}

// checkPrediction compares the prediction view with PyTorch's answer for
// the same demo image, recorded in demo.json when the demo was made. The
// probability is rounded to 4 decimals there; ONNX Runtime and PyTorch agree
// to far better than that in float32 (make_demo.py checks the logits).
func checkPrediction(t *testing.T, u *ui, info demoInfo) {
	t.Helper()
	var want *struct {
		File        string  `json:"file"`
		Label       string  `json:"label"`
		HealthyPred string  `json:"healthy_label"`
		HealthyProb float64 `json:"healthy_probability"`
		Wrong       bool    `json:"misclassified"`
	}
	for i := range info.Images {
		if filepath.Base(info.Images[i].File) == u.imgName {
			want = &info.Images[i]
		}
	}
	if want == nil {
		t.Fatalf("image %q is not among the demo images of demo.json", u.imgName)
	}
	top := u.acts.Class.Top[0]
	if top.Label != want.HealthyPred || math.Abs(top.Probability-want.HealthyProb) > 1e-4+1e-6 {
		t.Errorf("%s: the window says %s %.5f, PyTorch said %s %.4f", u.imgName, top.Label, top.Probability, want.HealthyPred, want.HealthyProb)
	}
	// Each row is the class's label and, beside its bar, the value in text.
	shown := labelsIn(u.vPredict.rows)
	if len(shown) != 2*min(topK, len(info.Labels)) || !strings.Contains(shown[0], want.HealthyPred) || shown[1] != percent(top.Probability) {
		t.Errorf("prediction view lists %q, want %d rows starting with %s and its %s", shown, topK, want.HealthyPred, percent(top.Probability))
	}
	// The bar's length is the probability: the fill is that fraction of the
	// track (of the row's bar, laid out by fractionLayout).
	for _, o := range test.LaidOutObjects(u.vPredict.rows) {
		c, ok := o.(*fyne.Container)
		if !ok || len(c.Objects) != 2 {
			continue
		}
		if fl, ok := c.Layout.(*fractionLayout); ok {
			track, fill := c.Objects[0].Size().Width, c.Objects[1].Size().Width
			if track <= 0 || math.Abs(float64(fill/track)-fl.f) > 0.01 {
				t.Errorf("a bar is filled %v of %v px for probability %v", fill, track, fl.f)
			}
		}
	}
}

func richText(r *widget.RichText) string {
	var s string
	for _, seg := range r.Segments {
		s += seg.Textual()
	}
	return s
}

// TestOcclusionShowsOverlayAndFullProgress runs occlusion from its button on
// the demo image: the heatmap appears and the progress bar reaches the number
// of model runs, which for a sliding patch is one run per patch position
// plus the unoccluded image (Zeiler & Fergus 2014, section 4.2: the grey
// square slides over the image; positions every stride, and one flush with
// the far border when the stride does not land there).
func TestOcclusionShowsOverlayAndFullProgress(t *testing.T) {
	u := openWindow(t, Options{View: viewPredict})
	v := u.vOcc
	u.showView(viewOcclusion)
	v.patch.SetText("12")
	v.stride.SetText("8")
	v.expect.SetSelected(noExpected)
	u.do(func() { test.Tap(v.runBtn) })
	u.wait()
	if v.pic.img.Image == nil || len(u.occ) != 1 || u.errShown > 0 {
		t.Fatalf("no heatmap after running occlusion (error: %s)", dialogText(u))
	}
	c, _ := u.ws.Prep()
	positions := func(n, patch, stride int) int {
		k := (n-patch)/stride + 1
		if (n-patch)%stride != 0 {
			k++
		}
		return k
	}
	runs := positions(c.Height, 12, 8)*positions(c.Width, 12, 8) + 1
	bar := v.runner.bar
	if bar.Max != float64(runs) || bar.Value != bar.Max {
		t.Errorf("progress ended at %v of %v, want %d of %d", bar.Value, bar.Max, runs, runs)
	}
	if !strings.Contains(v.runner.note.Text, "took") || v.runner.stop.Visible() {
		t.Errorf("after the run the note says %q and Stop is visible: %v", v.runner.note.Text, v.runner.stop.Visible())
	}
	pred := u.acts.Class.Top[0]
	if u.occ[0].Target != pred.Index || math.Abs(u.occ[0].Probability-pred.Probability) > 1e-6 {
		t.Errorf("occlusion explains class %d (p %.6f), the prediction is %d (p %.6f)", u.occ[0].Target, u.occ[0].Probability, pred.Index, pred.Probability)
	}
	single := v.pic.img.Image.Bounds().Dx()

	// Explain a misclassification: choose another class as the expected one.
	other := u.acts.Class.Top[1]
	v.expect.SetSelected(other.Label)
	u.do(func() { test.Tap(v.runBtn) })
	u.wait()
	if len(u.occ) != 2 || u.occ[1].Target != other.Index {
		t.Fatalf("with %q expected the occlusion ran for %d classes", other.Label, len(u.occ))
	}
	if math.Abs(u.occ[1].Probability-other.Probability) > 1e-6 {
		t.Errorf("expected class probability %.6f, the prediction view says %.6f", u.occ[1].Probability, other.Probability)
	}
	if w := v.pic.img.Image.Bounds().Dx(); w <= single {
		t.Errorf("two heatmaps side by side are %d px wide, one was %d", w, single)
	}
	verdict := richText(v.verdict)
	for _, want := range []string{pred.Label, other.Label, percent(pred.Probability), percent(other.Probability)} {
		if !strings.Contains(verdict, want) {
			t.Errorf("the verdict %q does not give %q", verdict, want)
		}
	}

	// The one-page picture, saved where the save dialog would have put it.
	out := filepath.Join(t.TempDir(), "explained.png")
	u.do(func() {
		v.writeReport(out, core.ReportInput{Image: u.img, ImageName: u.imgName, Versus: other.Index, Occlusion: v.set, Occlusions: u.occ})
	})
	u.wait()
	checkPNG(t, out, viz.ReportWidth, viz.ReportHeight)

	// Stop: a fine stride makes thousands of runs; Stop ends the task early
	// and leaves the heatmap shown before.
	v.stride.SetText("1")
	v.patch.SetText("2")
	u.do(func() { test.Tap(v.runBtn) })
	u.do(func() { test.Tap(v.runner.stop) })
	u.wait()
	if !strings.HasSuffix(v.runner.note.Text, "stopped") || len(u.occ) != 2 {
		t.Errorf("after Stop the note says %q and %d heatmaps are kept", v.runner.note.Text, len(u.occ))
	}
}

func checkPNG(t *testing.T, path string, w, h int) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatalf("export: %v", err)
	}
	defer f.Close()
	cfg, format, err := image.DecodeConfig(f)
	if err != nil || format != "png" || cfg.Width != w || cfg.Height != h {
		t.Errorf("%s: %s %d×%d (%v), want a %d×%d PNG", path, format, cfg.Width, cfg.Height, err, w, h)
	}
}

// TestScanMarksDeadFiltersOfUnhealthyDemo opens the unhealthy demo, scans
// the demo's probe images from the Scan button, and checks the dead filters
// against the truth file PyTorch wrote when the demo was trained: in the
// table, in the filter tiles of both views, and in the CSV export.
func TestScanMarksDeadFiltersOfUnhealthyDemo(t *testing.T) {
	u := openWindow(t, Options{View: viewHealth})
	sick := button(t, u, "Unhealthy demo")
	u.do(func() { test.Tap(sick) })
	u.wait()
	if u.ws == nil || u.ws.Demo != "unhealthy" {
		t.Fatalf("the unhealthy demo did not open (error: %s)", dialogText(u))
	}
	v := u.vHealth
	u.do(func() { test.Tap(v.scanBtn) })
	u.wait()
	if u.scan == nil || u.errShown > 0 {
		t.Fatalf("no scan (error: %s)", dialogText(u))
	}
	if bar := v.runner.bar; bar.Value != bar.Max || bar.Max != float64(u.scan.Images) {
		t.Errorf("scan progress ended at %v of %v for %d images", bar.Value, bar.Max, u.scan.Images)
	}
	tr := readTruth(t, assets.UnhealthyTruthFile)
	if tr.DeadTotal == 0 || !tr.deadStable() {
		t.Fatalf("truth file: %d dead filters, dead/live verdicts stable: %v (the test needs dead filters whose verdicts float rounding cannot flip)", tr.DeadTotal, tr.deadStable())
	}

	// The table: the dead rows of each layer are the truth's.
	dead := map[string][]int{}
	for _, r := range v.rows {
		if slices.Contains(r.Flags, modelio.FlagDead) {
			dead[r.Output] = append(dead[r.Output], r.Index)
		}
	}
	for _, r := range tr.Relus {
		got := dead[r.Output]
		slices.Sort(got)
		if !slices.Equal(got, r.Dead) && !(len(got) == 0 && len(r.Dead) == 0) {
			t.Errorf("%s: the table marks %v dead, PyTorch found %v", r.Output, got, r.Dead)
		}
	}
	if n := u.scan.Count(modelio.FlagDead); n != tr.DeadTotal {
		t.Errorf("%d dead filters found, the truth file has %d", n, tr.DeadTotal)
	}
	if !strings.Contains(v.summary.Text, fmt.Sprintf("%d dead", tr.DeadTotal)) {
		t.Errorf("summary %q does not count %d dead filters", v.summary.Text, tr.DeadTotal)
	}
	// Sorted by "fires" ascending at first: dead filters on top.
	for i := range tr.DeadTotal {
		if !slices.Contains(v.rows[i].Flags, modelio.FlagDead) {
			t.Fatalf("row %d is %s %d (%v), dead filters should come first", i, v.rows[i].Layer, v.rows[i].Index, v.rows[i].Flags)
		}
	}

	// The tiles: every convolution feeding a ReLU with dead channels has
	// exactly those tiles marked dead, in the kernels view and here.
	for _, r := range tr.Relus {
		if len(r.Dead) == 0 {
			continue
		}
		conv := ""
		for _, l := range u.scan.Layers {
			if l.Output == r.Output {
				conv = l.Conv
			}
		}
		if conv == "" {
			continue // a ReLU after a Gemm: no tiles
		}
		u.showView(viewKernels)
		u.vKernels.layer.SetSelected(conv)
		if got := deadTiles(u.vKernels.info); !slices.Equal(got, r.Dead) {
			t.Errorf("kernels view, %s: tiles marked dead %v, PyTorch found %v", conv, got, r.Dead)
		}
		u.showView(viewHealth)
		v.conv = conv
		v.drawTiles()
		if got := deadTiles(v.info); !slices.Equal(got, r.Dead) {
			t.Errorf("filter health view, %s: tiles marked dead %v, PyTorch found %v", conv, got, r.Dead)
		}
	}

	// Clicking a column title sorts by it; clicking again reverses.
	test.Tap(button(t, u, "Peak"))
	if !slices.IsSortedFunc(v.rows, func(a, b analysis.ScanRow) int { return cmpF(a.Max, b.Max) }) {
		t.Error("rows are not sorted by peak after clicking its title")
	}
	test.Tap(button(t, u, "Peak"))
	if !slices.IsSortedFunc(v.rows, func(a, b analysis.ScanRow) int { return cmpF(b.Max, a.Max) }) {
		t.Error("rows are not sorted by peak, largest first, after a second click")
	}
	test.Tap(v.onlyFlags)
	for _, r := range v.rows {
		if len(r.Flags) == 0 {
			t.Fatalf("with 'Flagged only' the table shows %s %d, which has no flag", r.Layer, r.Index)
		}
	}

	// The CSV export, written where the save dialog would have put it.
	out := filepath.Join(t.TempDir(), "scan.csv")
	u.do(func() { v.writeCSV(out) })
	u.wait()
	f, err := os.Open(out)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	for _, r := range recs[1:] {
		if slices.Contains(strings.Fields(r[len(r)-1]), string(modelio.FlagDead)) {
			n++
		}
	}
	if n != tr.DeadTotal {
		t.Errorf("the CSV export has %d dead rows, want %d", n, tr.DeadTotal)
	}

	// Stop: a scan stopped at once keeps the report shown before.
	before := u.scan
	u.do(func() { test.Tap(v.scanBtn) })
	u.do(func() { test.Tap(v.runner.stop) })
	u.wait()
	if !strings.HasSuffix(v.runner.note.Text, "stopped") || u.scan != before {
		t.Errorf("after Stop the note says %q; report kept: %v", v.runner.note.Text, u.scan == before)
	}
}

func deadTiles(info []viz.TileInfo) []int {
	var out []int
	for _, t := range info {
		if slices.Contains(t.Flags, modelio.FlagDead) {
			out = append(out, t.Index)
		}
	}
	slices.Sort(out)
	return out
}

func cmpF(a, b float64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

// TestBadFilesShowErrorsAndTheWindowGoesOn drops a malformed model and a
// malformed image on the window: each gives a dialog naming the file, the
// demo stays open and the window keeps working.
func TestBadFilesShowErrorsAndTheWindowGoesOn(t *testing.T) {
	u := openWindow(t, Options{View: viewPredict})
	dir := t.TempDir()
	demo := u.ws
	drop := func(path string) {
		u.do(func() { u.dropped(fyne.NewPos(10, 10), []fyne.URI{storage.NewFileURI(path)}) })
		u.wait()
	}
	cases := []struct{ name, content string }{
		{"broken.onnx", "this is not a protobuf message \x00\x01\x02"},
		{"truncated.png", "\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR"},
		{"notes.txt", "neither a model nor an image"},
	}
	for i, c := range cases {
		path := filepath.Join(dir, c.name)
		if err := os.WriteFile(path, []byte(c.content), 0o644); err != nil {
			t.Fatal(err)
		}
		drop(path)
		if u.errShown != i+1 {
			t.Fatalf("%s: %d error dialogs, want %d", c.name, u.errShown, i+1)
		}
		if text := dialogText(u); !strings.Contains(text, c.name) {
			t.Errorf("%s: the dialog does not name the file:\n%s", c.name, text)
		}
		test.Tap(button(t, u, "OK"))
		if u.win.Canvas().Overlays().Top() != nil {
			t.Errorf("%s: the dialog did not close", c.name)
		}
		if u.ws != demo || u.acts == nil {
			t.Fatalf("%s: after the error the demo model or its image is gone", c.name)
		}
	}

	// Still working: a PNG under an unknown name opens as an image (by its
	// content), and the model runs on it.
	data, err := assets.Files.ReadFile(assets.Images()[0])
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(dir, "frame.bin")
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	before := u.acts
	drop(path)
	if u.errShown != len(cases) || u.acts == before || u.imgName != "frame.bin" {
		t.Errorf("dropping a PNG named frame.bin: image %q, errors %d (%s)", u.imgName, u.errShown, dialogText(u))
	}
	if got := u.prefs.StringList(prefImages); len(got) == 0 || got[0] != path {
		t.Errorf("recent images %q should start with %s", got, path)
	}
}

// TestOwnModelSettingsAreRemembered opens a model from a file, edits its
// preprocessing in the Model view and applies it; opening the file again
// restores the edit.
func TestOwnModelSettingsAreRemembered(t *testing.T) {
	t.Setenv("XDG_CONFIG_HOME", t.TempDir())
	path := filepath.Join(t.TempDir(), "parts-copy.onnx")
	if err := os.WriteFile(path, assets.Model(), 0o644); err != nil {
		t.Fatal(err)
	}
	a := test.NewTempApp(t)
	u := openWindowIn(t, a, Options{Model: path, View: viewModel})
	if u.ws == nil || u.ws.Model.Path != path {
		t.Fatalf("model %s did not open", path)
	}
	v := u.vModel
	v.mean.SetText("0.5, 0.5, 0.5")
	// A typed crop:S (shorter side to 72, then the 64×64 centre) is a setting
	// of the window like a chosen one.
	v.resize.SetText("Crop:72")
	u.do(func() { test.Tap(v.apply) })
	u.wait()
	c, from := u.ws.Prep()
	if c.Mean != [3]float32{0.5, 0.5, 0.5} || c.Resize != "crop:72" || from != core.FromChosen || u.errShown > 0 {
		t.Fatalf("after Apply the mean is %v, resize %q (%s), errors %d: %s", c.Mean, c.Resize, from, u.errShown, dialogText(u))
	}
	u.do(func() { u.openModel(path) })
	u.wait()
	c, from = u.ws.Prep()
	if c.Mean != [3]float32{0.5, 0.5, 0.5} || c.Resize != "crop:72" || from != core.FromSaved {
		t.Errorf("opened again, the mean is %v, resize %q from %q, want 0.5 and crop:72 from saved settings", c.Mean, c.Resize, from)
	}
	if !strings.Contains(v.prepFrom.Text, core.FromSaved) || v.mean.Text != "0.5, 0.5, 0.5" || v.resize.Text != "crop:72" {
		t.Errorf("the Model view shows %q, mean %q, resize %q", v.prepFrom.Text, v.mean.Text, v.resize.Text)
	}

	// A setting the model cannot take is refused with a dialog and changes
	// nothing.
	v.size.SetText("32x32")
	test.Tap(v.apply)
	if u.errShown != 1 || !strings.Contains(dialogText(u), "64") {
		t.Errorf("a 32×32 input for a 64×64 model: %d dialogs: %s", u.errShown, dialogText(u))
	}
	if c2, _ := u.ws.Prep(); c2 != c {
		t.Errorf("a refused setting changed the preparation to %+v", c2)
	}
}

// TestWindowRemembersViewAndSize closes the window on one view and size; the
// next window opens on them.
func TestWindowRemembersViewAndSize(t *testing.T) {
	t.Setenv("XDG_CONFIG_HOME", t.TempDir())
	a := test.NewTempApp(t)
	u := openWindowIn(t, a, Options{})
	if u.tabs.Selected() != u.tabByView[viewModel] {
		t.Errorf("a first start opens %q, want the Model view", u.tabs.Selected().Text)
	}
	u.tabs.Select(u.tabByView[viewMaps])
	u.win.Resize(fyne.NewSize(1100, 700))
	u.close()
	if w, h := u.prefs.Float(prefWidth), u.prefs.Float(prefHeight); w != 1100 || h != 700 {
		t.Errorf("remembered size %v×%v, want 1100×700", w, h)
	}
	u2 := openWindowIn(t, a, Options{})
	if u2.tabs.Selected() != u2.tabByView[viewMaps] {
		t.Errorf("the next window opens on %q, want Layer maps", u2.tabs.Selected().Text)
	}
	if s := u2.win.Canvas().Size(); s.Width != 1100 || s.Height != 700 {
		t.Errorf("the next window opens at %v, want 1100×700", s)
	}
}

// TestMenusHaveShortcuts checks that the menus carry the shortcuts for
// opening a model and an image, running occlusion and exporting.
func TestMenusHaveShortcuts(t *testing.T) {
	u := openWindow(t, Options{})
	want := map[string]fyne.Shortcut{
		"Open model…": keyOpenModel, "Open image…": keyOpenImage,
		"Run occlusion": keyRun, "Export explanation picture…": keyExport,
	}
	for _, m := range u.win.MainMenu().Items {
		for _, it := range m.Items {
			if s, ok := want[it.Label]; ok {
				if it.Shortcut == nil || it.Shortcut.ShortcutName() != s.ShortcutName() {
					t.Errorf("menu item %q has shortcut %v", it.Label, it.Shortcut)
				}
				delete(want, it.Label)
			}
		}
	}
	if len(want) > 0 {
		t.Errorf("menu items missing: %v", want)
	}
}

// TestThemes checks the forced themes: a light background with dark text,
// and the reverse, whatever the desktop prefers.
func TestThemes(t *testing.T) {
	lum := func(c interface{ RGBA() (r, g, b, a uint32) }) float64 {
		r, g, b, _ := c.RGBA()
		return (0.2126*float64(r) + 0.7152*float64(g) + 0.0722*float64(b)) / 0xffff
	}
	for _, tc := range []struct {
		choice string
		dark   bool
	}{{themeLight, false}, {themeDark, true}} {
		th := themeFor(tc.choice)
		// Asked with the other variant: the choice must win over the desktop's.
		other := theme.VariantDark
		if tc.dark {
			other = theme.VariantLight
		}
		bg := lum(th.Color(theme.ColorNameBackground, other))
		fg := lum(th.Color(theme.ColorNameForeground, other))
		if (bg < 0.5) != tc.dark || (fg < 0.5) == tc.dark {
			t.Errorf("%s theme: background luminance %.2f, text %.2f", tc.choice, bg, fg)
		}
	}
}
