package analysis

import (
	"context"
	"errors"
	"fmt"
	"image"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"testing"

	"fovea/modelio"
	"fovea/modelio/infer"
	"fovea/modelio/onnxbuild"
	"fovea/modelio/prep"
)

// The hand-built scan model (ONNX Operators.md: Conv, Relu,
// BatchNormalization, LeakyRelu, GlobalAveragePool, Flatten):
//
//	image [N,3,6,6] -> conv1 (3->6, 3x3, pads 1) -> relu1
//	                -> conv2 (6->2, 1x1) -> bn2 -> act2 (LeakyRelu, alpha 0.1)
//	                -> GlobalAveragePool -> Flatten -> out [N,2]
//
// conv1's channels, on inputs in [0, 1] (Range 0-1, mean 0, std 1):
//
//	0: every weight -0.1, bias -0.05: output <= -0.05 everywhere, never fires -> dead
//	1: every weight +0.1, bias +0.05: output >= 0.05 everywhere, always fires
//	2: zero kernel, bias 0.25: 0.25 everywhere -> constant, zero_kernel
//	3: 1 on red at the centre tap, bias -0.999: fires only where red is 255 -> rare
//	4: 2 on red at the centre tap, bias -1.998: the same as 3, doubled -> rare, duplicate (and 3 too)
//	5: 1 on green at the centre tap, bias 0: the green plane itself
//
// conv2 + bn2 (scale 1, mean 0, var 1, epsilon 1e-5):
//
//	0: zero kernel, bias 0, BN shift -1: BN(0) = -1, LeakyRelu -> -0.1 everywhere: dead, zero_kernel
//	1: 1 on relu1 channel 1, BN shift 0: relu1[1]/sqrt(1+1e-5), always fires
const scanSide = 6

func scanModel(t *testing.T) *modelio.Model {
	b := newGraph("scan_hand")
	b.input("image", 1, 3, scanSide, scanSide)
	w1 := make([]float32, 6*3*3*3)
	idx := func(m, c, ky, kx int) int { return ((m*3+c)*3+ky)*3 + kx }
	for c := 0; c < 3; c++ {
		for ky := 0; ky < 3; ky++ {
			for kx := 0; kx < 3; kx++ {
				w1[idx(0, c, ky, kx)] = -0.1
				w1[idx(1, c, ky, kx)] = 0.1
			}
		}
	}
	w1[idx(3, 0, 1, 1)] = 1
	w1[idx(4, 0, 1, 1)] = 2
	w1[idx(5, 1, 1, 1)] = 1
	b.init("w1", w1, 6, 3, 3, 3)
	b.init("b1", []float32{-0.05, 0.05, 0.25, -0.999, -1.998, 0}, 6)
	w2 := make([]float32, 2*6)
	w2[1*6+1] = 1
	b.init("w2", w2, 2, 6, 1, 1)
	b.init("b2", []float32{0, 0}, 2)
	b.init("bn_scale", []float32{1, 1}, 2)
	b.init("bn_shift", []float32{-1, 0}, 2)
	b.init("bn_mean", []float32{0, 0}, 2)
	b.init("bn_var", []float32{1, 1}, 2)
	b.node("Conv", "conv1", []string{"image", "w1", "b1"}, []string{"c1"}, attrInts("kernel_shape", 3, 3), attrInts("pads", 1, 1, 1, 1))
	b.node("Relu", "relu1", []string{"c1"}, []string{"r1"})
	b.node("Conv", "conv2", []string{"r1", "w2", "b2"}, []string{"c2"}, attrInts("kernel_shape", 1, 1))
	b.node("BatchNormalization", "bn2", []string{"c2", "bn_scale", "bn_shift", "bn_mean", "bn_var"}, []string{"n2"})
	b.node("LeakyRelu", "act2", []string{"n2"}, []string{"a2"}, attrFloat("alpha", 0.1))
	b.node("GlobalAveragePool", "gap", []string{"a2"}, []string{"g"})
	b.node("Flatten", "flatten", []string{"g"}, []string{"out"}, attrInt("axis", 1))
	b.output("out", 1, 2)
	return b.model(t)
}

// scanImage is probe image i of n: red 100 everywhere except a single 255
// at (2, 3) in image 0; green varying with position and image, all 0 in
// image 5; blue constant 30.
func scanImage(i int) *image.NRGBA {
	img := image.NewNRGBA(image.Rect(0, 0, scanSide, scanSide))
	for y := 0; y < scanSide; y++ {
		for x := 0; x < scanSide; x++ {
			o := y*img.Stride + x*4
			img.Pix[o] = 100
			if i == 0 && y == 2 && x == 3 {
				img.Pix[o] = 255
			}
			if i != 5 {
				img.Pix[o+1] = uint8((i*37 + y*11 + x*5) % 200)
			}
			img.Pix[o+2] = 30
			img.Pix[o+3] = 255
		}
	}
	return img
}

func writePNG(t testing.TB, path string, img image.Image) {
	t.Helper()
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := png.Encode(f, img); err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
}

func writeProbes(t testing.TB, n int) []string {
	dir := t.TempDir()
	var files []string
	for i := 0; i < n; i++ {
		p := filepath.Join(dir, fmt.Sprintf("probe %03d.png", i))
		writePNG(t, p, scanImage(i))
		files = append(files, p)
	}
	return files
}

func scanConfig() prep.Config {
	return prep.Config{Width: scanSide, Height: scanSide, Channels: 3, Resize: "stretch", Range: "0-1",
		Std: [3]float32{1, 1, 1}, Layout: "nchw"}
}

// scanReference computes conv1+relu1 and the second layer for the probe
// images with plain loops in float64 and returns per layer and channel the
// number of images fired on, the max and the mean: the slow, obviously
// correct reference (formulas of ONNX Operators.md).
func scanReference(n int) (fires [2][]int, maxv, mean [2][]float64) {
	w := func(m, c, ky, kx int) float64 {
		switch {
		case m == 0:
			return -0.1
		case m == 1:
			return 0.1
		case m == 3 && c == 0 && ky == 1 && kx == 1:
			return 1
		case m == 4 && c == 0 && ky == 1 && kx == 1:
			return 2
		case m == 5 && c == 1 && ky == 1 && kx == 1:
			return 1
		}
		return 0
	}
	bias := []float64{-0.05, 0.05, 0.25, -0.999, -1.998, 0}
	for l, m := range []int{6, 2} {
		fires[l] = make([]int, m)
		maxv[l] = slices.Repeat([]float64{math.Inf(-1)}, m)
		mean[l] = make([]float64, m)
	}
	for i := 0; i < n; i++ {
		img := scanImage(i)
		in := func(c, y, x int) float64 {
			if y < 0 || y >= scanSide || x < 0 || x >= scanSide {
				return 0 // zero padding
			}
			return float64(img.Pix[y*img.Stride+x*4+c]) / 255
		}
		var r1 [6][scanSide][scanSide]float64
		var fired [2][6]bool
		for m := 0; m < 6; m++ {
			for y := 0; y < scanSide; y++ {
				for x := 0; x < scanSide; x++ {
					s := bias[m]
					for c := 0; c < 3; c++ {
						for ky := 0; ky < 3; ky++ {
							for kx := 0; kx < 3; kx++ {
								s += w(m, c, ky, kx) * in(c, y+ky-1, x+kx-1)
							}
						}
					}
					v := math.Max(0, s)
					r1[m][y][x] = v
					fired[0][m] = fired[0][m] || v > 0
					maxv[0][m] = math.Max(maxv[0][m], v)
					mean[0][m] += v
				}
			}
		}
		for y := 0; y < scanSide; y++ {
			for x := 0; x < scanSide; x++ {
				bn := math.Sqrt(1 + 1e-5)
				pre := [2]float64{(0-0)/bn - 1, r1[1][y][x] / bn}
				for m, p := range pre {
					v := p
					if v < 0 {
						v *= 0.1
					}
					fired[1][m] = fired[1][m] || v > 0
					maxv[1][m] = math.Max(maxv[1][m], v)
					mean[1][m] += v
				}
			}
		}
		for l := range fired {
			for m := range fires[l] {
				if fired[l][m] {
					fires[l][m]++
				}
			}
		}
	}
	for l := range mean {
		for m := range mean[l] {
			mean[l][m] /= float64(n * scanSide * scanSide)
		}
	}
	return
}

func TestScanHandModel(t *testing.T) {
	m := scanModel(t)
	const n = 20
	files := writeProbes(t, n)
	for i, batch := range []int{0, 1, 3} {
		// The maps whole, then summarised in the graph (scanReads).
		opt := scanReads(t, m)[i%2].opt
		opt.Batch = batch
		s := newSession(t, m, opt)
		var last [2]int
		r, err := Scan(context.Background(), s, m, scanConfig(), files, ScanOptions{Rare: 0.1}, func(done, total int) {
			if done < last[0] {
				t.Errorf("progress went back from %d to %d", last[0], done)
			}
			last = [2]int{done, total}
		})
		if err != nil {
			t.Fatalf("batch %d, %+v: %v", batch, opt, err)
		}
		if last != [2]int{n, n} {
			t.Errorf("batch %d: progress ended at %v", batch, last)
		}
		if r.Images != n || r.Rare != 0.1 || len(r.Skipped) != 0 {
			t.Errorf("batch %d: images %d rare %g skipped %v", batch, r.Images, r.Rare, r.Skipped)
		}
		// Expected flags worked out by hand from the weights (see scanModel).
		wantLayers := []struct {
			name, output, conv string
			flags              [][]modelio.Flag
		}{
			{"relu1", "r1", "conv1", [][]modelio.Flag{{modelio.FlagDead}, {}, {modelio.FlagConstant, modelio.FlagZeroKernel}, {modelio.FlagRare, modelio.FlagDuplicate}, {modelio.FlagRare, modelio.FlagDuplicate}, {}}},
			{"act2", "a2", "conv2", [][]modelio.Flag{{modelio.FlagDead, modelio.FlagZeroKernel}, {}}},
		}
		fires, maxv, mean := scanReference(n)
		if len(r.Layers) != len(wantLayers) {
			t.Fatalf("batch %d: %d layers, want %d", batch, len(r.Layers), len(wantLayers))
		}
		for li, wl := range wantLayers {
			l := r.Layers[li]
			if l.Name != wl.name || l.Output != wl.output || l.Conv != wl.conv {
				t.Errorf("layer %d: %q %q %q, want %q %q %q", li, l.Name, l.Output, l.Conv, wl.name, wl.output, wl.conv)
			}
			if len(l.Channels) != len(wl.flags) {
				t.Fatalf("layer %s: %d channels, want %d", l.Name, len(l.Channels), len(wl.flags))
			}
			for ci, ch := range l.Channels {
				if ch.Index != ci {
					t.Errorf("%s channel %d has index %d", l.Name, ci, ch.Index)
				}
				got, want := slices.Sorted(slices.Values(ch.Flags)), slices.Sorted(slices.Values(wl.flags[ci]))
				if !slices.Equal(got, want) {
					t.Errorf("batch %d %s channel %d: flags %v, want %v", batch, l.Name, ci, ch.Flags, wl.flags[ci])
				}
				if wf := float64(fires[li][ci]) / n; ch.Fires != wf {
					t.Errorf("%s channel %d: fires %g, want %g", l.Name, ci, ch.Fires, wf)
				}
				// 1e-5: float32 in the runtime against float64 here.
				if math.Abs(ch.Max-maxv[li][ci]) > 1e-5 || math.Abs(ch.Mean-mean[li][ci]) > 1e-5 {
					t.Errorf("%s channel %d: max %g mean %g, want %g %g", l.Name, ci, ch.Max, ch.Mean, maxv[li][ci], mean[li][ci])
				}
			}
		}
		// The hand-worked values behind the flags, checked against the
		// reference so that the reference itself is not wrong: channel 3
		// fires on image 0 only, channel 5 on every image but 5.
		if fires[0][3] != 1 || fires[0][4] != 1 || fires[0][5] != n-1 || fires[0][0] != 0 || fires[0][1] != n {
			t.Errorf("reference fires %v disagree with the hand analysis", fires[0])
		}
		if math.Abs(maxv[0][2]-0.25) > 1e-12 || math.Abs(maxv[1][0]+0.1) > 1e-12 {
			t.Errorf("reference max %v %v disagree with the hand analysis", maxv[0], maxv[1])
		}
	}
}

func TestScanRareDefault(t *testing.T) {
	// With the default 1 % threshold, firing on 1 image of 20 (5 %) is not
	// rare.
	m := scanModel(t)
	files := writeProbes(t, 20)
	s := newSession(t, m, infer.Options{Capture: ScanCapture(m)})
	r, err := Scan(context.Background(), s, m, scanConfig(), files, ScanOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if r.Rare != DefaultRare || slices.Contains(r.Layers[0].Channels[3].Flags, modelio.FlagRare) {
		t.Errorf("rare %g, channel 3 flags %v", r.Rare, r.Layers[0].Channels[3].Flags)
	}
	if got := r.Count(modelio.FlagDead); got != 2 {
		t.Errorf("%d dead channels, want 2", got)
	}
}

func TestScanErrors(t *testing.T) {
	m := scanModel(t)
	files := writeProbes(t, 4)
	dir := t.TempDir()
	bad := filepath.Join(dir, "broken image.png")
	if err := os.WriteFile(bad, []byte("\x89PNG\r\n\x1a\nnot really"), 0o644); err != nil {
		t.Fatal(err)
	}
	missing := filepath.Join(dir, "missing.png")
	s := newSession(t, m, infer.Options{Capture: ScanCapture(m)})
	ctx := context.Background()
	for _, c := range []struct {
		files []string
		o     ScanOptions
		want  string
	}{
		{append(slices.Clone(files[:2]), bad, files[2]), ScanOptions{}, "broken image.png"},
		{append(slices.Clone(files), missing), ScanOptions{}, "missing.png"},
		{nil, ScanOptions{}, "no probe images"},
		{files, ScanOptions{Rare: -0.5}, "rare threshold -0.5"},
		{files, ScanOptions{Rare: 2}, "rare threshold 2"},
		{[]string{bad, missing}, ScanOptions{SkipUnreadable: true}, "none of the 2 probe files could be read"},
	} {
		r, err := Scan(ctx, s, m, scanConfig(), c.files, c.o, nil)
		if err == nil || !strings.Contains(err.Error(), c.want) || r != nil {
			t.Errorf("%v %+v: %v, want an error containing %q", c.files, c.o, err, c.want)
		}
	}
	// Skipping: the unreadable files are listed and not counted.
	r, err := Scan(ctx, s, m, scanConfig(), append(slices.Clone(files), bad, missing), ScanOptions{SkipUnreadable: true}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if r.Images != len(files) || !slices.Equal(r.Skipped, []string{bad, missing}) {
		t.Errorf("images %d skipped %v", r.Images, r.Skipped)
	}
	// A session that does not capture the activations.
	plain := newSession(t, m, infer.Options{})
	if _, err := Scan(ctx, plain, m, scanConfig(), files, ScanOptions{}, nil); err == nil || !strings.Contains(err.Error(), `does not capture "r1"`) {
		t.Errorf("session without captures: %v", err)
	}
}

func TestScanCancel(t *testing.T) {
	m := scanModel(t)
	files := writeProbes(t, 120)
	s := newSession(t, m, infer.Options{Capture: ScanCapture(m), Batch: 4})
	if _, err := Scan(context.Background(), s, m, scanConfig(), files[:8], ScanOptions{}, nil); err != nil {
		t.Fatal(err)
	}
	before := runtime.NumGoroutine()

	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := Scan(ctx, s, m, scanConfig(), files, ScanOptions{}, nil); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled before the start: %v", err)
	}
	waitGoroutines(t, before)

	ctx, cancel = context.WithCancel(context.Background())
	defer cancel()
	var after, last int
	r, err := Scan(ctx, s, m, scanConfig(), files, ScanOptions{}, func(done, total int) {
		if done > 0 && ctx.Err() == nil {
			cancel()
		} else if ctx.Err() != nil {
			after++
		}
		last = done
	})
	if !errors.Is(err, context.Canceled) || r != nil {
		t.Errorf("cancelled scan: %v, %v", r, err)
	}
	if after > 0 || last >= len(files) {
		t.Errorf("%d progress calls after the cancel, last at %d of %d: not prompt", after, last, len(files))
	}
	waitGoroutines(t, before)
}

func TestScanLayersOps(t *testing.T) {
	m := scanModel(t)
	var names []string
	for _, l := range m.ReluLayers() {
		names = append(names, l.Name)
	}
	if !slices.Equal(names, []string{"relu1", "act2"}) || !slices.Equal(ScanCapture(m), []string{"r1", "a2"}) {
		t.Errorf("scan layers %v capture %v", names, ScanCapture(m))
	}
}

// TestScanNotFinite: a channel whose map is infinite (x / 0 with x ≥ 1,
// IEEE 754: +Inf) is flagged not_finite with Max and Mean 0, and the report
// still exports as JSON (which has no Inf).
func TestScanNotFinite(t *testing.T) {
	b := newGraph("scan_inf")
	b.input("image", 1, 3, scanSide, scanSide)
	b.init("one", []float32{1}, 1)
	b.init("den", []float32{0, 1, 1}, 1, 3, 1, 1)
	b.node("Add", "add", []string{"image", "one"}, []string{"a"})
	b.node("Div", "div", []string{"a", "den"}, []string{"d"})
	b.node("Relu", "relu", []string{"d"}, []string{"r"})
	b.node("GlobalAveragePool", "gap", []string{"r"}, []string{"out"})
	b.output("out", 1, 3, 1, 1)
	m := b.model(t)
	s := newSession(t, m, infer.Options{Capture: ScanCapture(m)})
	r, err := Scan(context.Background(), s, m, scanConfig(), writeProbes(t, 3), ScanOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	chs := r.Layers[0].Channels
	if r.Layers[0].Conv != "" {
		t.Errorf("conv %q for a layer fed by Div", r.Layers[0].Conv)
	}
	if !slices.Equal(chs[0].Flags, []modelio.Flag{FlagNotFinite}) || chs[0].Max != 0 || chs[0].Mean != 0 {
		t.Errorf("infinite channel: %+v", chs[0])
	}
	// Channel 1 is 1 + green/255: fires everywhere, max (1 + max green/255).
	if len(chs[1].Flags) != 0 || chs[1].Fires != 1 || chs[1].Max < 1 {
		t.Errorf("finite channel: %+v", chs[1])
	}
	var buf strings.Builder
	if err := r.WriteJSON(&buf); err != nil {
		t.Errorf("JSON of a report with an infinite channel: %v", err)
	}
}

// ScanSession reads the maps the scan reads and the activations' inputs
// (PreActivationCapture): summarised in the graph when the model fixes
// their size, whole when it does not; and it leaves the runtime's workers
// spinning even for a light model (the scan takes turns with the model;
// this project's measurement, see ScanSession).
func TestScanSessionOptions(t *testing.T) {
	light := scanModel(t)
	var want []modelio.Summary
	for _, n := range ScanCapture(light) {
		want = append(want, modelio.Summary{Tensor: n})
	}
	for _, n := range PreActivationCapture(light) {
		want = append(want, modelio.Summary{Tensor: n, MaxOnly: true})
	}
	if o := ScanSession(light, nil); o.NoSpin || len(o.Capture) != 0 || !slices.Equal(o.Summarise, want) {
		t.Errorf("light model (%d MACs for %d×%d pixels): %+v", light.Total.MACs, light.Image.Width, light.Image.Height, o)
	}
	sb := onnxbuild.New(13, onnxbuild.Zeros)
	sx := sb.Input("image", onnxbuild.Float, "N", 3, "H", "W")
	sr := sb.Relu(sb.Conv(sx, 3, 4, 3, 1, 1))
	sb.Output(sb.Flatten(sb.GlobalAveragePool(sr)))
	sp := filepath.Join(t.TempDir(), "symbolic.onnx")
	if err := sb.Write(sp); err != nil {
		t.Fatal(err)
	}
	symbolic, err := modelio.Open(sp)
	if err != nil {
		t.Fatal(err)
	}
	if o := ScanSession(symbolic, []int64{3, 16, 16}); !slices.Contains(o.Capture, sr) || len(o.Summarise) != 0 {
		t.Errorf("model of symbolic size: captures %v, summarises %v; want %s captured whole", o.Capture, o.Summarise, sr)
	}
}

// scanRead is one way a scan session reads the maps.
type scanRead struct {
	name string
	opt  infer.Options
}

// scanReads returns the two ways: every map captured whole, with the
// statistics in Go, and ScanSession's, which summarises in the graph the
// maps whose size the model fixes (all of them in the models these tests
// build, which the second entry checks).
func scanReads(t testing.TB, m *modelio.Model) []scanRead {
	t.Helper()
	graph := ScanSession(m, nil)
	if len(graph.Capture) > 0 || len(graph.Summarise) == 0 {
		t.Fatalf("%s: ScanSession captures %v whole and summarises %v", m.Name, graph.Capture, graph.Summarise)
	}
	return []scanRead{
		{"whole", infer.Options{Capture: append(ScanCapture(m), PreActivationCapture(m)...)}},
		{"summarised in the graph", graph},
	}
}

// sameUpToSums says where two scans of the same files differ, or "": every
// figure bit for bit except the means, which come from sums rounded
// differently when the maps are read whole (float32 over blocks of 256
// values, then float64) and summarised in the graph (the runtime's float32
// sum per map): within 1e-6 of the larger magnitude; the selectivity, a
// ratio of differences of means on a scale of -1 to 1, within 1e-6.
func sameUpToSums(a, b *ScanReport) string {
	near := func(x, y float64) bool {
		return x == y || math.Abs(x-y) <= 1e-6*max(math.Abs(x), math.Abs(y), 1e-30) || (math.IsNaN(x) && math.IsNaN(y))
	}
	if a.Images != b.Images || len(a.Layers) != len(b.Layers) || !slices.Equal(a.Classes, b.Classes) {
		return fmt.Sprintf("images %d/%d, %d/%d layers, classes %v/%v", a.Images, b.Images, len(a.Layers), len(b.Layers), a.Classes, b.Classes)
	}
	for i, la := range a.Layers {
		lb := b.Layers[i]
		if la.Name != lb.Name || la.MapH != lb.MapH || la.MapW != lb.MapW || len(la.Channels) != len(lb.Channels) {
			return fmt.Sprintf("layer %d: %s %d×%d / %s %d×%d", i, la.Name, la.MapH, la.MapW, lb.Name, lb.MapH, lb.MapW)
		}
		for j, ca := range la.Channels {
			cb := lb.Channels[j]
			same := ca.Fires == cb.Fires && math.Float64bits(ca.Max) == math.Float64bits(cb.Max) && near(ca.Mean, cb.Mean) &&
				slices.Equal(ca.Flags, cb.Flags) && slices.Equal(ca.Top, cb.Top) &&
				fmt.Sprint(ptr(ca.MaxPreActivation)) == fmt.Sprint(ptr(cb.MaxPreActivation)) && fmt.Sprint(ptr(ca.Bias)) == fmt.Sprint(ptr(cb.Bias)) &&
				len(ca.PerClass) == len(cb.PerClass) && ca.SelectiveFor == cb.SelectiveFor && math.Abs(ca.Selectivity-cb.Selectivity) <= 1e-6
			for k := 0; same && k < len(ca.PerClass); k++ {
				pa, pb := ca.PerClass[k], cb.PerClass[k]
				same = pa.Class == pb.Class && pa.Images == pb.Images && pa.Fires == pb.Fires && near(pa.Mean, pb.Mean)
			}
			if !same {
				return fmt.Sprintf("%s channel %d: %+v against %+v", la.Name, j, ca, cb)
			}
		}
	}
	return ""
}

// OpenScanSession falls back to reading the maps whole when the runtime
// refuses the graph with the summaries added. Refused here because a
// tensor of the model already has the name the first summary's Reshape
// would get (ONNX requires each name to be defined once: ONNX IR
// specification, "Names Within a Graph"); the scan still runs and finds the
// same flags as with the maps read whole.
func TestOpenScanSessionFallsBack(t *testing.T) {
	b := onnxbuild.New(13, onnxbuild.Random)
	x := b.Input("image", onnxbuild.Float, "N", 3, scanSide, scanSide)
	c := b.Conv(x, 3, 4, 3, 1, 1)
	b.Node("Relu", []string{c}, []string{"fovea.summary.0.Reshape"})
	b.Output(b.Flatten(b.GlobalAveragePool("fovea.summary.0.Reshape")))
	p := filepath.Join(t.TempDir(), "clash.onnx")
	if err := b.Write(p); err != nil {
		t.Fatal(err)
	}
	m, err := modelio.Open(p)
	if err != nil {
		t.Fatal(err)
	}
	whole := newSession(t, m, infer.Options{Capture: ScanCapture(m)}) // loads the runtime
	opt := ScanSession(m, nil)
	if len(opt.Summarise) == 0 {
		t.Fatalf("ScanSession summarises nothing: %+v", opt)
	}
	if _, err := infer.NewSession(m, opt); err == nil || !strings.Contains(err.Error(), "fovea.summary.0.Reshape") {
		t.Fatalf("the graph defining a name twice: %v; want the runtime to refuse it, naming it", err)
	}
	s, err := OpenScanSession(m, opt)
	if err != nil {
		t.Fatalf("OpenScanSession: %v", err)
	}
	defer s.Close()
	files := writeProbes(t, 4)
	r, err := Scan(context.Background(), s, m, scanConfig(), files, ScanOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	w, err := Scan(context.Background(), whole, m, scanConfig(), files, ScanOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if d := sameReport(w, r); d != "" {
		t.Errorf("fallback session against maps captured whole: %s", d)
	}
}
