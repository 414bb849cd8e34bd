package modelio

import (
	"fmt"
	"math"
	"sync"
)

// Flag marks a filter (an output channel of a layer) as suspect. Its string
// is the spelling used in JSON, CSV and on the command line.
//
// The weights alone decide FlagZeroKernel and FlagDuplicate (Kernels.Flags
// computes them here); the dead-filter scan (package fovea/viz/analysis)
// decides the others from activations on probe images. All are declared in
// this package, the lowest that needs them, because the drawing package
// marks every kind on filter tiles and must not depend on the analyses.
type Flag string

// The filter flags.
const (
	FlagZeroKernel Flag = "zero_kernel" // every weight is (near) zero: the filter outputs only its bias
	FlagDuplicate  Flag = "duplicate"   // cosine similarity above DuplicateCosine with another filter
	FlagDead       Flag = "dead"        // never fires on the probe images
	FlagRare       Flag = "rare"        // fires on fewer than the rare fraction of probe images
	FlagConstant   Flag = "constant"    // its output does not change across positions and images
)

// DuplicateCosine is the cosine similarity above which two filters count as
// near-duplicates.
const DuplicateCosine = 0.95

// zeroRel is the relative size below which a filter counts as zero: its
// largest |weight| is at most zeroRel times the largest |weight| of the layer.
// Exactly zero filters (pruned) always qualify.
const zeroRel = 1e-6

// Check validates the shape against the data and rejects non-finite
// weights. Its errors name the layer ("kernels of the first layer: ...")
// without a package prefix, for callers to wrap.
func (k *Kernels) Check() error {
	if k == nil {
		return fmt.Errorf("no kernels")
	}
	if k.M <= 0 || k.C <= 0 || k.KH <= 0 || k.KW <= 0 {
		return fmt.Errorf("kernels of %s: shape %d×%d×%d×%d has a non-positive dimension", k.describe(), k.M, k.C, k.KH, k.KW)
	}
	n := int64(k.M) * int64(k.C) * int64(k.KH) * int64(k.KW)
	if n != int64(len(k.W)) {
		return fmt.Errorf("kernels of %s: shape %d×%d×%d×%d needs %d weights, have %d", k.describe(), k.M, k.C, k.KH, k.KW, n, len(k.W))
	}
	for i, v := range k.W {
		// NaN fails both comparisons; ±Inf fails one.
		if !(v >= -math.MaxFloat32 && v <= math.MaxFloat32) {
			per := k.C * k.KH * k.KW
			return fmt.Errorf("kernels of %s: filter %d has a non-finite weight (%v)", k.describe(), i/per, v)
		}
	}
	return nil
}

// Norms returns the L2 norm of every filter (all input channels).
func (k *Kernels) Norms() []float64 {
	per := k.C * k.KH * k.KW
	out := make([]float64, k.M)
	for m := range k.M {
		s := 0.0
		for _, v := range k.W[m*per : (m+1)*per] {
			s += float64(v) * float64(v)
		}
		out[m] = math.Sqrt(s)
	}
	return out
}

// Pair is two filters and the cosine similarity of their weight vectors.
type Pair struct {
	I, J   int // I < J
	Cosine float64
}

// Duplicates returns every pair of filters whose weight vectors (all input
// channels flattened) have cosine similarity above DuplicateCosine, ordered
// by I then J. Zero filters have no direction and pair with nothing. Filters
// that are negatives of each other (cosine near −1) are not duplicates: after
// a ReLU they respond to opposite patterns. Kernels that fail validation
// yield nil.
//
// For unit vectors û, v̂ the cosine is 1 − ‖û−v̂‖²/2, so cosine > 0.95 means
// ‖û−v̂‖² < 2(1−0.95). Each filter is normalised once (float32), and a pair
// is dropped as soon as the running sum of squared differences passes that
// bound plus a margin (dupMargin) far larger than the rounding of the sum;
// most pairs of a trained layer point apart and are dropped after a few
// blocks. The cosine of every pair that survives is computed exactly as
// before (float64 dot product over the product of the norms), so the result
// is that of comparing every pair in full (a test checks it).
func (k *Kernels) Duplicates() []Pair {
	if k.Check() != nil {
		return nil
	}
	return duplicates(k, zeroFilters(k))
}

// duplicates is Duplicates for checked kernels whose zero filters are known.
func duplicates(k *Kernels, zero []bool) []Pair {
	per := k.C * k.KH * k.KW
	norms := k.Norms()
	live := make([]int, 0, k.M)
	for i := range k.M {
		if !zero[i] {
			live = append(live, i)
		}
	}
	unit := make([]float32, len(live)*per)
	for n, i := range live {
		u := unit[n*per : (n+1)*per]
		for t, v := range k.W[i*per : (i+1)*per] {
			u[t] = float32(float64(v) / norms[i])
		}
	}
	const bound = 2*(1-DuplicateCosine) + dupMargin
	var out []Pair
	for n, i := range live {
		u := unit[n*per : (n+1)*per]
		a := k.W[i*per : (i+1)*per]
		for o := n + 1; o < len(live); o++ {
			if !unitClose(u, unit[o*per:(o+1)*per], bound) {
				continue
			}
			j := live[o]
			b := k.W[j*per : (j+1)*per]
			dot := 0.0
			for t := range a {
				dot += float64(a[t]) * float64(b[t])
			}
			if c := dot / (norms[i] * norms[j]); c > DuplicateCosine {
				out = append(out, Pair{i, j, c})
			}
		}
	}
	return out
}

// dupMargin is added to the distance bound of [Kernels.Duplicates]. The running sum
// is float32 within a block of dupBlock values and float64 across blocks, so
// its relative rounding error is below (dupBlock+3)·2⁻²⁴ ≈ 4e-6 (the +3:
// normalising, subtracting, squaring), i.e. under 1e-6 of the bound 0.1;
// 1e-3 leaves room to spare and costs only the exact check of a few more
// pairs.
const dupMargin = 1e-3

// dupBlock is how many values unitClose adds up between checks of the bound.
const dupBlock = 32

// unitClose reports whether ‖u−v‖² ≤ bound, stopping at the first block
// after which the running sum exceeds bound. len(v) must be len(u).
func unitClose(u, v []float32, bound float64) bool {
	v = v[:len(u)]
	sum := 0.0
	for t := 0; t < len(u); t += dupBlock {
		e := min(t+dupBlock, len(u))
		uu, vv := u[t:e], v[t:e]
		var s0, s1, s2, s3 float32
		x := 0
		for ; x+4 <= len(uu); x += 4 {
			d0 := uu[x] - vv[x]
			d1 := uu[x+1] - vv[x+1]
			d2 := uu[x+2] - vv[x+2]
			d3 := uu[x+3] - vv[x+3]
			s0 += d0 * d0
			s1 += d1 * d1
			s2 += d2 * d2
			s3 += d3 * d3
		}
		for ; x < len(uu); x++ {
			d := uu[x] - vv[x]
			s0 += d * d
		}
		sum += float64(s0) + float64(s1) + float64(s2) + float64(s3)
		if sum > bound {
			return false
		}
	}
	return true
}

func zeroFilters(k *Kernels) []bool {
	per := k.C * k.KH * k.KW
	layerMax := 0.0
	maxAbs := make([]float64, k.M)
	for m := range k.M {
		// float32 comparisons: exact, and several times faster than
		// math.Max on float64 (the weights are finite: checkKernels).
		var hi float32
		for _, v := range k.W[m*per : (m+1)*per] {
			if v < 0 {
				v = -v
			}
			if v > hi {
				hi = v
			}
		}
		maxAbs[m] = float64(hi)
		layerMax = max(layerMax, maxAbs[m])
	}
	out := make([]bool, k.M)
	for m := range out {
		out[m] = maxAbs[m] == 0 || maxAbs[m] <= zeroRel*layerMax
	}
	return out
}

// Flags returns, per filter index, the flags the weights alone decide:
// FlagZeroKernel when the filter's largest |weight| is 0 or at most 1e-6 of
// the layer's largest, FlagDuplicate for both members of every pair that
// [Kernels.Duplicates] finds. Filters without flags are absent. Kernels that fail
// validation yield an empty map.
func (k *Kernels) Flags() map[int][]Flag {
	out := map[int][]Flag{}
	if k.Check() != nil {
		return out
	}
	zero := zeroFilters(k)
	for m, z := range zero {
		if z {
			out[m] = append(out[m], FlagZeroKernel)
		}
	}
	dup := map[int]bool{}
	for _, p := range duplicates(k, zero) {
		dup[p.I], dup[p.J] = true, true
	}
	for m := range k.M {
		if dup[m] {
			out[m] = append(out[m], FlagDuplicate)
		}
	}
	return out
}

// describe names the layer the kernels belong to, for messages.
func (k *Kernels) describe() string {
	if k.Node == "" {
		return "the first layer"
	}
	return fmt.Sprintf("%q", k.Node)
}

// flagMemo holds a model's kernel flags by node (Model.KernelFlags).
type flagMemo struct {
	sync.Mutex
	byNode map[string]nodeFlags
}

type nodeFlags struct {
	filters int
	flags   map[int][]Flag
}

// KernelFlags returns the flags of the filters of convolution node
// (Kernels.Flags) and the number of its filters. On a ResNet-18-sized model
// the flags take a fifth of a second, as long as a scan of 32 images of the
// same size, and depend on the weights alone: they are computed on the
// first call for each node and kept with the model, so a second scan (or
// the window's rescan) reads them back. Errors (node not a readable
// convolution) are returned each time and not kept. The map returned is
// shared between callers: do not modify it.
func (m *Model) KernelFlags(node string) (flags map[int][]Flag, filters int, err error) {
	m.flags.Lock()
	f, ok := m.flags.byNode[node]
	m.flags.Unlock()
	if ok {
		return f.flags, f.filters, nil
	}
	k, err := m.Kernels(node)
	if err != nil {
		return nil, 0, err
	}
	f = nodeFlags{filters: k.M, flags: k.Flags()}
	m.flags.Lock()
	m.flags.byNode[node] = f
	m.flags.Unlock()
	return f.flags, f.filters, nil
}
