package onnxbuild

// A reference network and a candidate made from it with known changes, for
// the tests of the model comparison: every difference the comparison should
// find is planted here, and nothing else differs.
//
//	image [N,3,8,8] -> conv1 (3->6, 3×3, pads 1) -> relu1 -> GlobalAveragePool
//	                -> Flatten -> fc (Gemm 6->2, transB) -> scores [N,2]
//
// conv1's filters in A (weights on the centre tap only unless said; inputs in 0..1):
//
//	0: +1 on red, −1 on green, bias 0     B: negated (−1 red, +1 green)
//	1: +1 on blue, bias 0                 B: scaled by PairScale
//	2: +1 on red, bias 0                  B: bias −10: never fires (killed)
//	3: +1 on green, bias 0                B: bias −10: never fires (killed)
//	4: +0.5 on red, bias 0                B: the same
//	5: 0.1 on every weight, bias 0        B: the same
//
// fc reads only channel 4: score 0 = mean(relu1[4]) − t, score 1 = 0, so
// class 0 wins when the mean red value exceeds 4t. A has t = PairThresholdA,
// B t = PairThresholdB (the classifier perturbed): images whose mean red
// lies between 4·PairThresholdB and 4·PairThresholdA flip from class 1 to 0.
//
// On PairImage pictures (left half red, right half green, blue 0.5
// everywhere) filters 0 (A and B), 1, 2, 3 fire on every image in A; in B
// channels 2 and 3 fire on none and all others as in A.

// Planted values of the pair.
const (
	PairScale      = 2.0
	PairThresholdA = 0.15 // class 0 when mean red > 0.6
	PairThresholdB = 0.10 // class 0 when mean red > 0.4
)

// PairKilled are the channels of conv1 killed in B by their bias.
var PairKilled = []int{2, 3}

// Pair returns the serialised reference (A) and candidate (B) models.
func Pair() (a, b []byte, err error) {
	if a, err = pairModel(false); err != nil {
		return nil, nil, err
	}
	b, err = pairModel(true)
	return a, b, err
}

func pairModel(candidate bool) ([]byte, error) {
	bl := New(13, Zeros)
	x := bl.Input("image", Float, "N", 3, 8, 8)
	w := make([]float32, 6*3*3*3)
	at := func(m, c int) int { return ((m*3+c)*3+1)*3 + 1 } // centre tap
	w[at(0, 0)], w[at(0, 1)] = 1, -1
	w[at(1, 2)] = 1
	w[at(2, 0)] = 1
	w[at(3, 1)] = 1
	w[at(4, 0)] = 0.5
	for i := 5 * 27; i < 6*27; i++ {
		w[i] = 0.1
	}
	bias := make([]float32, 6)
	t := float32(PairThresholdA)
	if candidate {
		w[at(0, 0)], w[at(0, 1)] = -1, 1
		w[at(1, 2)] = PairScale
		for _, k := range PairKilled {
			bias[k] = -10
		}
		t = PairThresholdB
	}
	bl.Init("conv1_w", []int64{6, 3, 3, 3}, w)
	bl.Init("conv1_b", []int64{6}, bias)
	bl.Node("Conv", []string{x, "conv1_w", "conv1_b"}, []string{"conv1"},
		Ints("kernel_shape", 3, 3), Ints("pads", 1, 1, 1, 1))
	bl.Node("Relu", []string{"conv1"}, []string{"relu1"})
	bl.Node("GlobalAveragePool", []string{"relu1"}, []string{"gap"})
	bl.Node("Flatten", []string{"gap"}, []string{"flat"}, Int("axis", 1))
	fw := make([]float32, 2*6)
	fw[4] = 1
	bl.Init("fc_w", []int64{2, 6}, fw)
	bl.Init("fc_b", []int64{2}, []float32{-t, 0})
	bl.Node("Gemm", []string{"flat", "fc_w", "fc_b"}, []string{"scores"}, Int("transB", 1))
	bl.Output("scores", "N", 2)
	return bl.Bytes()
}

// PairRed are the red values (0..255, left half) of the pair's test images
// and PairTruth their true classes: image i is right under A and wrong under
// B when PairFlip[i] is "worse", the reverse for "better", the same
// otherwise.
var (
	PairRed   = []uint8{51, 115, 128, 140, 204, 230}
	PairTruth = []int{1, 1, 1, 0, 0, 0}
	PairFlip  = []string{"", "worse", "worse", "better", "", ""}
)

// PairImage returns the 8×8 picture with red value red in its left half,
// green 200 in its right half and blue 128 everywhere, as RGBA bytes.
func PairImage(red uint8) (pix []uint8, w, h int) {
	const side = 8
	pix = make([]uint8, side*side*4)
	for y := range side {
		for x := range side {
			o := (y*side + x) * 4
			if x < side/2 {
				pix[o] = red
			} else {
				pix[o+1] = 200
			}
			pix[o+2] = 128
			pix[o+3] = 255
		}
	}
	return pix, side, side
}
