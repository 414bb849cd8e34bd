package modelio

import (
	"testing"

	"fovea/modelio/onnxbuild"
)

// TestMACsPerOperator checks the multiply-accumulates of one image, layer by
// layer, for every operator kind the table counts, on cases small enough to
// work out by hand. The formulas, and where they come from:
//
//   - Conv: Hout·Wout·Cout·(Cin/g)·kH·kW: each output value is a dot product
//     of (Cin/g)·kH·kW weights with the input (ONNX Operators.md, Conv: "group"
//     splits input and output channels into g independent convolutions;
//     Krizhevsky, Sutskever & Hinton 2012 and Xie et al. 2017 (ResNeXt),
//     grouped convolution costs 1/g of the dense one).
//   - Depthwise and pointwise convolution: Howard et al. 2017 (MobileNets),
//     eq. 5: DK·DK·M·DF·DF for the depthwise part and M·N·DF·DF for the 1×1
//     pointwise part.
//   - ConvTranspose: Cin·(Cout/g)·kH·kW·Hin·Win: every input value is
//     multiplied by each weight of its group's kernel once and scattered
//     (Dumoulin & Visin 2016, "A guide to convolution arithmetic", §4: the
//     transposed convolution is the backward pass of the convolution it
//     transposes, which has the same cost).
//   - Gemm and MatMul: an M×K by K×N product takes M·K·N multiply-adds
//     (Golub & Van Loan, Matrix Computations, §1.1: 2mnk flops); per image,
//     M is the rows belonging to one image.
//   - Pooling, activations, Flatten: 0 (README, "pooling and activations count
//     0": they multiply by no weight; common practice).
func TestMACsPerOperator(t *testing.T) {
	b := onnxbuild.New(13, onnxbuild.Zeros)
	x := b.Input("image", onnxbuild.Float, 1, 8, 6, 6)
	// Grouped: 8 → 12 channels, 4 groups, 3×3, pad 1: 6·6·12·(8/4)·3·3.
	grouped := b.ConvWith(x, onnxbuild.ConvSpec{In: 8, Out: 12, K: 3, Pad: 1, Group: 4})
	// Depthwise 3×3 over 12 channels (M = 12, DK = 3, DF = 6): 3·3·12·6·6.
	depth := b.ConvWith(grouped, onnxbuild.ConvSpec{In: 12, Out: 12, K: 3, Pad: 1, Group: 12})
	// Pointwise 12 → 16 (N = 16): 12·16·6·6.
	point := b.ConvWith(depth, onnxbuild.ConvSpec{In: 12, Out: 16, K: 1})
	// Strided, non-square kernel, no padding: out (6−3)/2+1 = 2 by (6−1)/2+1 = 3;
	// 2·3·4·16·3·1.
	strided := b.ConvWith(point, onnxbuild.ConvSpec{In: 16, Out: 4, KH: 3, KW: 1, StrideH: 2, StrideW: 2})
	// ConvTranspose 4 → 6 channels, 3×3, stride 2 on the 2×3 map: weights
	// [4, 6, 3, 3]; 4·6·3·3·2·3. Output (2−1)·2+3 = 5 by (3−1)·2+3 = 7
	// (ONNX Operators.md, ConvTranspose output_shape formula).
	tw := b.Weight("tconv_w", 4, 6, 3, 3)
	b.Node("ConvTranspose", []string{strided, tw}, []string{"tconv"},
		onnxbuild.Ints("kernel_shape", 3, 3), onnxbuild.Ints("strides", 2, 2))
	// Grouped ConvTranspose: 6 → 4 channels in 2 groups, weights [6, 2, 1, 1]
	// on 5×7: 6·2·1·1·5·7.
	gtw := b.Weight("gtconv_w", 6, 2, 1, 1)
	b.Node("ConvTranspose", []string{"tconv", gtw}, []string{"gtconv"},
		onnxbuild.Ints("kernel_shape", 1, 1), onnxbuild.Int("group", 2))
	maxp := b.MaxPool("gtconv", 2, 1, 0) // 4×4×6 → 0
	avgp := b.AveragePool(maxp, 2, 1, 0) // 3×5 → 0
	gap := b.GlobalAveragePool(avgp)     // 0
	flat := b.Flatten(gap)               // [1, 4]
	fc := b.Gemm(flat, 4, 7)             // 1·4·7
	shaped := b.Op("Reshape", []string{fc, b.Ints64("to_seq", 1, 7, 1)})
	mm := b.Op("MatMul", []string{shaped, b.Weight("mm_w", 1, 5)}) // [1,7,1]·[1,5]: 7·1·5
	mm2 := b.Op("MatMul", []string{mm, b.Weight("mm2_w", 5, 3)})   // [1,7,5]·[5,3]: 7·5·3
	b.Output(mm2)
	m := build(t, b)

	cases := []struct {
		out  string
		want int64
		why  string
	}{
		{grouped, 6 * 6 * 12 * 2 * 3 * 3, "grouped conv Hout·Wout·Cout·(Cin/g)·kH·kW"},
		{depth, 3 * 3 * 12 * 6 * 6, "depthwise DK·DK·M·DF·DF (MobileNets eq. 5)"},
		{point, 12 * 16 * 6 * 6, "pointwise M·N·DF·DF (MobileNets eq. 5)"},
		{strided, 2 * 3 * 4 * 16 * 3 * 1, "strided 3×1 conv"},
		{"tconv", 4 * 6 * 3 * 3 * 2 * 3, "ConvTranspose Cin·Cout·kH·kW·Hin·Win"},
		{"gtconv", 6 * 2 * 1 * 1 * 5 * 7, "grouped ConvTranspose Cin·(Cout/g)·kH·kW·Hin·Win"},
		{maxp, 0, "MaxPool"},
		{avgp, 0, "AveragePool"},
		{gap, 0, "GlobalAveragePool"},
		{flat, 0, "Flatten"},
		{fc, 1 * 4 * 7, "Gemm M·K·N"},
		{mm, 7 * 1 * 5, "MatMul M·K·N"},
		{mm2, 7 * 5 * 3, "MatMul M·K·N"},
	}
	var sum int64
	for _, c := range cases {
		l := layerOf(t, m, c.out)
		if l.MACs != c.want {
			t.Errorf("%s (%s, shape %s): MACs %d, want %d (%s)", c.out, l.Op, l.Shape, l.MACs, c.want, c.why)
		}
		sum += c.want
	}
	// Shapes the MAC counts rest on, from the ONNX output-size formulas.
	for out, want := range map[string]string{strided: "1×4×2×3", "tconv": "1×6×5×7", "gtconv": "1×4×5×7", mm2: "1×7×3"} {
		if l := layerOf(t, m, out); l.Shape.String() != want {
			t.Errorf("%s: shape %s, want %s", out, l.Shape, want)
		}
	}
	if m.Total.MACs != sum {
		t.Errorf("total MACs %d, want the sum of the layers %d", m.Total.MACs, sum)
	}
}

// MACs are per image: a batch of 3 in a fixed batch dimension counts what one
// image costs (README, layer table: "multiply-accumulates for one image").
// Gemm on [3, 20] → [3, 7]: 20·7 per image, not 3·20·7; Conv likewise.
func TestMACsPerImageWithBatch(t *testing.T) {
	b := onnxbuild.New(13, onnxbuild.Zeros)
	x := b.Input("image", onnxbuild.Float, 3, 2, 4, 4)
	c := b.Conv(x, 2, 5, 3, 1, 1) // 4·4·5·2·3·3 = 1440 per image
	fc := b.Gemm(b.Flatten(c), 80, 7)
	b.Output(fc)
	m := build(t, b)
	if l := layerOf(t, m, c); l.MACs != 1440 {
		t.Errorf("conv MACs %d, want 1440 (one image)", l.MACs)
	}
	if l := layerOf(t, m, fc); l.MACs != 80*7 {
		t.Errorf("Gemm MACs %d, want %d (one image)", l.MACs, 80*7)
	}
}
