package analysis

import (
	"fmt"
	"math"
	"testing"

	"fovea/modelio"
)

// referenceStats is the obviously correct form of mapStats: one pass, float64.
func referenceStats(m []float32) (float64, float64, float64) {
	mx, sum, abs := math.Inf(-1), 0.0, 0.0
	for _, v := range m {
		mx = math.Max(mx, float64(v))
		sum += float64(v)
		abs += math.Abs(float64(v))
	}
	return mx, sum, abs
}

func TestMapStats(t *testing.T) {
	t.Logf("AVX kernel in use: %v", useAVX)
	v := uint32(12345)
	rnd := func() float32 { // Numerical Recipes LCG, in [-1, 1)
		v = v*1664525 + 1013904223
		return float32(int32(v)) / (1 << 31)
	}
	kinds := map[string]func(i int) float32{
		"relu":     func(int) float32 { return max(0, 3*rnd()) },
		"signed":   func(int) float32 { return 100 * rnd() },
		"negative": func(int) float32 { return -1 - rnd() },
		"zeros":    func(int) float32 { return 0 },
		"rising":   func(i int) float32 { return float32(i) }, // the maximum in the very last value
		"falling":  func(i int) float32 { return float32(-i) },
	}
	for name, gen := range kinds {
		for _, n := range []int{1, 3, 4, 7, 31, 32, 33, 63, 64, 100, 1023, 1024, 1025, 2048, 2080, 4096 + 17} {
			m := make([]float32, n)
			for i := range m {
				m[i] = gen(i)
			}
			wantMax, wantSum, abs := referenceStats(m)
			for fname, f := range map[string]func([]float32) (float32, float64){"mapStats": mapStats, "mapStatsGo": mapStatsGo} {
				mx, sum := f(m)
				// The maximum is one of the values: exact. The sum: float32
				// partial sums, relative error bound n·2^-24 of Σ|v| (Higham,
				// "Accuracy and Stability of Numerical Algorithms", 4.2) with
				// blocks of at most 1024 values.
				if float64(mx) != wantMax {
					t.Errorf("%s %s n=%d: max %g, want %g", fname, name, n, mx, wantMax)
				}
				if tol := 1024 * math.Pow(2, -24) * abs; math.Abs(sum-wantSum) > tol {
					t.Errorf("%s %s n=%d: sum %g, want %g (±%g)", fname, name, n, sum, wantSum, tol)
				}
			}
		}
	}
	// A NaN or an infinity anywhere makes the sum non-finite (which flags
	// the channel), wherever it is in the blocks.
	for _, bad := range []float32{float32(math.NaN()), float32(math.Inf(1)), float32(math.Inf(-1))} {
		for _, at := range []int{0, 5, 31, 32, 1023, 1500} {
			m := make([]float32, 1600)
			for i := range m {
				m[i] = rnd()
			}
			m[at] = bad
			for fname, f := range map[string]func([]float32) (float32, float64){"mapStats": mapStats, "mapStatsGo": mapStatsGo} {
				if _, sum := f(m); finite(sum) {
					t.Errorf("%s: %v at %d: sum %g is finite", fname, bad, at, sum)
				}
			}
		}
	}
}

// BenchmarkMapStats: nanoseconds per value of the AVX and the Go kernel on
// a 64×64 map after a ReLU.
func BenchmarkMapStats(b *testing.B) {
	m := make([]float32, 64*64)
	for i := range m {
		m[i] = max(0, float32(math.Sin(float64(i)*0.37)))
	}
	for name, f := range map[string]func([]float32) (float32, float64){"dispatch": mapStats, "go": mapStatsGo} {
		b.Run(name, func(b *testing.B) {
			var s float64
			for b.Loop() {
				_, v := f(m)
				s += v
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(len(m)), "ns/value")
		})
	}
}

// TestAddParallel: the statistics gathered by 2 to 7 goroutines, each
// taking whole channels, equal bit for bit those of one goroutine, over
// several batches of maps holding ordinary values, a constant channel, a
// dead one and a NaN (common practice: a parallel reduction must not change
// the order of any sum).
func TestAddParallel(t *testing.T) {
	shapes := [][]int64{{3, 5, 9, 7}, {3, 11, 4}, {3, 2}}
	batch := func(k int) map[string]modelio.Tensor {
		maps := map[string]modelio.Tensor{}
		v := uint32(k*977 + 1)
		for li, sh := range shapes {
			n := 1
			for _, d := range sh {
				n *= int(d)
			}
			data := make([]float32, n)
			for i := range data {
				v = v*1664525 + 1013904223 // Numerical Recipes LCG
				data[i] = float32(int32(v>>8)) / (1 << 22)
			}
			sp := n / int(sh[0]*sh[1])
			for img := 0; img < int(sh[0]); img++ {
				ch := func(c int) []float32 { return data[(img*int(sh[1])+c)*sp : (img*int(sh[1])+c+1)*sp] }
				for i := range ch(1) {
					ch(1)[i] = 2.5                    // constant
					ch(0)[i] = -ch(0)[i]*ch(0)[i] - 1 // dead
				}
				if li == 0 && k == 1 && img == 2 {
					ch(3)[4] = float32(math.NaN())
				}
			}
			maps[fmt.Sprint("t", li)] = modelio.Tensor{Shape: sh, Data: data}
		}
		return maps
	}
	newAccs := func() []*layerAcc {
		var accs []*layerAcc
		for li := range shapes {
			accs = append(accs, &layerAcc{layer: modelio.Layer{Output: fmt.Sprint("t", li)}, conv: -1})
		}
		return accs
	}
	run := func(parts int) []*layerAcc {
		accs := newAccs()
		for k := range 3 {
			if err := addParallel(nil, accs, batch(k), 3, parts); err != nil {
				t.Fatal(err)
			}
		}
		return accs
	}
	ref := run(1)
	for _, a := range ref {
		if a.channels[0].fires != 0 || a.channels[1].varies || a.values != 3*3*a.spatial {
			t.Fatalf("%s: the dead or constant channel or the count is not what the maps hold: %+v, %d values", a.layer.Output, a.channels[:2], a.values)
		}
	}
	if !math.IsNaN(ref[0].channels[3].sum.float64()) {
		t.Fatalf("the NaN did not reach the sum: %v", ref[0].channels[3].sum.float64())
	}
	for parts := 2; parts <= 7; parts++ {
		got := run(parts)
		for i, a := range got {
			for c, ch := range a.channels {
				r := ref[i].channels[c]
				if ch.fires != r.fires || math.Float64bits(ch.max) != math.Float64bits(r.max) ||
					math.Float64bits(ch.sum.float64()) != math.Float64bits(r.sum.float64()) || ch.varies != r.varies || ch.first != r.first {
					t.Errorf("%d parts, %s channel %d: %+v, one goroutine %+v", parts, a.layer.Output, c, ch, r)
				}
			}
			if a.values != ref[i].values {
				t.Errorf("%d parts, %s: %d values, want %d", parts, a.layer.Output, a.values, ref[i].values)
			}
		}
	}
}
