package analysis

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
	"strings"

	"fovea/modelio/classes"
	"fovea/modelio/infer"
	"fovea/modelio/prep"
)

// Runner is what an evaluation needs from a model session (*infer.Session
// has both methods): the batch it prefers and a run of n prepared images
// that reuses dst's buffers.
type Runner interface {
	BatchSize() int
	RunInto(ctx context.Context, input []float32, n int, dst *infer.Result) (*infer.Result, error)
}

// KeepLeastSure is how many "least sure correct" images an evaluation keeps:
// the correct answers with the smallest margin between the two most probable
// classes.
const KeepLeastSure = 50

// EvalRow is the model's answer on one labelled image.
type EvalRow struct {
	Index      int     `json:"index"` // position in the sorted entries of the whole data set
	File       string  `json:"file"`  // Sample.File
	True       int     `json:"true"`
	Predicted  int     `json:"predicted"`   // most probable class (the lowest index among equals)
	PPredicted float64 `json:"p_predicted"` // its probability
	PTrue      float64 `json:"p_true"`      // the true class's probability
	Margin     float64 `json:"margin"`      // most probable minus second most probable probability
}

// Correct reports whether the most probable class is the true one.
func (r EvalRow) Correct() bool { return r.True == r.Predicted }

// SkippedEntry is an entry that was not evaluated, and why.
type SkippedEntry struct {
	Index  int    `json:"index"` // position in the sorted entries of the whole data set
	File   string `json:"file"`
	Reason string `json:"reason"`
}

// Evaluation is the result of running a model over labelled images (or one
// shard of them). Every field merges exactly with another shard's (Merge):
// counts add, rows are concatenated and re-sorted.
type Evaluation struct {
	Model   string   `json:"model"`
	Data    string   `json:"data"`    // the folder or list as given
	Entries int      `json:"entries"` // entries of the whole data set (all shards)
	Classes int      `json:"classes"` // scores per image
	Labels  []string `json:"labels"`  // class names in force (may be shorter than Classes)
	Images  int      `json:"images"`  // images evaluated
	Correct int      `json:"correct"`
	Top5    int      `json:"top5"` // images whose true class is among the five most probable
	// Confusion[t][p] counts images of true class t predicted as p.
	Confusion [][]int `json:"confusion"`
	// Mistakes: every wrong answer, most confident first (PPredicted
	// descending, then Index).
	Mistakes []EvalRow `json:"mistakes"`
	// LeastSure: the KeepLeastSure correct answers with the smallest Margin
	// (then Index).
	LeastSure []EvalRow      `json:"least_sure"`
	Skipped   []SkippedEntry `json:"skipped"` // by Index
	// Rows holds every evaluated image's row, by Index; only a run fills it
	// (the window lists a confusion cell's images from it), not a merge.
	Rows []EvalRow `json:"-"`
}

// EvalOptions are the knobs of an evaluation. The zero value is usable.
type EvalOptions struct {
	Model string // the model's name, recorded in the result
	// Labels are the class names, recorded in the result.
	Labels []string
	// Offset is the Index of the first entry (a shard's start in the whole
	// data set); Entries the whole set's size (0: len(data.Samples)).
	Offset, Entries int
}

// Evaluate runs the model over every sample of data, prepared with c exactly
// as a single image is (prep.Fit, then c.TensorFromImage), and counts right
// and wrong answers, the confusion matrix, the mistakes and the least sure
// correct answers. Probabilities are classes.Probabilities of the scores
// (softmax unless the output already is a distribution), as for one image.
//
// Images are decoded by the shared Feed (a pool of workers, batches of
// s.BatchSize() in file order) while the model runs on the previous batch;
// memory grows with the number of images by one EvalRow each, nothing more. An unreadable image, an entry with a
// Problem and a class the model has no score for are recorded in Skipped
// and the run goes on. progress, when not nil, gets the entries done and
// the total. A cancelled ctx returns ctx.Err() promptly with every goroutine
// finished.
func Evaluate(ctx context.Context, s Runner, data *Labelled, c prep.Config, o EvalOptions,
	progress func(done, total int)) (*Evaluation, error) {
	if err := c.Validate(); err != nil {
		return nil, fmt.Errorf("viz: evaluate: %w", err)
	}
	e := &Evaluation{Model: o.Model, Data: data.Source, Entries: o.Entries, Labels: o.Labels,
		Mistakes: []EvalRow{}, LeastSure: []EvalRow{}, Skipped: []SkippedEntry{}}
	if e.Entries == 0 {
		e.Entries = len(data.Samples)
	}
	var work []int // indices into data.Samples of the images to run
	for i, smp := range data.Samples {
		if smp.Problem != "" {
			e.Skipped = append(e.Skipped, SkippedEntry{Index: o.Offset + i, File: smp.File, Reason: smp.Problem})
			continue
		}
		work = append(work, i)
	}
	if progress != nil {
		progress(0, len(data.Samples))
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	names := make([]string, len(work))
	for k, i := range work {
		names[k] = data.name(data.Samples[i].File)
	}
	bs := max(1, min(s.BatchSize(), len(work)))
	feed := NewFeed(ctx, names, c, FeedOptions{FS: data.fsys, Batch: bs, SkipUnreadable: true})
	defer feed.Close()
	err := evalFeed(ctx, s, feed, names, c.Len(), func(res *infer.Result, ks []int, skipped []loadFailure) error {
		for _, f := range skipped {
			i := work[f.k]
			e.Skipped = append(e.Skipped, SkippedEntry{Index: o.Offset + i, File: data.Samples[i].File, Reason: f.reason})
		}
		for b, k := range ks {
			i := work[k]
			smp := data.Samples[i]
			scores := res.Scores(b)
			if len(scores) == 0 {
				return fmt.Errorf("viz: evaluate: the model returned no scores for %s", smp.File)
			}
			if e.Classes == 0 {
				e.Classes = len(scores)
				e.Confusion = make([][]int, e.Classes)
				for t := range e.Confusion {
					e.Confusion[t] = make([]int, e.Classes)
				}
			} else if len(scores) != e.Classes {
				return fmt.Errorf("viz: evaluate: the model gave %d scores for %s, %d before", len(scores), smp.File, e.Classes)
			}
			if smp.Class >= e.Classes {
				e.Skipped = append(e.Skipped, SkippedEntry{Index: o.Offset + i, File: smp.File,
					Reason: fmt.Sprintf("class %d, but the model has %d classes", smp.Class, e.Classes)})
				continue
			}
			p, _ := classes.Probabilities(scores)
			e.add(answer(o.Offset+i, smp.File, smp.Class, p))
		}
		return nil
	}, func(done int) {
		if progress != nil && done > 0 {
			progress(work[done-1]+1, len(data.Samples))
		}
	})
	if err != nil {
		if ctx.Err() != nil {
			return nil, ctx.Err()
		}
		return nil, err
	}
	if progress != nil {
		progress(len(data.Samples), len(data.Samples))
	}
	e.finish()
	return e, nil
}

// answer reads one image's probabilities p: its most probable class (the
// lowest index among equal probabilities, as classes.TopK orders them; NaN
// counts as least probable), the margin to the second, and whether the true
// class t is among the five most probable.
func answer(index int, file string, t int, p []float32) evalAnswer {
	best, second := -1, -1
	less := func(a, b int) bool { // p[a] ranks below p[b]
		x, y := p[a], p[b]
		if x != x {
			return y == y || a > b
		}
		if y != y {
			return false
		}
		return x < y || (x == y && a > b)
	}
	for j := range p {
		switch {
		case best < 0 || less(best, j):
			best, second = j, best
		case second < 0 || less(second, j):
			second = j
		}
	}
	rank := 0
	for j := range p {
		if j != t && less(t, j) {
			rank++
		}
	}
	r := EvalRow{Index: index, File: file, True: t, Predicted: best, PPredicted: float64(p[best]), PTrue: float64(p[t])}
	if second >= 0 {
		r.Margin = float64(p[best]) - float64(p[second])
	}
	return evalAnswer{row: r, top5: rank < 5}
}

type evalAnswer struct {
	row  EvalRow
	top5 bool
}

// add counts one answer.
func (e *Evaluation) add(a evalAnswer) {
	r := a.row
	e.Images++
	e.Confusion[r.True][r.Predicted]++
	if a.top5 {
		e.Top5++
	}
	if r.Correct() {
		e.Correct++
		e.LeastSure = append(e.LeastSure, r)
		if len(e.LeastSure) >= 2*KeepLeastSure {
			e.trimLeastSure()
		}
	} else {
		e.Mistakes = append(e.Mistakes, r)
	}
	e.Rows = append(e.Rows, r)
}

func (e *Evaluation) trimLeastSure() {
	slices.SortFunc(e.LeastSure, func(a, b EvalRow) int {
		return cmp.Or(cmp.Compare(a.Margin, b.Margin), cmp.Compare(a.Index, b.Index))
	})
	if len(e.LeastSure) > KeepLeastSure {
		e.LeastSure = slices.Clip(e.LeastSure[:KeepLeastSure])
	}
}

// finish puts the lists in their documented order.
func (e *Evaluation) finish() {
	slices.SortFunc(e.Mistakes, func(a, b EvalRow) int {
		return cmp.Or(cmp.Compare(b.PPredicted, a.PPredicted), cmp.Compare(a.Index, b.Index))
	})
	e.trimLeastSure()
	slices.SortFunc(e.Skipped, func(a, b SkippedEntry) int { return cmp.Compare(a.Index, b.Index) })
	slices.SortFunc(e.Rows, func(a, b EvalRow) int { return cmp.Compare(a.Index, b.Index) })
}

// Merge combines the evaluations of disjoint shards of one data set into the
// evaluation a single run over all of it gives (without Rows): counts add,
// mistakes and least sure answers are concatenated and re-sorted. The parts
// must agree on the model, the data and the number of classes.
func Merge(parts []*Evaluation) (*Evaluation, error) {
	if len(parts) == 0 {
		return nil, errors.New("viz: merge: no parts")
	}
	out := &Evaluation{Model: parts[0].Model, Data: parts[0].Data, Entries: parts[0].Entries,
		Mistakes: []EvalRow{}, LeastSure: []EvalRow{}, Skipped: []SkippedEntry{}}
	for _, p := range parts {
		if p.Model != out.Model || p.Data != out.Data || p.Entries != out.Entries {
			return nil, fmt.Errorf("viz: merge: parts of different runs (model %q, data %q, %d entries; and model %q, data %q, %d entries)",
				out.Model, out.Data, out.Entries, p.Model, p.Data, p.Entries)
		}
		if len(p.Labels) > len(out.Labels) {
			out.Labels = p.Labels
		}
		if p.Classes == 0 {
			// A shard without images: nothing to count.
		} else if out.Classes == 0 {
			out.Classes = p.Classes
			out.Confusion = make([][]int, p.Classes)
			for t := range out.Confusion {
				out.Confusion[t] = make([]int, p.Classes)
			}
		} else if p.Classes != out.Classes {
			return nil, fmt.Errorf("viz: merge: parts with %d and %d classes", out.Classes, p.Classes)
		}
		if p.Classes > 0 && len(p.Confusion) != p.Classes {
			return nil, fmt.Errorf("viz: merge: a part's confusion matrix has %d rows for %d classes", len(p.Confusion), p.Classes)
		}
		for t, row := range p.Confusion {
			if len(row) != p.Classes {
				return nil, fmt.Errorf("viz: merge: a part's confusion row %d has %d columns for %d classes", t, len(row), p.Classes)
			}
			for q, n := range row {
				out.Confusion[t][q] += n
			}
		}
		out.Images += p.Images
		out.Correct += p.Correct
		out.Top5 += p.Top5
		out.Mistakes = append(out.Mistakes, p.Mistakes...)
		out.LeastSure = append(out.LeastSure, p.LeastSure...)
		out.Skipped = append(out.Skipped, p.Skipped...)
	}
	seen := map[int]bool{}
	for _, list := range [][]EvalRow{out.Mistakes, out.LeastSure} {
		for _, r := range list {
			if seen[r.Index] {
				return nil, fmt.Errorf("viz: merge: entry %d (%s) appears in two parts: the parts overlap", r.Index, r.File)
			}
			seen[r.Index] = true
		}
	}
	out.finish()
	return out, nil
}

// Z95 is the standard normal quantile for a two-sided 95 % interval,
// Φ⁻¹(0.975) (scipy.stats.norm.ppf(0.975), as statsmodels uses).
const Z95 = 1.959963984540054

// Wilson returns the Wilson score interval for k successes in n trials at
// normal quantile z (E. B. Wilson, "Probable inference, the law of
// succession, and statistical inference", JASA 22 (1927) 209–212):
//
//	centre = (p̂ + z²/2n) / (1 + z²/n)
//	half   = z/(1 + z²/n) · √(p̂(1−p̂)/n + z²/4n²)
//
// clipped to [0, 1]. n = 0 gives (0, 1): no information.
func Wilson(k, n int, z float64) (lo, hi float64) {
	if n <= 0 {
		return 0, 1
	}
	nf := float64(n)
	p := float64(k) / nf
	z2 := z * z
	den := 1 + z2/nf
	centre := (p + z2/(2*nf)) / den
	half := z / den * math.Sqrt(p*(1-p)/nf+z2/(4*nf*nf))
	return max(0, centre-half), min(1, centre+half)
}

// ClassMetrics are one class's figures: Support images have it as true
// class, Predicted images were given it; Precision = TP/Predicted (0 when
// nothing was predicted as it, as scikit-learn's zero_division=0), Recall =
// TP/Support (0 when Support is 0).
type ClassMetrics struct {
	Index     int     `json:"index"`
	Label     string  `json:"label"`
	Precision float64 `json:"precision"`
	Recall    float64 `json:"recall"`
	Support   int     `json:"support"`
	Predicted int     `json:"predicted"`
}

// PerClass returns each class's precision, recall and support from the
// confusion matrix.
func (e *Evaluation) PerClass() []ClassMetrics {
	out := make([]ClassMetrics, e.Classes)
	for c := range out {
		tp := e.Confusion[c][c]
		support, predicted := 0, 0
		for k := 0; k < e.Classes; k++ {
			support += e.Confusion[c][k]
			predicted += e.Confusion[k][c]
		}
		m := ClassMetrics{Index: c, Label: classes.Label(e.Labels, c), Support: support, Predicted: predicted}
		if predicted > 0 {
			m.Precision = float64(tp) / float64(predicted)
		}
		if support > 0 {
			m.Recall = float64(tp) / float64(support)
		}
		out[c] = m
	}
	return out
}

// Accuracy is Correct/Images (0 for no images).
func (e *Evaluation) Accuracy() float64 {
	if e.Images == 0 {
		return 0
	}
	return float64(e.Correct) / float64(e.Images)
}

// Cell returns the rows of confusion cell (true t, predicted p), by Index.
// Only a run's result (with Rows) has them.
func (e *Evaluation) Cell(t, p int) []EvalRow {
	var out []EvalRow
	for _, r := range e.Rows {
		if r.True == t && r.Predicted == p {
			out = append(out, r)
		}
	}
	return out
}

// loadFailure is an image that could not be decoded: k indexes the work list.
type loadFailure struct {
	k      int
	reason string
}

// evalFeed runs the batches of feed (the shared decoding pipeline, in file
// order, over names) through s and hands each result to use with the work indices of
// its images and of the files that could not be read; done gets the number
// of files covered so far. It returns use's first error, a run's error or
// ctx.Err().
func evalFeed(ctx context.Context, s Runner, feed *Feed, names []string, size int,
	use func(res *infer.Result, ks []int, skipped []loadFailure) error, done func(int)) error {
	var res *infer.Result
	next := 0 // first work index not yet accounted for
	for {
		b, err := feed.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return fmt.Errorf("viz: evaluate: %w", err)
		}
		// A batch covers work indices [next, b.Done): its images in order,
		// less the skipped ones (in order too).
		var ks []int
		var skipped []loadFailure
		sk := 0
		for k := next; k < b.Done; k++ {
			if sk < len(b.Skipped) && (len(ks) == b.N || names[k] == b.Skipped[sk].File) {
				skipped = append(skipped, loadFailure{k: k, reason: reason(b.Skipped[sk].Err)})
				sk++
				continue
			}
			ks = append(ks, k)
		}
		next = b.Done
		if b.N > 0 {
			if res, err = s.RunInto(ctx, b.Data[:b.N*size], b.N, res); err != nil {
				feed.Release(b)
				return fmt.Errorf("viz: evaluate: %w", err)
			}
		}
		err = use(res, ks, skipped)
		feed.Release(b)
		if err != nil {
			return err
		}
		done(next)
	}
	return ctx.Err()
}

// reason is an error message for a person: the package prefix dropped.
func reason(err error) string {
	return strings.TrimPrefix(err.Error(), "prep: ")
}
