package modelio

import (
	"math"
	"math/rand/v2"
	"reflect"
	"slices"
	"testing"
	"time"

	"fovea/modelio/onnxbuild"
)

// duplicatesSlow is the obviously correct reference for [Duplicates], on its
// own: the documented rule written out from its definition, sharing no code
// with the package. A filter is zero when its largest |weight| is 0 or at
// most 1e-6 of the layer's largest (the documented zero_kernel rule) and
// pairs with nothing; every other pair's cosine similarity, the dot product
// over the product of the L2 norms, all in float64, must exceed 0.95. The
// kernels are validated here the same way: a shape that does not match the
// data, or a weight that is not finite, gives nil.
func duplicatesSlow(k *Kernels) []Pair {
	if k == nil || k.M <= 0 || k.C <= 0 || k.KH <= 0 || k.KW <= 0 || k.M*k.C*k.KH*k.KW != len(k.W) {
		return nil
	}
	per := k.C * k.KH * k.KW
	norm := make([]float64, k.M)
	maxAbs := make([]float64, k.M)
	layerMax := 0.0
	for i := range k.M {
		for _, v := range k.W[i*per : (i+1)*per] {
			x := float64(v)
			if math.IsNaN(x) || math.IsInf(x, 0) {
				return nil
			}
			norm[i] += x * x
			maxAbs[i] = math.Max(maxAbs[i], math.Abs(x))
		}
		norm[i] = math.Sqrt(norm[i])
		layerMax = math.Max(layerMax, maxAbs[i])
	}
	zero := func(i int) bool { return maxAbs[i] == 0 || maxAbs[i] <= 1e-6*layerMax }
	var out []Pair
	for i := range k.M {
		for j := i + 1; j < k.M; j++ {
			if zero(i) || zero(j) {
				continue
			}
			dot := 0.0
			for t := range per {
				dot += float64(k.W[i*per+t]) * float64(k.W[j*per+t])
			}
			if c := dot / (norm[i] * norm[j]); c > 0.95 {
				out = append(out, Pair{i, j, c})
			}
		}
	}
	return out
}

// randomUnit returns a random direction of n values (Gaussian components,
// normalised: uniform on the sphere, common practice).
func randomUnit(r *rand.Rand, n int) []float64 {
	u := make([]float64, n)
	s := 0.0
	for i := range u {
		u[i] = r.NormFloat64()
		s += u[i] * u[i]
	}
	for i := range u {
		u[i] /= math.Sqrt(s)
	}
	return u
}

// atCosine returns a unit vector whose cosine with the unit vector u is c:
// c·u + √(1−c²)·w with w a random unit vector orthogonal to u (Gram–Schmidt).
func atCosine(r *rand.Rand, u []float64, c float64) []float64 {
	w := randomUnit(r, len(u))
	d := 0.0
	for i := range u {
		d += w[i] * u[i]
	}
	s := 0.0
	for i := range w {
		w[i] -= d * u[i]
		s += w[i] * w[i]
	}
	out := make([]float64, len(u))
	for i := range u {
		out[i] = c*u[i] + math.Sqrt(1-c*c)*w[i]/math.Sqrt(s)
	}
	return out
}

// planted is a pair of filters built at a chosen cosine.
type planted struct {
	i, j int
	cos  float64
}

// plantedKernels returns m random filters of c×kh×kw (random scales over six
// decades) with near-duplicates planted at cosines just above and below
// DuplicateCosine, and under the bound at which Duplicates stops looking
// (0.9495), a scaled copy, a negated copy and a zero filter, when m allows.
func plantedKernels(r *rand.Rand, m, c, kh, kw int) (*Kernels, []planted) {
	per := c * kh * kw
	w := make([]float32, m*per)
	put := func(f int, v []float64, scale float64) {
		for t := range per {
			w[f*per+t] = float32(scale * v[t])
		}
	}
	vec := make([][]float64, m)
	for f := range m {
		vec[f] = randomUnit(r, per)
		put(f, vec[f], math.Pow(10, 3*r.Float64()-3))
	}
	var plants []planted
	cosines := []float64{0.95 + 1e-4, 0.95 - 1e-4, 0.95 + 1e-5, 0.95 - 1e-5, 0.9497, 0.9999, 1, -1}
	for n, cs := range cosines {
		i, j := 2*n, 2*n+1
		if j >= m {
			break
		}
		if per == 1 && math.Abs(cs) != 1 {
			continue // one weight: every cosine is ±1
		}
		vec[j] = atCosine(r, vec[i], cs)
		put(j, vec[j], math.Pow(10, 3*r.Float64()-3))
		plants = append(plants, planted{i, j, cs})
	}
	if z := 2 * len(cosines); z < m {
		put(z, vec[z], 0)
	}
	return &Kernels{Node: "planted", M: m, C: c, KH: kh, KW: kw, Group: 1, W: w}, plants
}

func TestDuplicatesMatchesAllPairs(t *testing.T) {
	// Duplicates against the all-pairs reference, pair for pair and bit for
	// bit, on random kernels (seeded) with planted near-duplicates. The
	// planted cosines are exact up to float32 rounding of the weights
	// (relative 2⁻²⁴ per value, ≪ 1e-5), so the reference itself must find
	// those planted 1e-5 above 0.95 and miss those 1e-5 below (construction).
	shapes := []struct{ m, c, kh, kw int }{
		{1, 3, 3, 3}, {2, 1, 1, 1}, {7, 1, 1, 1}, {20, 1, 1, 5}, {24, 3, 7, 7},
		{40, 16, 3, 3}, {64, 64, 3, 3}, {33, 7, 1, 1}, {18, 2, 2, 17},
	}
	r := rand.New(rand.NewPCG(1, 2))
	for _, sh := range shapes {
		for range 3 {
			k, plants := plantedKernels(r, sh.m, sh.c, sh.kh, sh.kw)
			want := duplicatesSlow(k)
			got := k.Duplicates()
			if !slices.Equal(got, want) {
				t.Errorf("%d×%d×%d×%d: Duplicates %v, all pairs %v", sh.m, sh.c, sh.kh, sh.kw, got, want)
			}
			for _, p := range plants {
				found := slices.ContainsFunc(want, func(q Pair) bool { return q.I == p.i && q.J == p.j })
				if p.cos >= DuplicateCosine+1e-5 && !found || p.cos <= DuplicateCosine-1e-5 && found {
					t.Errorf("%d×%d×%d×%d: pair (%d,%d) planted at cosine %v: found %v", sh.m, sh.c, sh.kh, sh.kw, p.i, p.j, p.cos, found)
				}
			}
		}
	}
}

// resnet18Convs are the Conv weight shapes (M, C, kH, kW) of ResNet-18 (He
// et al. 2016, table 1, with the 1×1 projection shortcuts of torchvision's
// resnet18): 20 Convs, 11.2 M weights.
var resnet18Convs = [][4]int{
	{64, 3, 7, 7},
	{64, 64, 3, 3}, {64, 64, 3, 3}, {64, 64, 3, 3}, {64, 64, 3, 3},
	{128, 64, 3, 3}, {128, 128, 3, 3}, {128, 64, 1, 1}, {128, 128, 3, 3}, {128, 128, 3, 3},
	{256, 128, 3, 3}, {256, 256, 3, 3}, {256, 128, 1, 1}, {256, 256, 3, 3}, {256, 256, 3, 3},
	{512, 256, 3, 3}, {512, 512, 3, 3}, {512, 256, 1, 1}, {512, 512, 3, 3}, {512, 512, 3, 3},
}

// BenchmarkDuplicatesSpeedup reports how many times faster Duplicates is than
// the all-pairs reference over ResNet-18's Convs with random weights (each
// filter's direction uniform, a few planted near-duplicates per layer), the
// two interleaved and alternated so both see the same load: "speedup" is the
// median of slow/fast over the pairs. Random directions are the easy case
// for the early exit; a trained layer's filters are more alike.
func BenchmarkDuplicatesSpeedup(b *testing.B) {
	r := rand.New(rand.NewPCG(3, 4))
	var ks []*Kernels
	for _, s := range resnet18Convs {
		k, _ := plantedKernels(r, s[0], s[1], s[2], s[3])
		ks = append(ks, k)
	}
	run := func(f func(*Kernels) []Pair) time.Duration {
		t0 := time.Now()
		for _, k := range ks {
			f(k)
		}
		return time.Since(t0)
	}
	var ratios []float64
	var fastTotal time.Duration
	b.ReportAllocs()
	for b.Loop() {
		var slow, fast time.Duration
		if len(ratios)%2 == 0 {
			slow, fast = run(duplicatesSlow), run((*Kernels).Duplicates)
		} else {
			fast, slow = run((*Kernels).Duplicates), run(duplicatesSlow)
		}
		fastTotal += fast
		ratios = append(ratios, float64(slow)/float64(fast))
	}
	slices.Sort(ratios)
	med := ratios[len(ratios)/2]
	if len(ratios)%2 == 0 {
		med = (ratios[len(ratios)/2-1] + med) / 2
	}
	b.ReportMetric(med, "speedup")
	b.ReportMetric(ratios[0], "min-speedup")
	b.ReportMetric(float64(fastTotal.Milliseconds())/float64(len(ratios)), "fast-ms")
}

func TestDuplicates(t *testing.T) {
	// Hand-computed cosines of 4-vectors (filters of 1×2×2):
	//   a = (1, 0, 0, 0), b = (1, 0.2, 0, 0), c = (1, 0.4, 0, 0), d = −a, e = 0.
	//   cos(a,b) = 1/√1.04 = 0.98058 > 0.95: duplicate
	//   cos(a,c) = 1/√1.16 = 0.92848: not
	//   cos(b,c) = 1.08/√(1.04·1.16) = 0.98328: duplicate
	//   cos(a,d) = −1: opposite, not a duplicate; e has no direction.
	k := testKernels(5, 1, 2, 2,
		1, 0, 0, 0,
		1, 0.2, 0, 0,
		1, 0.4, 0, 0,
		-1, 0, 0, 0,
		0, 0, 0, 0)
	pairs := k.Duplicates()
	want := []Pair{{0, 1, 0.98058}, {1, 2, 0.98328}}
	if len(pairs) != len(want) {
		t.Fatalf("pairs %v, want %v", pairs, want)
	}
	for i, p := range pairs {
		if p.I != want[i].I || p.J != want[i].J || math.Abs(p.Cosine-want[i].Cosine) > 1e-5 {
			t.Errorf("pair %d = %+v, want %+v (±1e-5)", i, p, want[i])
		}
	}
	flags := k.Flags()
	wantFlags := map[int][]Flag{0: {FlagDuplicate}, 1: {FlagDuplicate}, 2: {FlagDuplicate}, 4: {FlagZeroKernel}}
	if len(flags) != len(wantFlags) {
		t.Errorf("flags %v, want %v", flags, wantFlags)
	}
	for m, w := range wantFlags {
		if !slices.Equal(flags[m], w) {
			t.Errorf("filter %d flags %v, want %v", m, flags[m], w)
		}
	}
}

func TestKernelFlagsNearZero(t *testing.T) {
	// A filter at 1e-7 of the layer's largest weight counts as zero (the
	// documented 1e-6 threshold); one at 1e-3 does not.
	k := testKernels(3, 1, 1, 2, 1, 0.5, 1e-7, 0, 1e-3, 0)
	f := k.Flags()
	if !slices.Equal(f[1], []Flag{FlagZeroKernel}) || len(f[2]) != 0 {
		t.Errorf("flags %v: want filter 1 zero_kernel, filter 2 unflagged", f)
	}
}

// testKernels builds kernels of m filters of c×kh×kw from literal weights.
func testKernels(m, c, kh, kw int, w ...float32) *Kernels {
	return &Kernels{M: m, C: c, KH: kh, KW: kw, Group: 1, W: w}
}

// Model.KernelFlags computes a convolution's flags once and keeps them with
// the model: the second call returns the very map of the first, equal to
// Kernels.Flags; a failure (not a convolution) is returned each time.
func TestModelKernelFlagsKept(t *testing.T) {
	b := onnxbuild.New(13, onnxbuild.Random)
	x := b.Input("image", onnxbuild.Float, 1, 3, 8, 8)
	c := b.Conv(x, 3, 4, 3, 1, 1)
	b.Output(b.Relu(c))
	m := build(t, b)
	conv := m.Layers[m.LayerOf(c)].Name
	first, n, err := m.KernelFlags(conv)
	if err != nil || n != 4 {
		t.Fatalf("KernelFlags(%s) = %v, %d filters, %v", conv, first, n, err)
	}
	k, err := m.Kernels(conv)
	if err != nil {
		t.Fatal(err)
	}
	if want := k.Flags(); !reflect.DeepEqual(first, want) {
		t.Errorf("KernelFlags %v, Kernels.Flags %v", first, want)
	}
	second, _, _ := m.KernelFlags(conv)
	if first == nil || reflect.ValueOf(first).Pointer() != reflect.ValueOf(second).Pointer() {
		t.Error("the second call computed the flags again")
	}
	relu := m.Layers[len(m.Layers)-1].Name
	for range 2 {
		if _, _, err := m.KernelFlags(relu); err == nil {
			t.Errorf("KernelFlags(%s): no error for a Relu", relu)
		}
	}
}
