package analysis

import (
	"cmp"
	"fmt"
	"math"
	"slices"

	"fovea/modelio"
)

// This file compares two models without running them: their layer tables
// and the kernels of the convolutions they share. A is the reference, B the
// candidate. The health and prediction comparisons are in compare_run.go.

// LayerSide is one model's view of an aligned layer.
type LayerSide struct {
	Op     string `json:"op"`
	Shape  string `json:"shape"` // the output shape, batch first ("N×16×32×32")
	Params int64  `json:"params"`
	MACs   int64  `json:"macs"`
}

// LayerPair is one row of the aligned layer tables. A or B is nil when the
// layer exists in one model only. Changed says whether the row differs;
// Differs names what: "op", "shape" (the output volume), "params", "macs",
// "only in a", "only in b"; By says how the row was paired: "name",
// "position" or "" for a layer of one model only.
type LayerPair struct {
	Name    string     `json:"name"` // A's name (B's when only in B)
	NameB   string     `json:"name_b,omitempty"`
	A       *LayerSide `json:"a"`
	B       *LayerSide `json:"b"`
	Changed bool       `json:"changed"`
	Differs []string   `json:"differs"`
	By      string     `json:"by,omitempty"`
}

func side(l modelio.Layer) *LayerSide {
	return &LayerSide{Op: l.Op, Shape: l.Shape.String(), Params: l.Params, MACs: l.MACs}
}

// AlignLayers pairs the layers of a and b: first by equal name; then, among
// the layers left over, in execution order, a layer of A with the next
// left-over layer of B that has the same op and output shape (a model
// re-exported with other generated names). What is still left is reported
// as only in A or only in B, in execution order after the paired rows.
// same is true when every layer paired by name with nothing changed: the
// architectures are the same, and kernels and channels can be compared.
func AlignLayers(a, b *modelio.Model) (rows []LayerPair, same bool) {
	byName := map[string]int{}
	for i, l := range b.Layers {
		byName[l.Name] = i
	}
	usedB := make([]bool, len(b.Layers))
	pairB := make([]int, len(a.Layers))
	for i, l := range a.Layers {
		pairB[i] = -1
		if j, ok := byName[l.Name]; ok && !usedB[j] {
			pairB[i], usedB[j] = j, true
		}
	}
	byPos := make([]bool, len(a.Layers))
	next := 0
	for i, l := range a.Layers {
		if pairB[i] >= 0 {
			continue
		}
		for j := next; j < len(b.Layers); j++ {
			if usedB[j] {
				continue
			}
			if b.Layers[j].Op == l.Op && b.Layers[j].Shape.String() == l.Shape.String() {
				pairB[i], usedB[j], byPos[i] = j, true, true
				next = j + 1
				break
			}
		}
	}
	same = len(a.Layers) == len(b.Layers)
	for i, l := range a.Layers {
		if pairB[i] < 0 {
			same = false
			rows = append(rows, LayerPair{Name: l.Name, A: side(l), Changed: true, Differs: []string{"only in a"}})
			continue
		}
		lb := b.Layers[pairB[i]]
		r := LayerPair{Name: l.Name, A: side(l), B: side(lb), By: "name", Differs: []string{}}
		if byPos[i] {
			r.By, r.NameB = "position", lb.Name
			same = false
		}
		if l.Op != lb.Op {
			r.Differs = append(r.Differs, "op")
		}
		if r.A.Shape != r.B.Shape {
			r.Differs = append(r.Differs, "shape")
		}
		if l.Params != lb.Params {
			r.Differs = append(r.Differs, "params")
		}
		if l.MACs != lb.MACs {
			r.Differs = append(r.Differs, "macs")
		}
		r.Changed = len(r.Differs) > 0
		if r.Changed {
			same = false
		}
		rows = append(rows, r)
	}
	for j, l := range b.Layers {
		if !usedB[j] {
			same = false
			rows = append(rows, LayerPair{Name: l.Name, B: side(l), Changed: true, Differs: []string{"only in b"}})
		}
	}
	return rows, same
}

// Matching says how filters of A are paired with filters of B.
type Matching string

const (
	// MatchIndex pairs filter i of A with filter i of B: right for a
	// checkpoint of the same training run.
	MatchIndex Matching = "index"
	// MatchGreedy pairs filters by best cosine similarity, greedily: the
	// most similar pair of all is taken first, then the most similar of the
	// filters still free, and so on. A network trained from another seed
	// holds its filters in another order. Greedy is not always the pairing
	// with the largest total similarity (the Hungarian method finds that);
	// it is what a person matching tiles by eye does, and it never pairs a
	// filter with a worse partner while a better free one exists.
	MatchGreedy Matching = "greedy"
)

// FilterPair compares filter Index of A with filter Match of B (the same
// index under MatchIndex). Cosine is the cosine similarity of the two
// kernels (all C·kH·kW weights, bias excluded); NormRatio is ‖B‖/‖A‖ (L2).
// Both are nil where a kernel is all zeros (undefined). BiasA, BiasB are the
// biases (0 without one). Changed: the kernels or biases differ beyond
// float32 rounding (cosine below 1−1e-6, norm ratio off 1 by more than
// 1e-6, or a bias off by more than 1e-6 relative).
type FilterPair struct {
	Layer     string   `json:"layer"`
	Index     int      `json:"index"`
	Match     int      `json:"match"`
	Cosine    *float64 `json:"cosine"`
	NormRatio *float64 `json:"norm_ratio"`
	BiasA     float64  `json:"bias_a"`
	BiasB     float64  `json:"bias_b"`
	Changed   bool     `json:"changed"`
}

// FilterLayer is the comparison of one convolution present in both models
// with the same kernel shape. Skipped holds the convolutions that could not
// be compared, with the reason.
type FilterLayer struct {
	Layer string           `json:"layer"`
	A, B  *modelio.Kernels `json:"-"`
	Pairs []FilterPair     `json:"-"` // by A's filter index
}

// CompareFilters compares the kernels of every Conv present in both a and b
// (paired by AlignLayers' name matching) whose kernel shapes and groups are
// equal. Convolutions that cannot be compared are returned in skipped with
// the reason ("conv3: kernel 16×3×3×3 against 32×3×3×3").
func CompareFilters(a, b *modelio.Model, match Matching) (layers []FilterLayer, skipped []string, err error) {
	if match != MatchIndex && match != MatchGreedy {
		return nil, nil, fmt.Errorf("viz: compare: filter matching %q: want %q or %q", match, MatchIndex, MatchGreedy)
	}
	inB := map[string]modelio.Layer{}
	for _, l := range b.Layers {
		inB[l.Name] = l
	}
	for _, l := range a.Layers {
		if l.Op != "Conv" {
			continue
		}
		lb, ok := inB[l.Name]
		if !ok || lb.Op != "Conv" {
			skipped = append(skipped, fmt.Sprintf("%s: no convolution of that name in b", l.Name))
			continue
		}
		ka, errA := a.Kernels(l.Name)
		kb, errB := b.Kernels(l.Name)
		if errA != nil || errB != nil {
			skipped = append(skipped, fmt.Sprintf("%s: kernels not readable (%v)", l.Name, cmp.Or(errA, errB)))
			continue
		}
		if ka.M != kb.M || ka.C != kb.C || ka.KH != kb.KH || ka.KW != kb.KW || ka.Group != kb.Group {
			skipped = append(skipped, fmt.Sprintf("%s: kernel %d×%d×%d×%d (group %d) against %d×%d×%d×%d (group %d)",
				l.Name, ka.M, ka.C, ka.KH, ka.KW, ka.Group, kb.M, kb.C, kb.KH, kb.KW, kb.Group))
			continue
		}
		layers = append(layers, FilterLayer{Layer: l.Name, A: ka, B: kb, Pairs: compareKernels(l.Name, ka, kb, match)})
	}
	return layers, skipped, nil
}

// filterVec returns filter m's weights.
func filterVec(k *modelio.Kernels, m int) []float32 {
	per := k.C * k.KH * k.KW
	return k.W[m*per : (m+1)*per]
}

// Cosine returns the cosine similarity of x and y (equal lengths) and
// whether it is defined (neither is all zeros). Sums are in float64.
func Cosine(x, y []float32) (float64, bool) {
	var dot, nx, ny float64
	for i := range x {
		a, b := float64(x[i]), float64(y[i])
		dot += a * b
		nx += a * a
		ny += b * b
	}
	if nx == 0 || ny == 0 {
		return 0, false
	}
	c := dot / (math.Sqrt(nx) * math.Sqrt(ny))
	return max(-1, min(1, c)), true
}

func norm(x []float32) float64 {
	s := 0.0
	for _, v := range x {
		s += float64(v) * float64(v)
	}
	return math.Sqrt(s)
}

func compareKernels(layer string, ka, kb *modelio.Kernels, match Matching) []FilterPair {
	n := ka.M
	cos := make([][]float64, n) // cos[i][j]: A's i against B's j; NaN when undefined
	partner := make([]int, n)
	for i := range n {
		partner[i] = i
	}
	if match == MatchGreedy {
		type cand struct {
			i, j int
			c    float64
		}
		var all []cand
		for i := range n {
			cos[i] = make([]float64, n)
			for j := range n {
				c, ok := Cosine(filterVec(ka, i), filterVec(kb, j))
				if !ok {
					c = math.Inf(-1) // an undefined pair comes last
				}
				cos[i][j] = c
				all = append(all, cand{i, j, c})
			}
		}
		// Most similar first; ties by A's index then B's, so the result
		// does not depend on the sort.
		slices.SortStableFunc(all, func(x, y cand) int {
			if c := cmp.Compare(y.c, x.c); c != 0 {
				return c
			}
			if x.i != y.i {
				return x.i - y.i
			}
			return x.j - y.j
		})
		usedA, usedB := make([]bool, n), make([]bool, n)
		for _, c := range all {
			if !usedA[c.i] && !usedB[c.j] {
				partner[c.i], usedA[c.i], usedB[c.j] = c.j, true, true
			}
		}
	}
	bias := func(k *modelio.Kernels, m int) float64 {
		if len(k.Bias) == k.M {
			return float64(k.Bias[m])
		}
		return 0
	}
	out := make([]FilterPair, n)
	for i := range n {
		j := partner[i]
		x, y := filterVec(ka, i), filterVec(kb, j)
		p := FilterPair{Layer: layer, Index: i, Match: j, BiasA: bias(ka, i), BiasB: bias(kb, j)}
		if c, ok := Cosine(x, y); ok {
			r := norm(y) / norm(x)
			p.Cosine, p.NormRatio = &c, &r
			p.Changed = c < 1-1e-6 || math.Abs(r-1) > 1e-6
		} else {
			p.Changed = norm(x) != norm(y)
		}
		if d := math.Abs(p.BiasA - p.BiasB); d > 1e-6*max(1, math.Abs(p.BiasA)) {
			p.Changed = true
		}
		out[i] = p
	}
	return out
}

// MostChanged returns the pairs of all layers ordered as a reader wants
// them: the least similar first (undefined cosines before all others), then
// the norm ratio furthest from 1 (on a log scale), then layer order and
// index. Unchanged pairs come after all changed ones.
func MostChanged(layers []FilterLayer) []FilterPair {
	var all []FilterPair
	order := map[string]int{}
	for i, l := range layers {
		order[l.Layer] = i
		all = append(all, l.Pairs...)
	}
	key := func(p FilterPair) (float64, float64) {
		if p.Cosine == nil {
			return math.Inf(-1), math.Inf(1)
		}
		return *p.Cosine, math.Abs(math.Log(*p.NormRatio))
	}
	slices.SortStableFunc(all, func(x, y FilterPair) int {
		if x.Changed != y.Changed {
			if x.Changed {
				return -1
			}
			return 1
		}
		cx, rx := key(x)
		cy, ry := key(y)
		if c := cmp.Compare(cx, cy); c != 0 {
			return c
		}
		if c := cmp.Compare(ry, rx); c != 0 {
			return c
		}
		if c := cmp.Compare(order[x.Layer], order[y.Layer]); c != 0 {
			return c
		}
		return x.Index - y.Index
	})
	return all
}
