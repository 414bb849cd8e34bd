package infer

import "fovea/modelio"

// Result is what one Run returns for n images.
type Result struct {
	// N is the number of images.
	N int
	// Outputs are the model's own float32 outputs, in graph order.
	Outputs []modelio.Tensor
	// Maps holds every captured tensor (Options.Capture) by name.
	Maps map[string]modelio.Tensor
	// Score is the index in Outputs of the class scores: the output named by
	// Options.Output, else the one modelio.Model.ScoreOutput chooses when its
	// shape in this run is a vector per image, else the first output whose
	// per-image shape has exactly one dimension larger than 1 (a vector such
	// as [N,1000] or [N,1000,1,1]), else the first output.
	Score int
}

// Scores returns the class scores of image i (a sub-slice of the score
// output, no copy): logits or probabilities, as the model produces them; see
// Probabilities. It returns nil when there are no outputs or i is out of
// range.
func (r *Result) Scores(i int) []float32 {
	if r == nil || r.Score < 0 || r.Score >= len(r.Outputs) || i < 0 || i >= r.N {
		return nil
	}
	t := r.Outputs[r.Score]
	if len(t.Shape) == 0 || t.Shape[0] != int64(r.N) {
		return nil
	}
	return t.Image(i).Data
}

// scoreIndex picks Result.Score: the session's score output when it was
// named, or chosen and shaped like a vector in this run; else by shape.
func (s *Session) scoreIndex(outs []modelio.Tensor) int {
	if s.score != "" {
		for j, t := range outs {
			if t.Name == s.score && (s.scoreSet || vectorShape(t.Shape)) {
				return j
			}
		}
	}
	return scoreIndex(outs)
}

// vectorShape reports whether a run's output shape has exactly one
// dimension larger than 1 after the batch.
func vectorShape(shape []int64) bool {
	big := 0
	for _, d := range shape[min(1, len(shape)):] {
		if d > 1 {
			big++
		}
	}
	return big == 1
}

// scoreIndex picks Result.Score from the outputs' shapes alone.
func scoreIndex(outs []modelio.Tensor) int {
	for j, t := range outs {
		big := 0
		for _, d := range t.Shape[min(1, len(t.Shape)):] {
			if d > 1 {
				big++
			}
		}
		if big == 1 {
			return j
		}
	}
	return 0
}
