package classes

import (
	"math"
	"sort"
	"strconv"
)

// probTolerance is how far from 1 the sum of a vector may be for it to count
// as a probability distribution already. A softmax computed in float32 over
// tens of thousands of classes sums to 1 within about 1e-4; 1e-3 leaves
// room and still tells logits apart (common practice).
const probTolerance = 1e-3

// Probabilities turns one image's class scores into probabilities. When the
// scores already are a distribution (every value in [0, 1], sum within 1e-3
// of 1) they are returned as they are (copied) and already is true.
// Otherwise they are taken as logits and the softmax is applied:
//
//	p_i = exp(s_i - max s) / sum_j exp(s_j - max s)
//
// computed in float64. A single score is a binary classifier's: kept when in
// [0, 1], else passed through the logistic function 1/(1+exp(-s)). Infinite
// logits share the mass equally among the largest; NaN makes every value NaN.
// The input is not modified.
func Probabilities(scores []float32) (p []float32, already bool) {
	if len(scores) == 0 {
		return nil, false
	}
	p = make([]float32, len(scores))
	if isDistribution(scores) {
		copy(p, scores)
		return p, true
	}
	if len(scores) == 1 {
		s := float64(scores[0])
		if s >= 0 && s <= 1 {
			p[0] = scores[0]
			return p, true
		}
		p[0] = float32(1 / (1 + math.Exp(-s)))
		return p, false
	}
	top := math.Inf(-1)
	for _, s := range scores {
		if math.IsNaN(float64(s)) {
			for i := range p {
				p[i] = float32(math.NaN())
			}
			return p, false
		}
		top = math.Max(top, float64(s))
	}
	if math.IsInf(top, 0) {
		// All -Inf: nothing to prefer; +Inf: the infinite ones share.
		n := 0
		for _, s := range scores {
			if float64(s) == top {
				n++
			}
		}
		for i, s := range scores {
			if float64(s) == top {
				p[i] = float32(1 / float64(n))
			}
		}
		return p, false
	}
	sum := 0.0
	e := make([]float64, len(scores))
	for i, s := range scores {
		e[i] = math.Exp(float64(s) - top)
		sum += e[i]
	}
	for i := range e {
		p[i] = float32(e[i] / sum)
	}
	return p, false
}

func isDistribution(v []float32) bool {
	if len(v) < 2 {
		return false
	}
	sum := 0.0
	for _, x := range v {
		if !(x >= 0 && x <= 1) { // false for NaN too
			return false
		}
		sum += float64(x)
	}
	return math.Abs(sum-1) <= probTolerance
}

// Prediction is one class of a top-k list.
type Prediction struct {
	Index       int     // class index in the score vector
	Label       string  // the class's label, or "class <index>" when there is none
	Probability float64 // as given in p
}

// TopK returns the k classes of p with the highest values, highest first;
// equal values keep the lower index first and NaN comes last. labels[i]
// names class i; classes without a label (labels short or nil, or an empty
// line) are called "class <i>". k is clipped to len(p); k <= 0 gives nil.
func TopK(p []float32, labels []string, k int) []Prediction {
	k = min(k, len(p))
	if k <= 0 {
		return nil
	}
	idx := make([]int, len(p))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool {
		x, y := p[idx[a]], p[idx[b]]
		xn, yn := x != x, y != y
		if xn || yn {
			return !xn && yn
		}
		return x > y
	})
	out := make([]Prediction, k)
	for r, i := range idx[:k] {
		out[r] = Prediction{Index: i, Label: Label(labels, i), Probability: float64(p[i])}
	}
	return out
}

// Label is labels[i], or "class <i>" when labels has no (non-empty) entry i.
func Label(labels []string, i int) string {
	if i >= 0 && i < len(labels) && labels[i] != "" {
		return labels[i]
	}
	return "class " + strconv.Itoa(i)
}
