package modelio

import (
	"testing"

	"fovea/modelio/onnxbuild"
)

// TestOutputSizeRule checks the output-size rule (W − F + 2P)/S + 1
// (common practice).
func TestOutputSizeRule(t *testing.T) {
	b := onnxbuild.New(13, onnxbuild.Zeros)
	x := b.Input("image", onnxbuild.Float, 1, 3, 32, 32)
	c := b.Conv(x, 3, 6, 5, 1, 0)
	p := b.MaxPool(c, 2, 2, 0)
	b.Output(p)
	m := build(t, b)
	conv, pool := layerOf(t, m, c), layerOf(t, m, p)
	// (32 − 5 + 0)/1 + 1 = 28 (common practice).
	if conv.Width != 28 || conv.Height != 28 || conv.Depth != 6 {
		t.Errorf("conv volume %s, want 28×28×6", conv.WHD())
	}
	// 2×2 max pooling, stride 2: (28 − 2)/2 + 1 = 14 halves W and H and
	// keeps 25 % of the activations (common practice).
	if pool.Width != 14 || pool.Height != 14 || pool.Depth != 6 {
		t.Errorf("pool volume %s, want 14×14×6", pool.WHD())
	}
	if got := float64(pool.Bytes) / float64(conv.Bytes); got != 0.25 {
		t.Errorf("pool keeps %.3f of the activations, want 0.25", got)
	}
	if conv.ShapeSource != SourceStatic || conv.Shape.String() != "1×6×28×28" {
		t.Errorf("conv shape %s (%s)", conv.Shape, conv.ShapeSource)
	}
}

// TestAlexNetFirstLayer: 96 filters of 11×11×3, stride 4, on 227×227×3
// give 55×55×96 (Krizhevsky, Sutskever & Hinton 2012; the 227 input size
// is the one that makes the paper's arithmetic work, common practice).
func TestAlexNetFirstLayer(t *testing.T) {
	b := onnxbuild.New(13, onnxbuild.ArchitectureOnly)
	x := b.Input("image", onnxbuild.Float, "N", 3, 227, 227)
	c := b.Conv(x, 3, 96, 11, 4, 0)
	b.Output(c)
	m := build(t, b)
	l := layerOf(t, m, c)
	if l.WHD() != "55×55×96" {
		t.Errorf("volume %s, want 55×55×96", l.WHD())
	}
	// 96·3·11·11 + 96 = 34,944 parameters (hand-computed).
	if l.Params != 34944 {
		t.Errorf("params %d, want 34944", l.Params)
	}
	// 55·55·96·3·11·11 = 105,415,200 multiply-accumulates (hand-computed).
	if l.MACs != 105415200 {
		t.Errorf("MACs %d, want 105415200", l.MACs)
	}
	if l.RF != 11 || l.Jump != 4 {
		t.Errorf("RF %d jump %d, want 11 and 4", l.RF, l.Jump)
	}
	if l.Shape.String() != "N×96×55×55" {
		t.Errorf("shape %s, want N×96×55×55 (symbolic batch kept)", l.Shape)
	}
}

// TestVGG16 builds configuration D of Simonyan & Zisserman (2015) from its
// published table, architecture only.
func TestVGG16(t *testing.T) {
	b := onnxbuild.New(13, onnxbuild.ArchitectureOnly)
	x := b.Input("image", onnxbuild.Float, "N", 3, 224, 224)
	in := 3
	var convs, pools []string
	for _, block := range [][]int{{64, 64}, {128, 128}, {256, 256, 256}, {512, 512, 512}, {512, 512, 512}} {
		for _, c := range block {
			x = b.Conv(x, in, c, 3, 1, 1) // 3×3, stride 1, padding 1 (paper, Sect. 2.1)
			convs = append(convs, x)
			x = b.Relu(x)
			in = c
		}
		x = b.MaxPool(x, 2, 2, 0) // 2×2, stride 2 (paper, Sect. 2.1)
		pools = append(pools, x)
	}
	x = b.Flatten(x)
	x = b.Relu(b.Gemm(x, 512*7*7, 4096))
	x = b.Relu(b.Gemm(x, 4096, 4096))
	b.Output(b.Softmax(b.Gemm(x, 4096, 1000)))
	m := build(t, b)

	// 138,357,544 parameters: the commonly published exact count of VGG-16
	// (the paper's Table 2 rounds to 138 M).
	if m.Total.Params != 138357544 {
		t.Errorf("params %d, want 138357544", m.Total.Params)
	}
	// About 15.5 G multiply-accumulates (commonly published; ±0.1 G).
	if m.Total.MACs < 15.4e9 || m.Total.MACs > 15.6e9 {
		t.Errorf("MACs %d, want about 15.5 G", m.Total.MACs)
	}
	if got := layerOf(t, m, convs[0]).WHD(); got != "224×224×64" {
		t.Errorf("first conv %s, want 224×224×64", got)
	}
	last := layerOf(t, m, pools[4])
	if last.WHD() != "7×7×512" {
		t.Errorf("last pool %s, want 7×7×512", last.WHD())
	}
	// Receptive field 212 at the last pooling layer (Araujo, Norris & Sim,
	// Distill 2019, table of receptive fields: VGG-16 212).
	if last.RF != 212 || last.Jump != 32 {
		t.Errorf("last pool RF %d jump %d, want 212 and 32", last.RF, last.Jump)
	}
	// Centre of cell (0, 0) by hand, pixel k centred at k. Every 3×3 conv
	// pads 1, so it moves the start u back by its input's jump j and adds
	// 2j to the receptive field: the centre u + (r−1)/2 stays. Each 2×2
	// stride-2 pool pads nothing, keeps u and adds j to r: the centre moves
	// by j/2. After the pools (j = 1, 2, 4, 8, 16 before them) the centre
	// is 0.5, 1.5, 3.5, 7.5, 15.5. By the start recurrence (Araujo, Norris
	// & Sim, Distill 2019): u = −(2·1 + 2·2 + 3·4 + 3·8 + 3·16) = −90, and
	// −90 + (212 − 1)/2 = 15.5, the middle of the first 32×32 block
	// ((32 − 1)/2), as expected of a symmetric network on 224 = 7·32.
	for k, want := range []float64{0.5, 1.5, 3.5, 7.5, 15.5} {
		l := layerOf(t, m, pools[k])
		if !l.HasCenter || l.CenterY != want || l.CenterX != want {
			t.Errorf("pool %d: centre (%v, %v) known %v, want %v", k+1, l.CenterY, l.CenterX, l.HasCenter, want)
		}
	}
	for k, want := range []float64{0, 0, 0.5, 0.5, 1.5, 1.5, 1.5, 3.5, 3.5, 3.5, 7.5, 7.5, 7.5} {
		if l := layerOf(t, m, convs[k]); !l.HasCenter || l.CenterY != want || l.CenterX != want {
			t.Errorf("conv %d: centre (%v, %v), want %v (that of the pool before it)", k+1, l.CenterY, l.CenterX, want)
		}
	}
	if len(m.Notes) == 0 || m.Image == nil || m.Image.Name != "image" {
		t.Errorf("image %+v notes %q", m.Image, m.Notes)
	}
	for _, l := range m.Layers {
		if l.ShapeSource != SourceStatic {
			t.Errorf("layer %s: %s (%s)", l.Name, l.ShapeSource, l.Note)
		}
	}
	// The reusable builder of the benchmarks gives the same network.
	m2 := build(t, onnxbuild.VGG16(onnxbuild.ArchitectureOnly, "N", 1000))
	if m2.Total != m.Total {
		t.Errorf("onnxbuild.VGG16 totals %+v, test's %+v", m2.Total, m.Total)
	}
}

// TestResNet18 checks the parameter count convention for batch
// normalisation (2·C trainable): 11,689,512 parameters is the commonly
// published count of ResNet-18 (He et al. 2016, in its PyTorch form), which
// counts BN scale and shift but not the running statistics. About 1.8 G
// multiply-accumulates (commonly published as 1.8 GFLOPs).
func TestResNet18(t *testing.T) {
	m := build(t, onnxbuild.ResNet18(onnxbuild.ArchitectureOnly, 1, 1000))
	if m.Total.Params != 11689512 {
		t.Errorf("params %d, want 11689512", m.Total.Params)
	}
	if m.Total.MACs < 1.75e9 || m.Total.MACs > 1.9e9 {
		t.Errorf("MACs %d, want about 1.8 G", m.Total.MACs)
	}
	for _, l := range m.Layers {
		if l.ShapeSource != SourceStatic {
			t.Errorf("layer %s: %s (%s)", l.Name, l.ShapeSource, l.Note)
		}
	}
	// Receptive field of the last residual stage, by hand from He et al.
	// Table 1 and the recurrence: conv1 7/2 → 7 (jump 2); max pool 3/2 →
	// 11 (4); stage 1, four 3×3 → 43; stage 2, 3×3/2 → 51 (8), three 3×3
	// → 99; stage 3 → 115 (16) → 211; stage 4 → 243 (32) → 435.
	last := m.Layers[len(m.Layers)-4] // the Relu before global pooling
	if last.Op != "Relu" || last.RF != 435 || last.Jump != 32 {
		t.Errorf("last stage %s %s: RF %d jump %d, want 435 and 32", last.Name, last.Op, last.RF, last.Jump)
	}
	// Centre of cell (0, 0), by hand: conv1 7×7/2 pad 3 covers pixels
	// −3..3, centre 0; the 3×3/2 pool pad 1 covers conv1 cells −1..1,
	// centred at −2, 0, 2: 0. A 3×3 pad-1 conv centres its cell 0 on its
	// input's cell 0 and a 1×1 pad-0 conv too, whatever the stride, so
	// every layer, both branches of every Add included, is centred at 0:
	// u = −(r − 1)/2, −217 at the last stage.
	for _, l := range m.Layers {
		if l.RF > 0 && (!l.HasCenter || l.CenterY != 0 || l.CenterX != 0) {
			t.Errorf("layer %s %s: centre (%v, %v) known %v, want 0", l.Name, l.Op, l.CenterY, l.CenterX, l.HasCenter)
		}
	}
}

// TestReceptiveFieldDilation checks the recurrence r_l = r_(l-1) +
// (k_l − 1)·d_l·j_(l-1), j_l = j_(l-1)·s_l (Araujo, Norris & Sim, Distill
// 2019) against values computed by hand: a 3×3 kernel with dilation 2
// spans 5 pixels.
func TestReceptiveFieldDilation(t *testing.T) {
	b := onnxbuild.New(13, onnxbuild.Zeros)
	x := b.Input("image", onnxbuild.Float, 1, 3, 64, 64)
	c1 := b.Conv(x, 3, 4, 3, 1, 1)
	c2 := b.ConvWith(c1, onnxbuild.ConvSpec{In: 4, Out: 4, K: 3, Stride: 1, Pad: 2, Dilation: 2})
	r := b.Relu(c2)
	p := b.MaxPool(r, 2, 2, 0)
	c3 := b.ConvWith(p, onnxbuild.ConvSpec{In: 4, Out: 4, K: 3, Stride: 2, Pad: 2, Dilation: 2})
	s := b.Add(c3, c3)
	g := b.GlobalAveragePool(s)
	b.Output(g)
	m := build(t, b)
	for _, tc := range []struct {
		out      string
		rf, jump int
		wh       string
	}{
		{c1, 3, 1, "64×64×4"},  // 1 + 2·1·1
		{c2, 7, 1, "64×64×4"},  // 3 + 2·2·1; (64 + 4 − 5)/1 + 1 = 64
		{r, 7, 1, "64×64×4"},   // elementwise: unchanged
		{p, 8, 2, "32×32×4"},   // 7 + 1·1·1, jump 2
		{c3, 16, 4, "16×16×4"}, // 8 + 2·2·2, jump 4; (32 + 4 − 5)/2 + 1 = 16
		{s, 16, 4, "16×16×4"},  // merge: the larger receptive field
		{g, 0, 0, "1×1×4"},     // global pooling: whole image, n/a
	} {
		l := layerOf(t, m, tc.out)
		if l.RF != tc.rf || l.Jump != tc.jump || l.WHD() != tc.wh {
			t.Errorf("%s: RF %d jump %d volume %s, want %d %d %s", l.Name, l.RF, l.Jump, l.WHD(), tc.rf, tc.jump, tc.wh)
		}
	}
}

// TestNonSquareReceptiveField: kernel 7×3 with strides 2×1 give different
// receptive fields per axis; the larger is reported and the note gives both
// (hand-computed: 1 + 6 = 7 and 1 + 2 = 3).
func TestNonSquareReceptiveField(t *testing.T) {
	b := onnxbuild.New(13, onnxbuild.Zeros)
	x := b.Input("image", onnxbuild.Float, 1, 1, 20, 20)
	c := b.ConvWith(x, onnxbuild.ConvSpec{In: 1, Out: 2, KH: 7, KW: 3, StrideH: 2, StrideW: 1})
	b.Output(c)
	m := build(t, b)
	l := layerOf(t, m, c)
	if l.RF != 7 || l.Jump != 2 || l.WHD() != "18×7×2" {
		t.Errorf("RF %d jump %d volume %s, want 7, 2, 18×7×2", l.RF, l.Jump, l.WHD())
	}
	if l.Note != "receptive field 7×3 (height×width)" {
		t.Errorf("note %q", l.Note)
	}
	// Per axis, no padding: rows 0..6 (centre 3), columns 0..2 (centre 1).
	if l.RFY != 7 || l.RFX != 3 || l.JumpY != 2 || l.JumpX != 1 || !l.HasCenter || l.CenterY != 3 || l.CenterX != 1 {
		t.Errorf("per axis: RF %d×%d jump %d×%d centre (%v, %v) known %v, want 7×3, 2×1, (3, 1)",
			l.RFY, l.RFX, l.JumpY, l.JumpX, l.CenterY, l.CenterX, l.HasCenter)
	}
}
