package infer

import (
	"context"
	"math"
	"os"
	"strconv"
	"testing"
	"time"

	"fovea/modelio"
	"fovea/modelio/onnxpb"
)

// demoModel is the demo classifier (assets/make_demo.py): 64×64×3 NCHW.
const demoModel = "../../assets/demo/parts.onnx"

// partsLikeCNN is a stand-in of the demo's architecture (assets/make_demo.py)
// for when the demo file is not there: 64×64×3 NCHW; Conv 12 7×7 stride 2
// pad 3 and Relu (no pooling: the stride halves the side); Conv 24, 32 and
// 32 3×3 pad 1, each followed by Relu and 2×2 MaxPool; Flatten, Gemm
// 512→64, Relu, Gemm 64→7 (logits). Weights pseudo-random.
func partsLikeCNN() *onnxpb.GraphProto {
	g := &onnxpb.GraphProto{
		Name:   "partslike",
		Input:  []*onnxpb.ValueInfoProto{vi("image", onnxpb.TensorProto_FLOAT, "N", 3, 64, 64)},
		Output: []*onnxpb.ValueInfoProto{vi("logits", onnxpb.TensorProto_FLOAT, "N", 7)},
	}
	in, c := "image", int64(3)
	for i, st := range []struct{ m, k, stride int64 }{{12, 7, 2}, {24, 3, 1}, {32, 3, 1}, {32, 3, 1}} {
		s := strconv.Itoa(i + 1)
		g.Initializer = append(g.Initializer,
			f32("w"+s, []int64{st.m, c, st.k, st.k}, randn(uint64(2*i+1), int(st.m*c*st.k*st.k), float32(1.5/math.Sqrt(float64(c*st.k*st.k))))),
			f32("b"+s, []int64{st.m}, randn(uint64(2*i+2), int(st.m), 0.1)))
		p := st.k / 2
		g.Node = append(g.Node,
			node("Conv", "conv"+s, []string{in, "w" + s, "b" + s}, []string{"c" + s}, ints("pads", p, p, p, p), ints("kernel_shape", st.k, st.k), ints("strides", st.stride, st.stride)),
			node("Relu", "relu"+s, []string{"c" + s}, []string{"r" + s}))
		in, c = "r"+s, st.m
		if st.stride == 1 {
			g.Node = append(g.Node, node("MaxPool", "pool"+s, []string{in}, []string{"p" + s}, ints("kernel_shape", 2, 2), ints("strides", 2, 2)))
			in = "p" + s
		}
	}
	g.Initializer = append(g.Initializer,
		f32("wh", []int64{64, 512}, randn(11, 64*512, 0.06)), f32("bh", []int64{64}, randn(12, 64, 0.1)),
		f32("wo", []int64{7, 64}, randn(13, 7*64, 0.15)), f32("bo", []int64{7}, randn(14, 7, 0.1)))
	g.Node = append(g.Node,
		node("Flatten", "flat", []string{in}, []string{"f"}, intAttr("axis", 1)),
		node("Gemm", "fc1", []string{"f", "wh", "bh"}, []string{"h"}, intAttr("transB", 1)),
		node("Relu", "relu5", []string{"h"}, []string{"hr"}),
		node("Gemm", "fc2", []string{"hr", "wo", "bo"}, []string{"logits"}, intAttr("transB", 1)),
	)
	return g
}

// benchSessions opens the demo model (or its stand-in) twice: plain, and
// capturing every activation layer modelio lists.
func benchSessions(b *testing.B) (plain, all *Session, x []float32, n int) {
	needORT(b)
	var m *modelio.Model
	if _, err := os.Stat(demoModel); err == nil {
		if m, err = modelio.Open(demoModel); err != nil {
			b.Fatal(err)
		}
	} else {
		b.Logf("%s not found; using a CNN of the same size built by the test", demoModel)
		m = writeModel(b, "partslike.onnx", modelBytes(b, partsLikeCNN(), 13, nil))
	}
	capture := modelio.OutputsOf(m.MapLayers())
	if len(capture) == 0 {
		b.Fatalf("%s: no activation layers to capture", m.Name)
	}
	plain = newSession(b, m, Options{})
	all = newSession(b, m, Options{Capture: capture})
	n = plain.BatchSize()
	dims, err := plain.ImageDims()
	if err != nil {
		b.Fatal(err)
	}
	per := 1
	for _, d := range dims {
		per *= int(d)
	}
	x = randn(11, n*per, 1)
	b.Logf("%s: batch %d, %d activation maps captured", m.Name, n, len(capture))
	return plain, all, x, n
}

func BenchmarkRunPlain(b *testing.B) {
	plain, _, x, n := benchSessions(b)
	benchRun(b, plain, x, n)
}

func BenchmarkRunCaptureAll(b *testing.B) {
	_, all, x, n := benchSessions(b)
	benchRun(b, all, x, n)
}

func benchRun(b *testing.B, s *Session, x []float32, n int) {
	ctx := context.Background()
	r, err := s.Run(ctx, x, n) // learn the shapes: later runs write in place
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for b.Loop() {
		if r, err = s.RunInto(ctx, x, n, r); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkCaptureRatio measures, in one run and interleaved so that both
// see the same machine load, a plain run and a run returning every
// activation map (modelio.OutputsOf(m.MapLayers())) on the same batch of the demo model,
// and reports their ratio. Issue 5 sets the goal at 1.3 or less.
func BenchmarkCaptureRatio(b *testing.B) {
	plain, all, x, n := benchSessions(b)
	ctx := context.Background()
	rp, err := plain.Run(ctx, x, n)
	if err != nil {
		b.Fatal(err)
	}
	ra, err := all.Run(ctx, x, n)
	if err != nil {
		b.Fatal(err)
	}
	timed := func(s *Session, r **Result) time.Duration {
		t0 := time.Now()
		var err error
		if *r, err = s.RunInto(ctx, x, n, *r); err != nil {
			b.Fatal(err)
		}
		return time.Since(t0)
	}
	var tp, ta time.Duration
	i := 0
	for b.Loop() {
		// alternate which goes first, so neither always finds the caches
		// the other left behind
		if i%2 == 0 {
			tp += timed(plain, &rp)
			ta += timed(all, &ra)
		} else {
			ta += timed(all, &ra)
			tp += timed(plain, &rp)
		}
		i++
	}
	ratio := float64(ta) / float64(tp)
	b.ReportMetric(ratio, "capture/plain")
	b.ReportMetric(float64(tp.Microseconds())/float64(b.N), "plain-µs/op")
	b.ReportMetric(float64(ta.Microseconds())/float64(b.N), "capture-µs/op")
	if ratio > 1.3 {
		b.Logf("capture/plain = %.2f, above the 1.3 bound", ratio)
	}
}
