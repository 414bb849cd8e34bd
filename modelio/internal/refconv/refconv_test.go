package refconv

import (
	"math"
	"slices"
	"testing"
)

func seq(n int) []float32 {
	v := make([]float32, n)
	for i := range v {
		v[i] = float32(i)
	}
	return v
}

func ones(n int) []float32 {
	v := make([]float32, n)
	for i := range v {
		v[i] = 1
	}
	return v
}

// Hand-checkable cases. The 5×5 ramp with a 3×3 all-ones kernel is the
// example in ONNX Operators.md, Conv ("conv with padding" / "without
// padding" / "with strides"); the expected values are the ones printed
// there and can be re-added by hand (each output is the sum of a 3×3 block
// of the ramp 0..24).
func TestConvOperatorsExamples(t *testing.T) {
	x := Tensor{Shape: []int64{1, 1, 5, 5}, Data: seq(25)}
	w := Tensor{Shape: []int64{1, 1, 3, 3}, Data: ones(9)}
	cases := []struct {
		name  string
		win   Window
		shape []int64
		want  []float32
	}{
		{"with padding (Operators.md)", Window{Kernel: []int64{3, 3}, Pads: []int64{1, 1, 1, 1}}, []int64{1, 1, 5, 5},
			[]float32{12, 21, 27, 33, 24, 33, 54, 63, 72, 51, 63, 99, 108, 117, 81, 93, 144, 153, 162, 111, 72, 111, 117, 123, 84}},
		{"without padding (Operators.md)", Window{Kernel: []int64{3, 3}}, []int64{1, 1, 3, 3},
			[]float32{54, 63, 72, 99, 108, 117, 144, 153, 162}},
		{"strides 2, padding 1 (Operators.md)", Window{Kernel: []int64{3, 3}, Pads: []int64{1, 1, 1, 1}, Strides: []int64{2, 2}}, []int64{1, 1, 3, 3},
			[]float32{12, 27, 24, 63, 108, 81, 72, 117, 84}},
		{"strides 2, no padding (Operators.md)", Window{Kernel: []int64{3, 3}, Strides: []int64{2, 2}}, []int64{1, 1, 2, 2},
			[]float32{54, 72, 144, 162}},
		// dilation 2: the taps are x[0,0],x[0,2],x[0,4],x[2,0],...,x[4,4]
		// = 0+2+4+10+12+14+20+22+24 = 108 (by hand).
		{"dilation 2 (by hand)", Window{Kernel: []int64{3, 3}, Dilations: []int64{2, 2}}, []int64{1, 1, 1, 1}, []float32{108}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			y := Conv(x, w, Tensor{}, c.win, 1)
			if !slices.Equal(y.Shape, c.shape) || !slices.Equal(y.Data, c.want) {
				t.Errorf("%s: got %v %v, want %v %v", c.name, y.Shape, y.Data, c.shape, c.want)
			}
		})
	}
}

// Groups: two input channels, group 2, each filter sees only its own
// channel; the bias is added once (by hand).
func TestConvGroupsAndBias(t *testing.T) {
	x := Tensor{Shape: []int64{1, 2, 2, 2}, Data: []float32{1, 2, 3, 4, 10, 20, 30, 40}}
	w := Tensor{Shape: []int64{2, 1, 1, 1}, Data: []float32{2, -1}}
	b := Tensor{Shape: []int64{2}, Data: []float32{0.5, 1}}
	y := Conv(x, w, b, Window{}, 2)
	want := []float32{2.5, 4.5, 6.5, 8.5, -9, -19, -29, -39}
	if !slices.Equal(y.Data, want) {
		t.Errorf("got %v, want %v", y.Data, want)
	}
}

// Pooling on the 4×4 ramp 0..15 (by hand): 2×2 windows, stride 2.
func TestPoolingByHand(t *testing.T) {
	x := Tensor{Shape: []int64{1, 1, 4, 4}, Data: seq(16)}
	mp := MaxPool(x, Window{Kernel: []int64{2, 2}, Strides: []int64{2, 2}})
	if want := []float32{5, 7, 13, 15}; !slices.Equal(mp.Data, want) {
		t.Errorf("MaxPool: got %v, want %v", mp.Data, want)
	}
	ap := AveragePool(x, Window{Kernel: []int64{2, 2}, Strides: []int64{2, 2}}, false)
	if want := []float32{2.5, 4.5, 10.5, 12.5}; !slices.Equal(ap.Data, want) {
		t.Errorf("AveragePool: got %v, want %v", ap.Data, want)
	}
	// 3×3 window, pad 1, stride 2: the corner window covers x[0..1][0..1] =
	// 0,1,4,5: mean 2.5 without the padding, 10/9 with it.
	win := Window{Kernel: []int64{3, 3}, Pads: []int64{1, 1, 1, 1}, Strides: []int64{2, 2}}
	if got := AveragePool(x, win, false).Data[0]; got != 2.5 {
		t.Errorf("AveragePool exclude pad: corner %v, want 2.5", got)
	}
	if got := AveragePool(x, win, true).Data[0]; math.Abs(float64(got)-10.0/9) > 1e-6 {
		t.Errorf("AveragePool include pad: corner %v, want 10/9", got)
	}
	// ceil mode, 4 wide, kernel 3, stride 2: floor gives 1 window, ceil 2
	// (Operators.md MaxPool output shape formula).
	c := MaxPool(x, Window{Kernel: []int64{3, 3}, Strides: []int64{2, 2}, CeilMode: true})
	if want := []int64{1, 1, 2, 2}; !slices.Equal(c.Shape, want) {
		t.Errorf("ceil mode shape %v, want %v", c.Shape, want)
	}
	if want := []float32{10, 11, 14, 15}; !slices.Equal(c.Data, want) {
		t.Errorf("ceil mode: got %v, want %v", c.Data, want)
	}
	g := GlobalAveragePool(x)
	if g.Data[0] != 7.5 || !slices.Equal(g.Shape, []int64{1, 1, 1, 1}) {
		t.Errorf("GlobalAveragePool: %v %v, want [1 1 1 1] 7.5", g.Shape, g.Data)
	}
}

// Gemm with transposes and a row-vector bias (by hand).
func TestGemmByHand(t *testing.T) {
	a := Tensor{Shape: []int64{2, 3}, Data: []float32{1, 2, 3, 4, 5, 6}}
	bT := Tensor{Shape: []int64{2, 3}, Data: []float32{1, 0, 1, 0, 1, 0}} // B' = [[1,0],[0,1],[1,0]]
	c := Tensor{Shape: []int64{2}, Data: []float32{10, 20}}
	y := Gemm(a, bT, c, 2, 0.5, false, true)
	// A·B' = [[4,2],[10,5]]; ×2 + 0.5×[10,20]
	if want := []float32{13, 14, 25, 20}; !slices.Equal(y.Data, want) {
		t.Errorf("got %v, want %v", y.Data, want)
	}
}

// Softmax of [1,2,3]: exp(k)/sum, computed by hand with math.Exp (common
// practice formula).
func TestSoftmaxByHand(t *testing.T) {
	y := Softmax(Tensor{Shape: []int64{1, 3}, Data: []float32{1, 2, 3}}, -1)
	den := math.Exp(1) + math.Exp(2) + math.Exp(3)
	for i, want := range []float64{math.Exp(1) / den, math.Exp(2) / den, math.Exp(3) / den} {
		if math.Abs(float64(y.Data[i])-want) > 1e-7 {
			t.Errorf("p[%d] = %v, want %v", i, y.Data[i], want)
		}
	}
}

// The reference itself against the ONNX backend test data (Debian
// libonnx-testdata), within the backend tests' tolerance rtol 1e-3, atol
// 1e-7 (onnx/backend/test/runner). The same cases run through ONNX Runtime
// in package infer.
func TestReferenceConformance(t *testing.T) {
	cases, skipped, err := ConformanceCases(ConformanceRoot)
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range skipped {
		t.Logf("not run: %s: %s", s.Dir, s.Reason)
	}
	ran := 0
	for _, c := range cases {
		for si, s := range c.Sets {
			got, err := c.Run(s)
			if err != nil {
				t.Errorf("%s: %v", c.Name(), err)
				continue
			}
			for i, want := range s.Outputs {
				if !slices.Equal(got[i].Shape, want.Shape) {
					t.Errorf("%s set %d output %s: shape %v, want %v", c.Name(), si, want.Name, got[i].Shape, want.Shape)
					continue
				}
				if j := Close(got[i].Data, want.Data, 1e-3, 1e-7); j >= 0 {
					t.Errorf("%s set %d output %s[%d]: %v, want %v", c.Name(), si, want.Name, j, got[i].Data[j], want.Data[j])
				}
			}
			ran++
		}
	}
	t.Logf("%d cases, %d data sets compared, %d not run", len(cases), ran, len(skipped))
	if len(cases) < 50 {
		t.Errorf("only %d conformance cases in scope; expected the ~90 Conv/pool/Gemm/Relu/Softmax/BatchNormalization cases", len(cases))
	}
}
