package infer

import (
	"context"
	"fmt"
	"math"
	"path/filepath"
	"testing"

	"fovea/modelio"
	"fovea/modelio/onnxbuild"
)

// Summaries computed in the graph (Options.Summarise) equal the same
// figures computed in Go from the whole captured tensor: the largest and
// smallest value bit for bit, the position of the first largest value
// (ONNX ArgMax with select_last_index 0, "the first occurrence", ONNX
// operator specification), the sum within float32 rounding of the float64
// sum. Checked at operator sets 9, 13 and 18, where the reductions' axes
// move from an attribute to an input (ReduceSum at 13, ReduceMax and
// ReduceMin at 18, ONNX operator specification's change logs), on a
// non-square map, a 2-D [N][C] tensor and a batch holding an all-zero image
// (constant maps: every position ties, the first must win). The model's
// own outputs stay those of a plain run, bit for bit.
func TestSummariseMatchesCapture(t *testing.T) {
	for _, opset := range []int64{9, 13, 18} {
		t.Run(fmt.Sprint("opset", opset), func(t *testing.T) {
			b := onnxbuild.New(opset, onnxbuild.Random)
			x := b.Input("image", onnxbuild.Float, "N", 3, 12, 10)
			c1 := b.Conv(x, 3, 6, 3, 1, 1)
			r1 := b.Relu(c1)
			r2 := b.Relu(b.Conv(b.MaxPool(r1, 2, 2, 0), 6, 5, 3, 1, 1))
			h := b.Relu(b.Gemm(b.Flatten(r2), 5*6*5, 8))
			b.Output(b.Gemm(h, 8, 4))
			p := filepath.Join(t.TempDir(), "sum.onnx")
			if err := b.Write(p); err != nil {
				t.Fatal(err)
			}
			m, err := modelio.Open(p)
			if err != nil {
				t.Fatal(err)
			}
			tensors := []string{r1, c1, r2, h}
			var sums []modelio.Summary
			for i, name := range tensors {
				if _, ok := m.SummaryDims(name); !ok {
					t.Fatalf("%s cannot be summarised", name)
				}
				sums = append(sums, modelio.Summary{Tensor: name, MaxOnly: i == 1})
			}
			plain := newSession(t, m, Options{})
			whole := newSession(t, m, Options{Capture: tensors})
			summ := newSession(t, m, Options{Summarise: sums})
			const n = 3
			in := randn(7, n*3*12*10, 1)
			clear(in[3*12*10 : 2*3*12*10]) // image 1: all zero
			ctx := context.Background()
			want, err := plain.Run(ctx, in, n)
			if err != nil {
				t.Fatal(err)
			}
			w, err := whole.Run(ctx, in, n)
			if err != nil {
				t.Fatal(err)
			}
			for range 2 { // the first run learns the shapes, the second writes in place
				got, err := summ.Run(ctx, in, n)
				if err != nil {
					t.Fatal(err)
				}
				if !bitsEqual(got.Outputs[0].Data, want.Outputs[0].Data) {
					t.Errorf("outputs with summaries %v, plain run %v", got.Outputs[0].Data, want.Outputs[0].Data)
				}
				for _, sm := range sums {
					checkSummary(t, w.Maps[sm.Tensor], got.Maps[modelio.SummaryName(sm.Tensor)], sm, n)
				}
			}
		})
	}
}

func checkSummary(t *testing.T, full, sum modelio.Tensor, sm modelio.Summary, n int) {
	t.Helper()
	c := int(full.Shape[1])
	width := modelio.SummaryWidth
	if sm.MaxOnly {
		width = 1
	}
	if len(sum.Shape) != 3 || sum.Shape[0] != int64(n) || sum.Shape[1] != int64(c) || sum.Shape[2] != int64(width) {
		t.Fatalf("%s: summary shape %v, want [%d %d %d]", sm.Tensor, sum.Shape, n, c, width)
	}
	sp := len(full.Data) / (n * c)
	for img := range n {
		for ch := range c {
			m := full.Data[(img*c+ch)*sp : (img*c+ch+1)*sp]
			mx, mn, at := m[0], m[0], 0
			var s, abs float64
			for i, v := range m {
				if v > mx {
					mx, at = v, i
				}
				mn = min(mn, v)
				s += float64(v)
				abs += math.Abs(float64(v))
			}
			row := sum.Data[(img*c+ch)*width : (img*c+ch+1)*width]
			if math.Float32bits(row[modelio.SummaryMax]) != math.Float32bits(mx) {
				t.Errorf("%s image %d channel %d: max %v, want %v", sm.Tensor, img, ch, row[modelio.SummaryMax], mx)
			}
			if sm.MaxOnly {
				continue
			}
			if math.Float32bits(row[modelio.SummaryMin]) != math.Float32bits(mn) || int(row[modelio.SummaryArg]) != at {
				t.Errorf("%s image %d channel %d: min %v at-max %v, want %v %d", sm.Tensor, img, ch, row[modelio.SummaryMin], row[modelio.SummaryArg], mn, at)
			}
			// float32 accumulation: a few ulps of float32 per addition, in
			// the worst case sp of them (common practice for error bounds of
			// recursive summation).
			if d := math.Abs(float64(row[modelio.SummarySum]) - s); d > float64(sp)*1.2e-7*abs+1e-30 {
				t.Errorf("%s image %d channel %d: sum %v, want %v", sm.Tensor, img, ch, row[modelio.SummarySum], s)
			}
		}
	}
}

// A tensor whose dimensions are not all fixed cannot be summarised: the
// session refuses it with an error naming it, and ScanSession-like callers
// capture it whole instead.
func TestSummariseRefusesUnknownDims(t *testing.T) {
	b := onnxbuild.New(13, onnxbuild.Random)
	x := b.Input("image", onnxbuild.Float, "N", 3, "H", "W")
	r := b.Relu(b.Conv(x, 3, 4, 3, 1, 1))
	b.Output(b.Flatten(b.GlobalAveragePool(r)))
	p := filepath.Join(t.TempDir(), "sym.onnx")
	if err := b.Write(p); err != nil {
		t.Fatal(err)
	}
	m, err := modelio.Open(p)
	if err != nil {
		t.Fatal(err)
	}
	if _, ok := m.SummaryDims(r); ok {
		t.Fatalf("%s has symbolic dimensions but SummaryDims accepts it", r)
	}
	if _, ok := m.SummaryDims("no-such-tensor"); ok {
		t.Fatal("SummaryDims accepts a tensor the model does not have")
	}
	if _, err := NewSession(m, Options{Dims: []int64{3, 8, 8}, Summarise: []modelio.Summary{{Tensor: r}}}); err == nil {
		t.Fatal("a session summarising a tensor of unknown dimensions opened")
	}
}
