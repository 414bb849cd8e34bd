package infer_test

// Ratio benchmark for the ResNet-18-sized network; the demo
// model's is BenchmarkCaptureRatio in bench_test.go. `make bench` runs both
// (-bench '^BenchmarkCaptureRatio') and prints the table.

import (
	"context"
	"math"
	"os"
	"path/filepath"
	"slices"
	"testing"
	"time"

	"fovea/modelio"
	"fovea/modelio/infer"
	"fovea/modelio/testkit"
)

func fileExists(p string) bool {
	st, err := os.Stat(p)
	return err == nil && st.Mode().IsRegular()
}

// BenchmarkCaptureRatioResNet18 reports the time of a run returning every
// activation map (modelio.OutputsOf(m.MapLayers())) over a plain run of the same
// batch, on the ResNet-18-sized network (He et al. 2016; 224×224×3): goal
// at most 1.3. The batch is the plain session's preferred one; the
// capturing session splits it into its own chunks if it prefers smaller
// ones, as a caller would see it. The two runs are interleaved, their order
// alternated, and short pairs repeated within an iteration; the median of
// the pairs' ratios is reported, with the lowest and highest.
func BenchmarkCaptureRatioResNet18(b *testing.B) {
	testkit.NeedRuntime(b)
	m, err := modelio.Open(filepath.Join(testkit.BenchModels(b, "resnet18.onnx"), "resnet18.onnx"))
	if err != nil {
		b.Fatal(err)
	}
	capture := modelio.OutputsOf(m.MapLayers())
	plain, err := infer.NewSession(m, infer.Options{})
	if err != nil {
		b.Fatal(err)
	}
	defer plain.Close()
	all, err := infer.NewSession(m, infer.Options{Capture: capture})
	if err != nil {
		b.Fatal(err)
	}
	defer all.Close()
	n := plain.BatchSize()
	x := make([]float32, n*3*224*224)
	var v uint32 = 7
	for i := range x {
		v = v*1664525 + 1013904223 // Numerical Recipes LCG
		x[i] = float32(v>>8)/(1<<24)*4 - 2
	}
	ctx := context.Background()
	var rp, ra *infer.Result
	runPlain := func() {
		if rp, err = plain.RunInto(ctx, x, n, rp); err != nil {
			b.Fatal(err)
		}
	}
	runAll := func() {
		if ra, err = all.RunInto(ctx, x, n, ra); err != nil {
			b.Fatal(err)
		}
	}
	// Warm up both (the first run of a chunk size learns the shapes) and
	// size the repetitions: a pair should take at least half a second.
	runPlain()
	runAll()
	t0 := time.Now()
	runPlain()
	runAll()
	reps := max(1, int(math.Ceil(float64(500*time.Millisecond)/float64(time.Since(t0)))))
	var cpuPlain, cpuAll time.Duration
	_, cpuOK := testkit.ProcessCPU()
	timed := func(f func(), cpu *time.Duration) time.Duration {
		c0, _ := testkit.ProcessCPU()
		s := time.Now()
		f()
		d := time.Since(s)
		c1, _ := testkit.ProcessCPU()
		*cpu += c1 - c0
		return d
	}
	var tp time.Duration
	var ratios []float64
	b.ReportAllocs()
	for b.Loop() {
		for range reps {
			var p, a time.Duration
			if len(ratios)%2 == 0 {
				p = timed(runPlain, &cpuPlain)
				a = timed(runAll, &cpuAll)
			} else {
				a = timed(runAll, &cpuAll)
				p = timed(runPlain, &cpuPlain)
			}
			tp += p
			ratios = append(ratios, float64(a)/float64(p))
		}
	}
	// The median pair: on a shared machine a pair can fall into a burst of
	// someone else's work; its two halves run back to back.
	slices.Sort(ratios)
	k := len(ratios) / 2
	med := ratios[k]
	if len(ratios)%2 == 0 {
		med = (ratios[k-1] + ratios[k]) / 2
	}
	b.ReportMetric(med, "capture/plain")
	b.ReportMetric(ratios[0], "min-ratio")
	b.ReportMetric(ratios[len(ratios)-1], "max-ratio")
	b.ReportMetric(float64(n), "batch")
	b.ReportMetric(float64(len(capture)), "maps")
	b.ReportMetric(float64(all.BatchSize()), "capture-batch")
	if cpuOK && cpuPlain > 0 && cpuAll > 0 {
		// The CPU time of all pairs: a cross-check that other programs'
		// load hardly disturbs (it does not show time lost waiting).
		b.ReportMetric(float64(cpuAll)/float64(cpuPlain), "cpu-ratio")
	}
	b.ReportMetric(float64(len(ratios)), "pairs")
	b.ReportMetric(tp.Seconds()*1000/float64(len(ratios)), "plain-ms/run")
}
