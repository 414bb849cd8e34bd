package analysis

import (
	"context"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"fovea/modelio"
	"fovea/modelio/infer"
	"fovea/modelio/onnxbuild"
	"fovea/modelio/prep"
	"fovea/modelio/testkit"
)

// The planted network: 32×32 RGB input, read as bytes (0-255, no
// normalisation), so every value below is an exact integer in float32.
//
//	conv1 3→3, 3×3, stride 1, pad 1, then relu1:
//	  channel 0: all 27 weights 1, bias −6000: fires only where a 3×3
//	             square of all three colours brighter than 6000/27 ≈ 222
//	             fills the window (the "pattern")
//	  channel 1: 0.01 on the 9 weights of the red plane, bias −100: dead by
//	             its bias (9·255·0.01 − 100 < 0 on any image)
//	  channel 2: all weights 0, bias 0: dead by a zero kernel
//	conv2 3→2, 3×3, stride 2, pad 1, then relu2:
//	  channel 0: 1 at the centre of relu1's channel 0, bias 0: relu1's map
//	             sampled at every second cell
//	  channel 1: all weights 0, bias −1
const plantSide = 32

// plantedPattern is one planted square: its centre and brightness.
type plantedPattern struct {
	file   string
	cy, cx int
	level  uint8
}

func plantedModel(t *testing.T, dir string) *modelio.Model {
	b := onnxbuild.New(13, onnxbuild.Zeros)
	x := b.Input("image", onnxbuild.Float, "N", 3, plantSide, plantSide)
	w1 := make([]float32, 3*3*3*3)
	for i := range 27 {
		w1[i] = 1 // channel 0
	}
	for i := range 9 {
		w1[27+i] = 0.01 // channel 1, red plane
	}
	b.Init("conv1_w", []int64{3, 3, 3, 3}, w1)
	b.Init("conv1_b", []int64{3}, []float32{-6000, -100, 0})
	c1 := b.Op("Conv", []string{x, "conv1_w", "conv1_b"}, onnxbuild.Ints("kernel_shape", 3, 3),
		onnxbuild.Ints("strides", 1, 1), onnxbuild.Ints("pads", 1, 1, 1, 1))
	r1 := b.Relu(c1)
	w2 := make([]float32, 2*3*3*3)
	w2[4] = 1 // channel 0 ← input channel 0, centre tap
	b.Init("conv2_w", []int64{2, 3, 3, 3}, w2)
	b.Init("conv2_b", []int64{2}, []float32{0, -1})
	c2 := b.Op("Conv", []string{r1, "conv2_w", "conv2_b"}, onnxbuild.Ints("kernel_shape", 3, 3),
		onnxbuild.Ints("strides", 2, 2), onnxbuild.Ints("pads", 1, 1, 1, 1))
	r2 := b.Relu(c2)
	out := b.Flatten(b.GlobalAveragePool(r2))
	b.Output(out)
	path := filepath.Join(dir, "planted.onnx")
	if err := b.Write(path); err != nil {
		t.Fatal(err)
	}
	m, err := modelio.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// plantedProbes writes the probe images: noise of 0..40 everywhere (a
// window of 27 noise values sums to at most 1080, and a window half on a
// square at most 18·255 + 9·3·40 = 5670 < 6000), squares at known places in
// five of them, in two class folders. It returns the files, their classes
// and the planted squares.
func plantedProbes(t *testing.T, dir string) ([]string, map[string]string, []plantedPattern) {
	planted := []plantedPattern{
		{"marked/a.png", 10, 20, 255},
		{"marked/b.png", 30, 30, 240}, // by the bottom right corner: relu2's box is clipped
		{"marked/c.png", 2, 2, 230},
		{"marked/d.png", 16, 6, 225},
		{"plain/q.png", 8, 8, 250},
	}
	names := []string{"marked/a.png", "marked/b.png", "marked/c.png", "marked/d.png", "marked/e.png",
		"plain/m.png", "plain/n.png", "plain/o.png", "plain/p.png", "plain/q.png", "plain/r.png", "plain/s.png"}
	rng := rand.New(rand.NewPCG(7, 11))
	var files []string
	labels := map[string]string{}
	for _, n := range names {
		img := image.NewNRGBA(image.Rect(0, 0, plantSide, plantSide))
		for i := range img.Pix {
			img.Pix[i] = uint8(rng.IntN(41))
			if i%4 == 3 {
				img.Pix[i] = 255
			}
		}
		for _, p := range planted {
			if p.file == n {
				for y := p.cy - 1; y <= p.cy+1; y++ {
					for x := p.cx - 1; x <= p.cx+1; x++ {
						img.SetNRGBA(x, y, color.NRGBA{p.level, p.level, p.level, 255})
					}
				}
			}
		}
		path := filepath.Join(dir, filepath.FromSlash(n))
		if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
			t.Fatal(err)
		}
		f, err := os.Create(path)
		if err != nil {
			t.Fatal(err)
		}
		if err := png.Encode(f, img); err != nil {
			t.Fatal(err)
		}
		f.Close()
		files = append(files, path)
		labels[path] = filepath.Base(filepath.Dir(path))
	}
	for i := range planted {
		planted[i].file = filepath.Join(dir, filepath.FromSlash(planted[i].file))
	}
	return files, labels, planted
}

func plantedConfig() prep.Config {
	return prep.Config{Width: plantSide, Height: plantSide, Channels: 3, Resize: prep.ResizeStretch,
		Range: prep.RangeByte, Std: [3]float32{1, 1, 1}, Layout: modelio.LayoutNCHW}
}

// rfBox is the receptive field of cell i of a chain of convolutions by
// Araujo, Norris and Sim, "Computing Receptive Fields of Convolutional
// Neural Networks" (Distill, 2019), eqs. (1)-(3) of its single-path case:
// r = 1 + Σ (k_l − 1)·Π_{m<l} s_m, jump j = Π s_l, start
// u = −Σ p_l·Π_{m<l} s_m; cell i covers input pixels u + i·j … u + i·j + r − 1.
// It returns the half-open pixel range clipped to [0, size).
func rfBox(kernels, strides, pads []int, i, size int) (lo, hi int) {
	r, j, u := 1, 1, 0
	for l := range kernels {
		r += (kernels[l] - 1) * j
		u -= pads[l] * j
		j *= strides[l]
	}
	lo, hi = u+i*j, u+i*j+r
	return max(lo, 0), min(hi, size)
}

// directConv1 computes relu1's pre-activation and activation at every cell
// of one image by the definition of ONNX Conv (onnx/docs/Operators.md:
// cross-correlation, zero padding), without the runtime.
func directConv1(img *image.NRGBA, ch int) [plantSide][plantSide]float64 {
	var out [plantSide][plantSide]float64
	for y := range plantSide {
		for x := range plantSide {
			var s float64
			for dy := -1; dy <= 1; dy++ {
				for dx := -1; dx <= 1; dx++ {
					py, px := y+dy, x+dx
					if py < 0 || px < 0 || py >= plantSide || px >= plantSide {
						continue
					}
					c := img.NRGBAAt(px, py)
					switch ch {
					case 0:
						s += float64(c.R) + float64(c.G) + float64(c.B)
					case 1:
						s += 0.01 * float64(c.R)
					}
				}
			}
			out[y][x] = s + []float64{-6000, -100, 0}[ch]
		}
	}
	return out
}

func loadNRGBA(t *testing.T, path string) *image.NRGBA {
	img, err := prep.Load(path)
	if err != nil {
		t.Fatal(err)
	}
	return prep.Fit(img, plantedConfig())
}

func scanLayer(t *testing.T, r *ScanReport, name string) ScanLayer {
	for _, l := range r.Layers {
		if l.Name == name || l.Output == name {
			return l
		}
	}
	t.Fatalf("no layer %q in the scan", name)
	return ScanLayer{}
}

// TestStrongestPlanted: on the planted network, the strongest images of
// the pattern channel are exactly the planted ones, at the planted
// positions, with the receptive-field boxes of Araujo et al.'s formula
// (rfBox), in both layers; the dead channels read apart by bias and by
// zero kernel with the pre-activation maximum of a direct convolution; the
// per-class rates agree with a direct count. Every variation of batch
// size and decoding workers gives the same result, bit for bit.
func TestStrongestPlanted(t *testing.T) {
	testkit.NeedRuntime(t)
	dir := t.TempDir()
	m := plantedModel(t, dir)
	files, labels, planted := plantedProbes(t, dir)
	cfg := plantedConfig()
	opt := ScanSession(m, nil)
	if len(PreActivationCapture(m)) != 2 {
		t.Fatalf("pre-activation captures %v, want the inputs of both ReLUs", PreActivationCapture(m))
	}
	slices.SortStableFunc(planted, func(a, b plantedPattern) int { return -int(a.level) + int(b.level) })

	var ref *ScanReport
	for _, batch := range []int{1, 5, 16} {
		opt.Batch = batch
		s := newSession(t, m, opt)
		for _, workers := range []int{1, 3} {
			r, err := Scan(context.Background(), s, m, cfg, files, ScanOptions{Workers: workers, TopK: 5, Labels: labels}, nil)
			if err != nil {
				t.Fatal(err)
			}
			if ref == nil {
				ref = r
				continue
			}
			if d := sameExtras(ref, r); d != "" {
				t.Fatalf("batch %d, %d workers: %s", batch, workers, d)
			}
		}
	}

	// The same scan with the maps read whole (the session above summarises
	// them in the graph): the same report up to the rounding of the sums.
	whole, err := Scan(context.Background(), newSession(t, m, scanReads(t, m)[0].opt), m, cfg, files, ScanOptions{TopK: 5, Labels: labels}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if d := sameUpToSums(whole, ref); d != "" {
		t.Fatalf("maps read whole against summarised in the graph: %s", d)
	}

	// Strongest images of relu1 channel 0 and relu2 channel 0.
	for li, lay := range []struct {
		name    string
		k, s, p []int
		stride  int
	}{
		{name: "relu1", k: []int{3}, s: []int{1}, p: []int{1}, stride: 1},
		{name: "relu2", k: []int{3, 3}, s: []int{1, 2}, p: []int{1, 1}, stride: 2},
	} {
		l := ref.Layers[li]
		if l.Output != ScanCapture(m)[li] {
			t.Fatalf("layer %d is %s", li, l.Output)
		}
		top := l.Channels[0].Top
		if len(top) != len(planted) {
			t.Fatalf("%s channel 0: %d strongest images, want %d", lay.name, len(top), len(planted))
		}
		for i, p := range planted {
			got := top[i]
			y, x := p.cy/lay.stride, p.cx/lay.stride
			y0, y1 := rfBox(lay.k, lay.s, lay.p, y, plantSide)
			x0, x1 := rfBox(lay.k, lay.s, lay.p, x, plantSide)
			want := Patch{File: p.file, Value: 27*float64(p.level) - 6000, Y: y, X: x, Box: [4]int{x0, y0, x1, y1}}
			if got != want {
				t.Errorf("%s channel 0, strongest #%d: %+v, want %+v", lay.name, i+1, got, want)
			}
		}
	}
	// Spot check of the formula itself: relu2 cell 15 of 32 pixels sees
	// 28..32, clipped to 28..31 (r = 5, j = 2, u = −2).
	if lo, hi := rfBox([]int{3, 3}, []int{1, 2}, []int{1, 1}, 15, plantSide); lo != 28 || hi != 32 {
		t.Fatalf("rfBox: %d..%d", lo, hi)
	}

	// Why dead.
	l1 := ref.Layers[0].Channels
	var maxPre1 float64 = math.Inf(-1)
	for _, f := range files {
		mp := directConv1(loadNRGBA(t, f), 1)
		for _, row := range mp {
			for _, v := range row {
				maxPre1 = max(maxPre1, v)
			}
		}
	}
	for ch, want := range []struct {
		dead, zero bool
		bias, pre  float64
	}{
		{false, false, -6000, 27*255 - 6000},
		{true, false, -100, maxPre1},
		{true, true, 0, 0},
	} {
		c := l1[ch]
		if slices.Contains(c.Flags, modelio.FlagDead) != want.dead || slices.Contains(c.Flags, modelio.FlagZeroKernel) != want.zero {
			t.Errorf("relu1 channel %d flags %v", ch, c.Flags)
		}
		if c.Bias == nil || *c.Bias != want.bias {
			t.Errorf("relu1 channel %d bias %v, want %g", ch, c.Bias, want.bias)
		}
		if c.MaxPreActivation == nil || math.Abs(*c.MaxPreActivation-want.pre) > 1e-4*max(1, math.Abs(want.pre)) {
			t.Errorf("relu1 channel %d max pre-activation %v, want %g", ch, c.MaxPreActivation, want.pre)
		}
	}

	// Per-class rates of relu1 channel 0 against a direct count.
	type count struct {
		images, fires int
		mean          float64
	}
	direct := map[string]*count{}
	for _, f := range files {
		mp := directConv1(loadNRGBA(t, f), 0)
		c := direct[labels[f]]
		if c == nil {
			c = &count{}
			direct[labels[f]] = c
		}
		c.images++
		fired, sum := false, 0.0
		for _, row := range mp {
			for _, v := range row {
				if v > 0 {
					fired = true
					sum += v
				}
			}
		}
		if fired {
			c.fires++
		}
		c.mean += sum / (plantSide * plantSide)
	}
	if !slices.Equal(ref.Classes, []string{"marked", "plain"}) {
		t.Fatalf("classes %v", ref.Classes)
	}
	for _, r := range l1[0].PerClass {
		d := direct[r.Class]
		if r.Images != d.images || r.Fires != float64(d.fires)/float64(d.images) ||
			math.Abs(r.Mean-d.mean/float64(d.images)) > 1e-9*max(1, d.mean) {
			t.Errorf("class %s: %+v, direct count %d images, %d fired, mean %g", r.Class, r, d.images, d.fires, d.mean/float64(d.images))
		}
	}
	// Selectivity, Morcos et al. 2018: (μmax − μrest)/(μmax + μrest), two classes.
	mk, pl := direct["marked"].mean/5, direct["plain"].mean/7
	if want := (mk - pl) / (mk + pl); l1[0].SelectiveFor != "marked" || math.Abs(l1[0].Selectivity-want) > 1e-9 {
		t.Errorf("selectivity %s %g, want marked %g", l1[0].SelectiveFor, l1[0].Selectivity, want)
	}
}

// sameExtras says where two scans differ in the strongest images, class
// rates or pre-activation maxima, or "".
func sameExtras(a, b *ScanReport) string {
	if d := sameReport(a, b); d != "" {
		return d
	}
	for i, la := range a.Layers {
		for j, ca := range la.Channels {
			cb := b.Layers[i].Channels[j]
			if !slices.Equal(ca.Top, cb.Top) || !slices.Equal(ca.PerClass, cb.PerClass) ||
				fmt.Sprint(ptr(ca.MaxPreActivation)) != fmt.Sprint(ptr(cb.MaxPreActivation)) {
				return fmt.Sprintf("%s channel %d: %+v against %+v", la.Name, j, ca, cb)
			}
		}
	}
	return ""
}

func ptr(p *float64) any {
	if p == nil {
		return nil
	}
	return math.Float64bits(*p)
}

// TestTopHeapTies: equal values are kept and ordered by file name whatever
// the order they come in (common practice: a deterministic tie-break).
func TestTopHeapTies(t *testing.T) {
	names := []string{"e", "b", "a", "d", "c", "f"}
	for _, order := range [][]int{{0, 1, 2, 3, 4, 5}, {5, 4, 3, 2, 1, 0}, {2, 0, 4, 1, 5, 3}} {
		var h topHeap
		for _, i := range order {
			if h.wants(3, 1, names[i]) {
				h.push(3, topEntry{value: 1, file: names[i]})
			}
		}
		var got []string
		for _, e := range h.sorted() {
			got = append(got, e.file)
		}
		if !slices.Equal(got, []string{"a", "b", "c"}) {
			t.Fatalf("order %v: kept %v", order, got)
		}
	}
}

// TestPreActivationKeepsOutputs: a scan session capturing the activations'
// inputs returns the model's outputs bit for bit as a plain session does
// (the project's exact-outputs rule; modelio.CaptureEffect), on the demo
// classifier (Conv → BatchNormalization → Relu) and a ResNet-18-shaped
// network (residual Add → Relu).
func TestPreActivationKeepsOutputs(t *testing.T) {
	testkit.NeedRuntime(t)
	var models []*modelio.Model
	if m, err := modelio.Open(filepath.Join(demoDir(), "parts.onnx")); err == nil {
		models = append(models, m)
	} else {
		t.Fatalf("the demo model is needed (assets/make_demo.py): %v", err)
	}
	b := onnxbuild.New(13, onnxbuild.Random)
	x := b.Input("image", onnxbuild.Float, "N", 3, 32, 32)
	x = b.Relu(b.BatchNorm(b.Conv(x, 3, 8, 3, 1, 1), 8))
	y := b.Relu(b.BatchNorm(b.Conv(x, 8, 8, 3, 1, 1), 8))
	y = b.BatchNorm(b.Conv(y, 8, 8, 3, 1, 1), 8)
	x = b.Relu(b.Add(x, y))
	b.Output(b.Gemm(b.Flatten(b.GlobalAveragePool(x)), 8, 4))
	p := filepath.Join(t.TempDir(), "res.onnx")
	if err := b.Write(p); err != nil {
		t.Fatal(err)
	}
	m, err := modelio.Open(p)
	if err != nil {
		t.Fatal(err)
	}
	models = append(models, m)
	for _, m := range models {
		pre := PreActivationCapture(m)
		if len(pre) != len(m.ReluLayers()) {
			t.Errorf("%s: %d of %d activation inputs captured: %v", m.Name, len(pre), len(m.ReluLayers()), pre)
		}
		plain := newSession(t, m, infer.Options{Batch: 2})
		// Both ways a scan session reads them: whole, and summarised in
		// the graph (ScanSession).
		for _, how := range scanReads(t, m) {
			how.opt.Batch = 2
			scan := newSession(t, m, how.opt)
			dims, err := plain.ImageDims()
			if err != nil {
				t.Fatal(err)
			}
			per := 1
			for _, d := range dims {
				per *= int(d)
			}
			rng := rand.New(rand.NewPCG(3, 5))
			in := make([]float32, 2*per)
			for i := range in {
				in[i] = rng.Float32()
			}
			want, err := plain.Run(context.Background(), in, 2)
			if err != nil {
				t.Fatal(err)
			}
			got, err := scan.Run(context.Background(), in, 2)
			if err != nil {
				t.Fatal(err)
			}
			for i, v := range want.Outputs[0].Data {
				if math.Float32bits(v) != math.Float32bits(got.Outputs[0].Data[i]) {
					t.Fatalf("%s: output %d is %g with the pre-activations read %s, %g in a plain run", m.Name, i, got.Outputs[0].Data[i], how.name, v)
				}
			}
		}
	}
}
