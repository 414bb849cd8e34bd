// Package refconv is a slow, direct, obviously-correct implementation of the
// few ONNX operators an image classifier is mostly made of: Conv, MaxPool,
// AveragePool, GlobalAveragePool, Relu, Gemm, Softmax, BatchNormalization
// (inference form), Flatten and MatMul.
//
// It exists for tests only: it is the independent reference that ONNX
// Runtime's activations are checked against. Every function follows the
// formula of the operator in the ONNX specification (onnx/docs/Operators.md)
// as literally as possible, with nested loops and float64 accumulation; none
// of it is written for speed and none of it shares code with the code under
// test.
//
// # Tensors
//
// A Tensor is row-major float32 data with its shape beside it. Image-like
// tensors are NCHW, or more generally [N][C][D1]...[Dk] for k spatial axes,
// as ONNX defines them. Kernels are [M][C/group][K1]...[Kk].
//
// # Errors
//
// The functions panic with a message starting "refconv:" when shapes or
// attributes do not fit together: in a test, a wrong call is a bug in the test.
package refconv

import (
	"fmt"
	"math"
)

// Tensor is a dense float32 tensor: Data holds the elements in row-major
// order, len(Data) is the product of Shape.
type Tensor struct {
	Shape []int64
	Data  []float32
}

// New returns a zero tensor of the given shape.
func New(shape ...int64) Tensor {
	return Tensor{Shape: append([]int64(nil), shape...), Data: make([]float32, count(shape))}
}

func count(shape []int64) int {
	n := 1
	for _, d := range shape {
		if d < 0 {
			panic(fmt.Sprintf("refconv: negative dimension in %v", shape))
		}
		n *= int(d)
	}
	return n
}

func (t Tensor) check(what string) {
	if count(t.Shape) != len(t.Data) {
		panic(fmt.Sprintf("refconv: %s: shape %v needs %d elements, has %d", what, t.Shape, count(t.Shape), len(t.Data)))
	}
}

// strides returns the row-major element strides of shape.
func strides(shape []int64) []int {
	s := make([]int, len(shape))
	acc := 1
	for i := len(shape) - 1; i >= 0; i-- {
		s[i] = acc
		acc *= int(shape[i])
	}
	return s
}

// next advances the odometer idx over the box [0, lim) and reports false
// after the last position.
func next(idx []int, lim []int) bool {
	for i := len(idx) - 1; i >= 0; i-- {
		idx[i]++
		if idx[i] < lim[i] {
			return true
		}
		idx[i] = 0
	}
	return false
}

// Window holds the spatial attributes shared by Conv and the pooling
// operators. Zero-length slices take the ONNX defaults: no padding, strides
// and dilations of 1. AutoPad is "", "NOTSET", "VALID", "SAME_UPPER" or
// "SAME_LOWER". Pads is [x1_begin, x2_begin, ..., x1_end, x2_end, ...].
type Window struct {
	Kernel    []int64
	Pads      []int64
	Strides   []int64
	Dilations []int64
	AutoPad   string
	CeilMode  bool // pooling only
}

// geometry resolves the window for the given spatial input size: begin and
// end padding, stride, dilation and output size of every spatial axis.
//
// Output size (Operators.md, Conv / MaxPool / AveragePool):
//
//	out = floor((in + pb + pe - ((k-1)*d + 1)) / s) + 1     (ceil with CeilMode)
//
// with CeilMode, a last window that would start inside the end padding is
// dropped (MaxPool/AveragePool, opset 19 note; the same rule as PyTorch).
// SAME_UPPER / SAME_LOWER: out = ceil(in/s), total padding
// max(0, (out-1)*s + (k-1)*d + 1 - in), the odd pixel at the end (UPPER)
// or at the beginning (LOWER). VALID: no padding.
func (w Window) geometry(in []int64) (pb, pe, s, d, out []int) {
	k := len(in)
	if len(w.Kernel) != k {
		panic(fmt.Sprintf("refconv: kernel %v for %d spatial axes", w.Kernel, k))
	}
	pb, pe, s, d, out = make([]int, k), make([]int, k), make([]int, k), make([]int, k), make([]int, k)
	for i := range k {
		s[i], d[i] = 1, 1
		if len(w.Strides) > 0 {
			s[i] = int(w.Strides[i])
		}
		if len(w.Dilations) > 0 {
			d[i] = int(w.Dilations[i])
		}
		if len(w.Pads) > 0 && (w.AutoPad == "" || w.AutoPad == "NOTSET") {
			pb[i], pe[i] = int(w.Pads[i]), int(w.Pads[i+k])
		}
		ext := (int(w.Kernel[i])-1)*d[i] + 1
		n := int(in[i])
		switch w.AutoPad {
		case "SAME_UPPER", "SAME_LOWER":
			out[i] = (n + s[i] - 1) / s[i]
			total := max(0, (out[i]-1)*s[i]+ext-n)
			if w.AutoPad == "SAME_UPPER" {
				pb[i], pe[i] = total/2, total-total/2
			} else {
				pb[i], pe[i] = total-total/2, total/2
			}
			continue
		case "VALID":
			pb[i], pe[i] = 0, 0
		}
		span := n + pb[i] + pe[i] - ext
		if w.CeilMode {
			out[i] = (span+s[i]-1)/s[i] + 1
			if (out[i]-1)*s[i] >= n+pb[i] {
				out[i]--
			}
		} else {
			out[i] = span/s[i] + 1
		}
		if span < 0 {
			out[i] = 0
		}
	}
	return pb, pe, s, d, out
}

// Conv is ONNX Conv (Operators.md, Conv): for batch n, output channel m in
// group g = m / (M/group) and output position o,
//
//	y[n,m,o] = b[m] + sum over c < C/group, kernel position k of
//	           x[n, g*C/group + c, o*s - pb + k*d] * w[m,c,k]
//
// where input positions outside the image count as zero (the padding).
// b may be a zero Tensor for no bias.
func Conv(x, w, b Tensor, win Window, group int) Tensor {
	x.check("Conv X")
	w.check("Conv W")
	if group < 1 {
		group = 1
	}
	if len(x.Shape) < 3 || len(w.Shape) != len(x.Shape) {
		panic(fmt.Sprintf("refconv: Conv X %v with W %v", x.Shape, w.Shape))
	}
	N, C, M := int(x.Shape[0]), int(x.Shape[1]), int(w.Shape[0])
	cg := int(w.Shape[1])
	if C != cg*group || M%group != 0 {
		panic(fmt.Sprintf("refconv: Conv X %v, W %v, group %d do not fit", x.Shape, w.Shape, group))
	}
	if len(b.Data) != 0 && len(b.Data) != M {
		panic(fmt.Sprintf("refconv: Conv bias has %d elements for %d filters", len(b.Data), M))
	}
	if len(win.Kernel) == 0 {
		win.Kernel = w.Shape[2:]
	}
	sp := x.Shape[2:]
	pb, _, s, d, out := win.geometry(sp)
	yShape := append([]int64{int64(N), int64(M)}, toInt64(out)...)
	y := New(yShape...)
	xs, ws, ys := strides(x.Shape), strides(w.Shape), strides(y.Shape)
	kl := toInt(w.Shape[2:])
	if prod(out) == 0 {
		return y
	}
	o := make([]int, len(out))
	for n := range N {
		for m := range M {
			g := m / (M / group)
			for i := range o {
				o[i] = 0
			}
			for {
				sum := 0.0
				if len(b.Data) != 0 {
					sum = float64(b.Data[m])
				}
				for c := range cg {
					k := make([]int, len(kl))
					for {
						xi := n*xs[0] + (g*cg+c)*xs[1]
						inside := true
						for a := range k {
							p := o[a]*s[a] - pb[a] + k[a]*d[a]
							if p < 0 || p >= int(sp[a]) {
								inside = false
								break
							}
							xi += p * xs[2+a]
						}
						if inside {
							wi := m*ws[0] + c*ws[1]
							for a := range k {
								wi += k[a] * ws[2+a]
							}
							sum += float64(x.Data[xi]) * float64(w.Data[wi])
						}
						if !next(k, kl) {
							break
						}
					}
				}
				yi := n*ys[0] + m*ys[1]
				for a := range o {
					yi += o[a] * ys[2+a]
				}
				y.Data[yi] = float32(sum)
				if !next(o, out) {
					break
				}
			}
		}
	}
	return y
}

// pool runs a pooling window over every channel of x. reduce receives the
// values inside the image and the window's size clipped to the padded input
// (for AveragePool's count_include_pad).
func pool(x Tensor, win Window, reduce func(vals []float64, padded int) float64) Tensor {
	x.check("pool X")
	if len(x.Shape) < 3 {
		panic(fmt.Sprintf("refconv: pooling input %v has no spatial axes", x.Shape))
	}
	N, C := int(x.Shape[0]), int(x.Shape[1])
	sp := x.Shape[2:]
	pb, pe, s, d, out := win.geometry(sp)
	y := New(append([]int64{int64(N), int64(C)}, toInt64(out)...)...)
	if prod(out) == 0 {
		return y
	}
	xs, ys := strides(x.Shape), strides(y.Shape)
	kl := toInt(win.Kernel)
	o := make([]int, len(out))
	var vals []float64
	for n := range N {
		for c := range C {
			for i := range o {
				o[i] = 0
			}
			for {
				vals = vals[:0]
				padded := 1
				// window extent clipped to the padded input, per axis
				for a := range o {
					lo := o[a]*s[a] - pb[a]
					hi := min(lo+(kl[a]-1)*d[a]+1, int(sp[a])+pe[a])
					padded *= (hi - lo + d[a] - 1) / d[a]
				}
				k := make([]int, len(kl))
				for {
					xi := n*xs[0] + c*xs[1]
					inside := true
					for a := range k {
						p := o[a]*s[a] - pb[a] + k[a]*d[a]
						if p < 0 || p >= int(sp[a]) {
							inside = false
							break
						}
						xi += p * xs[2+a]
					}
					if inside {
						vals = append(vals, float64(x.Data[xi]))
					}
					if !next(k, kl) {
						break
					}
				}
				yi := n*ys[0] + c*ys[1]
				for a := range o {
					yi += o[a] * ys[2+a]
				}
				y.Data[yi] = float32(reduce(vals, padded))
				if !next(o, out) {
					break
				}
			}
		}
	}
	return y
}

// MaxPool is ONNX MaxPool (Operators.md, MaxPool): the largest input value
// under each window; padding never wins (it counts as minus infinity).
func MaxPool(x Tensor, win Window) Tensor {
	return pool(x, win, func(vals []float64, _ int) float64 {
		m := math.Inf(-1)
		for _, v := range vals {
			m = math.Max(m, v)
		}
		return m
	})
}

// AveragePool is ONNX AveragePool (Operators.md, AveragePool): the mean of
// the input values under each window. With countIncludePad the divisor is
// the window size clipped to the padded input (explicit padding counts as
// zeros, the extra cells a ceil-mode window hangs past it do not); without
// it, the divisor is the number of cells inside the image.
func AveragePool(x Tensor, win Window, countIncludePad bool) Tensor {
	return pool(x, win, func(vals []float64, padded int) float64 {
		sum := 0.0
		for _, v := range vals {
			sum += v
		}
		if countIncludePad {
			return sum / float64(padded)
		}
		return sum / float64(len(vals))
	})
}

// GlobalAveragePool is ONNX GlobalAveragePool: the mean of each channel over
// all its spatial positions; the output keeps the rank with ones.
func GlobalAveragePool(x Tensor) Tensor {
	x.check("GlobalAveragePool X")
	N, C := int(x.Shape[0]), int(x.Shape[1])
	area := count(x.Shape[2:])
	shape := []int64{int64(N), int64(C)}
	for range x.Shape[2:] {
		shape = append(shape, 1)
	}
	y := New(shape...)
	for i := range N * C {
		sum := 0.0
		for _, v := range x.Data[i*area : (i+1)*area] {
			sum += float64(v)
		}
		y.Data[i] = float32(sum / float64(area))
	}
	return y
}

// Relu is ONNX Relu: max(0, x) element by element.
func Relu(x Tensor) Tensor {
	x.check("Relu X")
	y := New(x.Shape...)
	for i, v := range x.Data {
		if v > 0 {
			y.Data[i] = v
		}
	}
	return y
}

// Gemm is ONNX Gemm (Operators.md, Gemm):
//
//	Y = alpha * A' * B' + beta * C
//
// with A' = transpose(A) when transA, B' likewise, and C broadcast
// (unidirectionally) to [M, N]; C may be a zero Tensor for none.
func Gemm(a, b, c Tensor, alpha, beta float32, transA, transB bool) Tensor {
	a.check("Gemm A")
	b.check("Gemm B")
	if len(a.Shape) != 2 || len(b.Shape) != 2 {
		panic(fmt.Sprintf("refconv: Gemm A %v, B %v: need matrices", a.Shape, b.Shape))
	}
	M, K := int(a.Shape[0]), int(a.Shape[1])
	if transA {
		M, K = K, M
	}
	K2, N := int(b.Shape[0]), int(b.Shape[1])
	if transB {
		K2, N = N, K2
	}
	if K != K2 {
		panic(fmt.Sprintf("refconv: Gemm A %v, B %v (transA %v, transB %v): inner sizes differ", a.Shape, b.Shape, transA, transB))
	}
	at := func(i, k int) float64 {
		if transA {
			return float64(a.Data[k*M+i])
		}
		return float64(a.Data[i*K+k])
	}
	bt := func(k, j int) float64 {
		if transB {
			return float64(b.Data[j*K+k])
		}
		return float64(b.Data[k*N+j])
	}
	ct := func(i, j int) float64 {
		switch {
		case len(c.Data) == 0:
			return 0
		case len(c.Shape) == 2:
			r, q := i, j
			if c.Shape[0] == 1 {
				r = 0
			}
			if c.Shape[1] == 1 {
				q = 0
			}
			return float64(c.Data[r*int(c.Shape[1])+q])
		case len(c.Data) == 1:
			return float64(c.Data[0])
		default: // [N]
			return float64(c.Data[j])
		}
	}
	y := New(int64(M), int64(N))
	for i := range M {
		for j := range N {
			sum := 0.0
			for k := range K {
				sum += at(i, k) * bt(k, j)
			}
			y.Data[i*N+j] = float32(float64(alpha)*sum + float64(beta)*ct(i, j))
		}
	}
	return y
}

// MatMul is ONNX MatMul for a batch of rows times a matrix: A [.., K] × B [K, N].
func MatMul(a, b Tensor) Tensor {
	a.check("MatMul A")
	b.check("MatMul B")
	if len(b.Shape) != 2 || a.Shape[len(a.Shape)-1] != b.Shape[0] {
		panic(fmt.Sprintf("refconv: MatMul A %v, B %v: only [..,K]x[K,N] here", a.Shape, b.Shape))
	}
	K, N := int(b.Shape[0]), int(b.Shape[1])
	rows := len(a.Data) / K
	shape := append(append([]int64(nil), a.Shape[:len(a.Shape)-1]...), int64(N))
	y := New(shape...)
	for r := range rows {
		for j := range N {
			sum := 0.0
			for k := range K {
				sum += float64(a.Data[r*K+k]) * float64(b.Data[k*N+j])
			}
			y.Data[r*N+j] = float32(sum)
		}
	}
	return y
}

// Softmax is ONNX Softmax from opset 13 on: along one axis (negative counts
// from the end),
//
//	y_i = exp(x_i - max) / sum_j exp(x_j - max)
func Softmax(x Tensor, axis int) Tensor {
	x.check("Softmax X")
	r := len(x.Shape)
	if axis < 0 {
		axis += r
	}
	outer := count(x.Shape[:axis])
	n := int(x.Shape[axis])
	inner := count(x.Shape[axis+1:])
	y := New(x.Shape...)
	for o := range outer {
		for in := range inner {
			at := func(i int) int { return (o*n+i)*inner + in }
			m := math.Inf(-1)
			for i := range n {
				m = math.Max(m, float64(x.Data[at(i)]))
			}
			sum := 0.0
			for i := range n {
				sum += math.Exp(float64(x.Data[at(i)]) - m)
			}
			for i := range n {
				y.Data[at(i)] = float32(math.Exp(float64(x.Data[at(i)])-m) / sum)
			}
		}
	}
	return y
}

// SoftmaxCoerced is ONNX Softmax before opset 13: the input is seen as a
// matrix [prod(shape[:axis]), prod(shape[axis:])] and each row is
// normalised.
func SoftmaxCoerced(x Tensor, axis int) Tensor {
	r := len(x.Shape)
	if axis < 0 {
		axis += r
	}
	flat := Tensor{Shape: []int64{int64(count(x.Shape[:axis])), int64(count(x.Shape[axis:]))}, Data: x.Data}
	y := Softmax(flat, 1)
	y.Shape = append([]int64(nil), x.Shape...)
	return y
}

// BatchNormalization is ONNX BatchNormalization in inference mode:
//
//	y = (x - mean[c]) / sqrt(var[c] + epsilon) * scale[c] + bias[c]
func BatchNormalization(x, scale, bias, mean, variance Tensor, epsilon float32) Tensor {
	x.check("BatchNormalization X")
	N, C := int(x.Shape[0]), int(x.Shape[1])
	area := count(x.Shape[2:])
	y := New(x.Shape...)
	for n := range N {
		for c := range C {
			den := math.Sqrt(float64(variance.Data[c]) + float64(epsilon))
			for i := range area {
				j := (n*C+c)*area + i
				y.Data[j] = float32((float64(x.Data[j])-float64(mean.Data[c]))/den*float64(scale.Data[c]) + float64(bias.Data[c]))
			}
		}
	}
	return y
}

// Flatten is ONNX Flatten: the same data seen as
// [prod(shape[:axis]), prod(shape[axis:])].
func Flatten(x Tensor, axis int) Tensor {
	if axis < 0 {
		axis += len(x.Shape)
	}
	return Tensor{Shape: []int64{int64(count(x.Shape[:axis])), int64(count(x.Shape[axis:]))}, Data: append([]float32(nil), x.Data...)}
}

func toInt64(v []int) []int64 {
	r := make([]int64, len(v))
	for i, x := range v {
		r[i] = int64(x)
	}
	return r
}

func toInt(v []int64) []int {
	r := make([]int, len(v))
	for i, x := range v {
		r[i] = int(x)
	}
	return r
}

func prod(v []int) int {
	p := 1
	for _, x := range v {
		p *= x
	}
	return p
}
