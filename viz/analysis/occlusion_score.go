package analysis

import (
	"errors"
	"fmt"
	"math"

	"fovea/modelio"
	"fovea/modelio/classes"
	"fovea/modelio/infer"
	"fovea/viz"
)

// OcclusionCapture lists the tensors an occlusion session captures besides
// the model's outputs (infer.Options.Capture): the logits behind each output
// that a Softmax or LogSoftmax over the classes produces
// (modelio.Model.ClassSoftmax), so that the logit and log-probability scores
// read them in the same run. Capturing a softmax's input changes none of the
// model's outputs (the session guarantees it) and costs only the copy.
func OcclusionCapture(m *modelio.Model) []string {
	var names []string
	for _, v := range m.Outputs {
		if cs, err := m.ClassSoftmax(v.Name); err == nil {
			names = append(names, cs.Logits)
		}
	}
	return names
}

// ErrNoLogits is wrapped by Occlude's error when the logit score is asked of
// a model that has no logits: its output is already a probability
// distribution and no Softmax over the classes makes it.
var ErrNoLogits = errors.New("the model has no logits to score")

// logProbFloor is the log-probability given to an output probability of 0
// when there are no logits: log of the smallest positive float32, so that a
// probability that underflowed reads as "at most this" instead of −∞.
var logProbFloor = math.Log(math.SmallestNonzeroFloat32)

// scorer turns a run's outputs into the per-class scores of one kind. It is
// decided once, on the unoccluded image, so that every position is scored
// the same way.
type scorer struct {
	kind    viz.Score
	already bool   // the score output already is a probability distribution
	logits  string // the captured tensor holding the logits; "" when they are the score output itself or absent
	have    bool   // the model has logits (captured or as its output)
	// For viz.Occlusion: what was scored, how, and where the logits are.
	source, note       string
	logitName, noLogit string
}

// newScorer inspects the unoccluded run res of the model m for the score
// kind: whether the output already is a distribution, and where the logits
// are. It refuses ScoreLogit when the model has none, with the reason.
func newScorer(m *modelio.Model, res *infer.Result, kind viz.Score) (*scorer, error) {
	out := res.Outputs[res.Score]
	row := res.Scores(0)
	sc := &scorer{kind: kind}
	_, sc.already = classes.Probabilities(row)
	logitNote := ""
	cs, err := m.ClassSoftmax(out.Name)
	switch {
	case err == nil:
		t, ok := res.Maps[cs.Logits]
		switch {
		case !ok:
			sc.noLogit = fmt.Sprintf("the logits %q before %s node %q were not captured in the run (analysis.OcclusionCapture)", cs.Logits, cs.Op, cs.Node)
		case len(t.Image(0).Data) != len(row):
			sc.noLogit = fmt.Sprintf("tensor %q before %s node %q holds %d values per image, the output %q %d", cs.Logits, cs.Op, cs.Node, len(t.Image(0).Data), out.Name, len(row))
		default:
			if why := reproduces(cs.Op, t.Image(0).Data, row); why != "" {
				sc.noLogit = fmt.Sprintf("%s of tensor %q does not reproduce the output %q (%s)", cs.Op, cs.Logits, out.Name, why)
				break
			}
			sc.logits, sc.have, sc.logitName = cs.Logits, true, cs.Logits
			logitNote = fmt.Sprintf("tensor %q, the input of %s node %q that makes output %q", cs.Logits, cs.Op, cs.Node, out.Name)
		}
	case !sc.already:
		sc.have, sc.logitName = true, out.Name
		logitNote = fmt.Sprintf("output %q", out.Name)
	default:
		sc.noLogit = fmt.Sprintf("the output %q is already a probability distribution and %v", out.Name, err)
	}
	switch kind {
	case viz.ScoreLogit:
		if !sc.have {
			return nil, fmt.Errorf("viz: occlusion: score %s: %w: %s; use score %s or %s", kind, ErrNoLogits, sc.noLogit, viz.ScoreProbability, viz.ScoreLogProb)
		}
		sc.source, sc.note = sc.logitName, logitNote
	case viz.ScoreLogProb:
		if sc.have {
			sc.source, sc.note = sc.logitName, "log-softmax in float64 of "+logitNote
		} else {
			sc.source, sc.note = out.Name, fmt.Sprintf("log of output %q (already probabilities; the model has no logits)", out.Name)
		}
	default:
		sc.source = out.Name
		if sc.already {
			sc.note = fmt.Sprintf("output %q (already probabilities)", out.Name)
		} else {
			sc.note = fmt.Sprintf("softmax in float64 of output %q", out.Name)
		}
	}
	return sc, nil
}

// reproduces checks that op (Softmax or LogSoftmax) of the logits z gives the
// model's output y, computed in float64, within float32 rounding (1e-4
// absolute for probabilities, 1e-3 relative for log-probabilities): a guard
// against reading the wrong tensor. It returns "" or what differs.
func reproduces(op string, z, y []float32) string {
	if op == "LogSoftmax" {
		for i, v := range logSoftmax(z) {
			if d := math.Abs(v - float64(y[i])); !(d <= 1e-3*math.Max(1, math.Abs(v))) {
				return fmt.Sprintf("class %d: %g against %g", i, v, y[i])
			}
		}
		return ""
	}
	for i, v := range softmax(z) {
		if d := math.Abs(v - float64(y[i])); !(d <= 1e-4) {
			return fmt.Sprintf("class %d: %g against %g", i, v, y[i])
		}
	}
	return ""
}

// logitRow returns the logits of image i of res.
func (sc *scorer) logitRow(res *infer.Result, i int) []float32 {
	if sc.logits == "" {
		return res.Scores(i)
	}
	return res.Maps[sc.logits].Image(i).Data
}

// probs returns the class probabilities of image i of res: the output as it
// is when it already is a distribution, else its softmax in float64.
func (sc *scorer) probs(res *infer.Result, i int) []float64 {
	row := res.Scores(i)
	if !sc.already {
		return softmax(row)
	}
	p := make([]float64, len(row))
	for j, v := range row {
		p[j] = float64(v)
	}
	return p
}

// score returns the per-class scores of image i of res, of the scorer's kind.
func (sc *scorer) score(res *infer.Result, i int) []float64 {
	switch sc.kind {
	case viz.ScoreLogit:
		row := sc.logitRow(res, i)
		v := make([]float64, len(row))
		for j, x := range row {
			v[j] = float64(x)
		}
		return v
	case viz.ScoreLogProb:
		if sc.have {
			return logSoftmax(sc.logitRow(res, i))
		}
		p := sc.probs(res, i)
		for j, x := range p {
			p[j] = math.Max(math.Log(x), logProbFloor)
		}
		return p
	}
	return sc.probs(res, i)
}

// logSoftmax returns log p_i = z_i − log Σ_j exp z_j in float64, computed as
// (z_i − max z) − log Σ_j exp(z_j − max z) so that no exponential overflows.
func logSoftmax(z []float32) []float64 {
	m := math.Inf(-1)
	for _, x := range z {
		m = math.Max(m, float64(x))
	}
	var sum float64
	for _, x := range z {
		sum += math.Exp(float64(x) - m)
	}
	ls := math.Log(sum)
	out := make([]float64, len(z))
	for i, x := range z {
		out[i] = float64(x) - m - ls
	}
	return out
}
