package viz

import (
	"context"
	"testing"
	"time"

	"fovea/modelio"
	"fovea/modelio/infer"
	"fovea/modelio/prep"
)

// Benchmark sizes: a small image classifier of the demo's proportions
// (64×64 RGB input, two convolutions, seven classes).
const (
	benchSide    = 64
	benchPatch   = 8
	benchStride  = 4
	benchClasses = 7
)

// lcgWeights returns n deterministic weights in [-scale, scale) (a linear
// congruential generator, Numerical Recipes constants).
func lcgWeights(n int, seed uint32, scale float32) []float32 {
	w := make([]float32, n)
	v := seed
	for i := range w {
		v = v*1664525 + 1013904223
		w[i] = (float32(v>>8)/float32(1<<24)*2 - 1) * scale
	}
	return w
}

// benchModel: conv 3->16 3x3 -> relu -> maxpool 2 -> conv 16->32 3x3 ->
// relu -> global average pool -> flatten -> gemm 32->7.
func benchModel(b testing.TB) *modelio.Model {
	g := newGraph("bench_cnn")
	g.input("image", 1, 3, benchSide, benchSide)
	g.init("w1", lcgWeights(16*3*9, 1, 0.3), 16, 3, 3, 3)
	g.init("b1", lcgWeights(16, 2, 0.1), 16)
	g.init("w2", lcgWeights(32*16*9, 3, 0.1), 32, 16, 3, 3)
	g.init("b2", lcgWeights(32, 4, 0.1), 32)
	g.init("w3", lcgWeights(32*benchClasses, 5, 0.3), 32, benchClasses)
	g.init("b3", lcgWeights(benchClasses, 6, 0.1), benchClasses)
	g.node("Conv", "conv1", []string{"image", "w1", "b1"}, []string{"c1"}, attrInts("kernel_shape", 3, 3), attrInts("pads", 1, 1, 1, 1))
	g.node("Relu", "relu1", []string{"c1"}, []string{"r1"})
	g.node("MaxPool", "pool1", []string{"r1"}, []string{"p1"}, attrInts("kernel_shape", 2, 2), attrInts("strides", 2, 2))
	g.node("Conv", "conv2", []string{"p1", "w2", "b2"}, []string{"c2"}, attrInts("kernel_shape", 3, 3), attrInts("pads", 1, 1, 1, 1))
	g.node("Relu", "relu2", []string{"c2"}, []string{"r2"})
	g.node("GlobalAveragePool", "gap", []string{"r2"}, []string{"g"})
	g.node("Flatten", "flatten", []string{"g"}, []string{"f"}, attrInt("axis", 1))
	g.node("Gemm", "fc", []string{"f", "w3", "b3"}, []string{"logits"})
	g.output("logits", 1, benchClasses)
	return g.model(b)
}

func benchConfig() prep.Config {
	return prep.Config{Width: benchSide, Height: benchSide, Channels: 3, Resize: "stretch", Range: "0-1",
		Mean: [3]float32{0.5, 0.5, 0.5}, Std: [3]float32{0.25, 0.25, 0.25}, Layout: "nchw"}
}

// plainRuns times batched inference over n ready-made images, in chunks of
// the session's batch size with the buffers reused: the bound occlusion is
// compared with.
func plainRuns(b *testing.B, s *infer.Session, input []float32, n int) time.Duration {
	size := len(input) / n
	bs := s.BatchSize()
	var res *infer.Result
	start := time.Now()
	for i := 0; i < n; i += bs {
		k := min(bs, n-i)
		var err error
		res, err = s.RunInto(context.Background(), input[i*size:(i+k)*size], k, res)
		if err != nil {
			b.Fatal(err)
		}
	}
	return time.Since(start)
}

// BenchmarkOcclusion reports occlusion time over plain batched inference
// on as many images as occlusion runs (goal of issue 6: at most 1.10).
func BenchmarkOcclusion(b *testing.B) {
	m := benchModel(b)
	s := newSession(b, m, infer.Options{})
	cfg := benchConfig()
	img := testImage(benchSide, benchSide, 11)
	set := OcclusionSettings{Patch: benchPatch, Stride: benchStride}
	npos := len(patchPositions(benchSide, benchPatch, benchStride))
	n := npos*npos + 1
	input := lcgWeights(n*cfg.Len(), 9, 1)
	plainRuns(b, s, input, n) // warm up both paths
	if _, err := Occlude(context.Background(), s, cfg, img, set, []int{-1}, nil); err != nil {
		b.Fatal(err)
	}
	var plain, occl time.Duration
	b.ReportAllocs()
	for b.Loop() {
		plain += plainRuns(b, s, input, n)
		start := time.Now()
		if _, err := Occlude(context.Background(), s, cfg, img, set, []int{-1, 0}, nil); err != nil {
			b.Fatal(err)
		}
		occl += time.Since(start)
	}
	b.ReportMetric(float64(occl)/float64(plain), "occlusion/plain")
	b.ReportMetric(float64(n), "images/op")
}
