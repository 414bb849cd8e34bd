package classes

import (
	"math"
	"slices"
	"testing"
)

// A vector that already is a distribution passes through unchanged.
func TestProbabilitiesPassThrough(t *testing.T) {
	for _, in := range [][]float32{
		{0.1, 0.2, 0.7},
		{1, 0},
		{0.25, 0.25, 0.25, 0.2505}, // sum 1.0005: float32 rounding of a softmax
	} {
		p, already := Probabilities(in)
		if !already || !slices.Equal(p, in) {
			t.Errorf("%v: got %v, already=%v; want it unchanged", in, p, already)
		}
		p[0] = 42
		if in[0] == 42 {
			t.Errorf("Probabilities returned its input slice")
		}
	}
}

// Logits get the softmax. Reference values computed by hand from the
// formula exp(s_i)/sum_j exp(s_j) (common practice); softmax([1,2,3]) =
// [0.09003057, 0.24472847, 0.66524096] is the textbook example.
func TestProbabilitiesSoftmax(t *testing.T) {
	cases := []struct {
		in   []float32
		want []float64
	}{
		{[]float32{1, 2, 3}, []float64{0.09003057, 0.24472847, 0.66524096}},
		{[]float32{0, 0}, []float64{0.5, 0.5}},
		// shifting all logits changes nothing; 1000 would overflow exp
		// without subtracting the maximum first
		{[]float32{1001, 1002, 1003}, []float64{0.09003057, 0.24472847, 0.66524096}},
		// in [0,1] but not summing to 1 (independent sigmoids): softmax
		{[]float32{0.5, 0.5, 0.5}, []float64{1.0 / 3, 1.0 / 3, 1.0 / 3}},
		{[]float32{-2, 5}, []float64{math.Exp(-2) / (math.Exp(-2) + math.Exp(5)), math.Exp(5) / (math.Exp(-2) + math.Exp(5))}},
	}
	for _, c := range cases {
		p, already := Probabilities(c.in)
		if already {
			t.Errorf("%v: taken for probabilities", c.in)
		}
		for i := range c.want {
			if math.Abs(float64(p[i])-c.want[i]) > 1e-7 {
				t.Errorf("%v: p[%d] = %v, want %v", c.in, i, p[i], c.want[i])
			}
		}
	}
}

// Edge cases: empty, one score (a binary classifier: kept in [0,1], else the
// logistic function), infinities and NaN never panic.
func TestProbabilitiesEdges(t *testing.T) {
	if p, _ := Probabilities(nil); p != nil {
		t.Errorf("nil: %v", p)
	}
	if p, already := Probabilities([]float32{0.8}); !already || p[0] != 0.8 {
		t.Errorf("single 0.8: %v %v", p, already)
	}
	// logistic(2) = 1/(1+e^-2) = 0.880797 (by hand)
	if p, already := Probabilities([]float32{2}); already || math.Abs(float64(p[0])-0.8807971) > 1e-6 {
		t.Errorf("single logit 2: %v %v", p, already)
	}
	inf := float32(math.Inf(1))
	if p, _ := Probabilities([]float32{inf, 0, inf}); !slices.Equal(p, []float32{0.5, 0, 0.5}) {
		t.Errorf("+Inf twice: %v", p)
	}
	ninf := float32(math.Inf(-1))
	if p, _ := Probabilities([]float32{ninf, ninf}); !slices.Equal(p, []float32{0.5, 0.5}) {
		t.Errorf("-Inf only: %v", p)
	}
	if p, _ := Probabilities([]float32{ninf, 0}); !slices.Equal(p, []float32{0, 1}) {
		t.Errorf("-Inf and 0: %v", p)
	}
	p, already := Probabilities([]float32{float32(math.NaN()), 1})
	if already || !math.IsNaN(float64(p[0])) || !math.IsNaN(float64(p[1])) {
		t.Errorf("NaN: %v %v", p, already)
	}
}

// TopK: highest first, ties by lower index, NaN last, k clipped; labels
// fall back to "class <i>" when missing or empty.
func TestTopK(t *testing.T) {
	p := []float32{0.1, 0.4, 0.1, float32(math.NaN()), 0.4}
	labels := []string{"bolt", "nut", ""}
	got := TopK(p, labels, 10)
	// By hand from p and the ordering rule above (our convention for ties).
	want := []Prediction{
		{1, "nut", 0.4}, {4, "class 4", 0.4}, {0, "bolt", 0.1}, {2, "class 2", 0.1},
	}
	if len(got) != 5 {
		t.Fatalf("got %d predictions, want 5 (k clipped to len(p))", len(got))
	}
	for i, w := range want {
		g := got[i]
		if g.Index != w.Index || g.Label != w.Label || math.Abs(g.Probability-w.Probability) > 1e-7 {
			t.Errorf("rank %d: got %+v, want %+v", i, g, w)
		}
	}
	if got[4].Index != 3 {
		t.Errorf("NaN should rank last, got index %d there", got[4].Index)
	}
	if g := TopK(p, nil, 1); len(g) != 1 || g[0].Label != "class 1" {
		t.Errorf("no labels: %+v", g)
	}
	if g := TopK(p, labels, 0); g != nil {
		t.Errorf("k=0: %+v", g)
	}
	if g := TopK(nil, labels, 3); g != nil {
		t.Errorf("empty p: %+v", g)
	}
}
