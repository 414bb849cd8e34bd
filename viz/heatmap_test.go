package viz

import (
	"strings"
	"testing"
)

// TestSaturated: the warning's thresholds as the issue states them
// (probability above 0.999 or below 0.001, largest absolute drop under 1 %
// of the probability's 0–1 range), on hand-made grids.
func TestSaturated(t *testing.T) {
	grid := func(v float64) [][]float64 { return [][]float64{{0, v}, {-v / 2, 0}} }
	for _, c := range []struct {
		score Score
		p     float64
		drop  float64
		want  bool
	}{
		{ScoreProbability, 0.99999, 5e-6, true},
		{ScoreProbability, 0.99999, -5e-6, true}, // raised, not lowered: |drop| counts
		{ScoreProbability, 0.0004, 1e-4, true},
		{ScoreProbability, 0.99999, 0.02, false}, // the patches do show
		{ScoreProbability, 0.99, 5e-6, false},    // not sure enough
		{ScoreLogit, 0.99999, 5e-6, false},       // logits do not saturate
		{ScoreLogProb, 0.99999, 5e-6, false},
	} {
		o := &Occlusion{OcclusionSettings: OcclusionSettings{Score: c.score}, Probability: c.p, Scores: grid(c.drop), Logits: "z"}
		if got := o.Saturated(); got != c.want {
			t.Errorf("%s p=%g drop=%g: saturated %v, want %v", c.score, c.p, c.drop, got, c.want)
		}
		if note := o.SaturationNote(); (note != "") != c.want || c.want && !strings.Contains(note, `score logit (the logits, tensor "z")`) {
			t.Errorf("%s p=%g drop=%g: note %q", c.score, c.p, c.drop, note)
		}
	}
	o := &Occlusion{Probability: 1, Scores: grid(0), NoLogits: "no softmax"}
	if o.Suggested() != ScoreLogProb || !strings.Contains(o.SaturationNote(), "score logprob") {
		t.Errorf("without logits: suggests %q: %q", o.Suggested(), o.SaturationNote())
	}
}
