package main

import (
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"fovea/modelio/classes"
	"fovea/viz/analysis"
)

var evaluateCommand = &command{
	name:    "evaluate",
	args:    "--data DIR_OR_LIST [--json | --csv] [--top N] [--min-accuracy X] [--shard K/N]",
	summary: "accuracy, confusion matrix and mistakes over labelled images",
	about: `Runs the model on every image of a labelled folder (one sub-folder per class,
named by a class label, any case, or a class number) or of a list file of
path,label lines (CSV or TSV; paths relative to the list), and prints the
accuracy with its 95% Wilson score interval (E. B. Wilson, JASA 1927), top-5
accuracy when there are more than 5 classes, precision, recall and support per
class, the confusion matrix (rows: true class, columns: predicted), the
mistakes (most confident first) and the least sure correct answers. Images are
prepared exactly as classify prepares one. Unreadable images, unknown labels
and empty class folders are listed as skipped; the run goes on.

With --shard K/N only the K-th (1…N) of N slices of the sorted file list is
run and the partial result is printed as JSON; ` + "`fovea merge PART...`" + ` combines
the N parts into exactly what one run over all the images prints.
With --min-accuracy X the exit status is 3 when the accuracy is below X.`,
	setup: func(fs *flag.FlagSet, cf *common) func(*invocation) int {
		data := fs.String("data", "", "labelled `DIR` or list FILE (default for the demo: its probe images)")
		var out evalOutput
		out.declare(fs)
		shard := fs.String("shard", "", "run only slice `K/N` (1 ≤ K ≤ N) of the sorted files and print the partial result as JSON")
		return func(j *invocation) int {
			if msg := out.check(); msg != "" {
				return j.usageErr("%s", msg)
			}
			k, n := 0, 1
			if *shard != "" {
				var err error
				if k, n, err = parseShard(*shard); err != nil {
					return j.usageErr("--shard %s: %v", *shard, err)
				}
				if out.json || out.csv {
					return j.usageErr("--shard prints its partial result as JSON; give --json or --csv to `fovea merge`")
				}
			}
			var set *analysis.Labelled
			var err error
			switch {
			case *data != "":
				set, err = j.ws.OpenLabelled(*data)
			case j.ws.Demo != "":
				set, err = j.ws.DemoLabelled()
			default:
				return j.usageErr("--data DIR_OR_LIST is required for your own model")
			}
			if err != nil {
				return j.fail(err)
			}
			total := len(set.Samples)
			part, err := set.Shard(k, n)
			if err != nil {
				return j.fail(err)
			}
			cfg, _ := j.ws.Prep()
			e, err := j.ws.Evaluate(j.ctx, part, analysis.EvalOptions{Offset: total * k / n, Entries: total}, j.progressFunc("evaluating"))
			if err != nil {
				return j.fail(err)
			}
			if *shard != "" {
				return j.writeJSON(evalPart{Format: partFormat, Command: "evaluate", Model: j.ws.Name(), Shard: [2]int{k + 1, n}, Settings: cfg.String(), Result: e})
			}
			if e.Images == 0 {
				fmt.Fprintf(j.stderr, "fovea evaluate: %s: none of the %d entries could be evaluated\n", set.Source, total)
				writeSkipped(j.stderr, e)
				return exitUsage
			}
			return out.write(j.cli, "evaluate", e)
		}
	},
}

// parseShard reads "K/N" with 1 ≤ K ≤ N and returns K-1 and N.
func parseShard(s string) (k, n int, err error) {
	a, b, ok := strings.Cut(s, "/")
	if ok {
		k, err = strconv.Atoi(a)
		if err == nil {
			n, err = strconv.Atoi(b)
		}
	}
	if !ok || err != nil || n < 1 || k < 1 || k > n {
		return 0, 0, fmt.Errorf("want K/N with 1 ≤ K ≤ N, e.g. 2/8")
	}
	return k - 1, n, nil
}

// partFormat names the partial-result files `--shard` writes.
const partFormat = "fovea-part-1"

// evalPart is what `evaluate --shard K/N` prints: the shard's counts and
// rows, which `fovea merge` adds up.
type evalPart struct {
	Format   string               `json:"format"`
	Command  string               `json:"command"`
	Model    string               `json:"model"`
	Shard    [2]int               `json:"shard"`    // K (1-based) and N
	Settings string               `json:"settings"` // the preprocessing in force: parts must agree
	Result   *analysis.Evaluation `json:"result"`
}

// evalOutput are the output flags evaluate and merge share.
type evalOutput struct {
	json, csv bool
	top       int
	minAcc    string
}

func (o *evalOutput) declare(fs *flag.FlagSet) {
	fs.BoolVar(&o.json, "json", false, "print the result as JSON")
	fs.BoolVar(&o.csv, "csv", false, "print the per-class table with the confusion matrix rows as CSV")
	fs.IntVar(&o.top, "top", -1, "list at most `N` mistakes and least sure answers (default: 20 in the text, all mistakes in JSON)")
	fs.StringVar(&o.minAcc, "min-accuracy", "", "exit with status 3 when the accuracy is below `X` (a fraction like 0.9, or 90%)")
}

// check returns a usage problem of the flags, or "".
func (o *evalOutput) check() string {
	if o.json && o.csv {
		return "give --json or --csv, not both"
	}
	if o.top < -1 {
		return fmt.Sprintf("--top %d: give 0 or more", o.top)
	}
	if _, err := o.threshold(); err != nil {
		return err.Error()
	}
	return ""
}

// threshold is --min-accuracy as a fraction; -1 when not given.
func (o *evalOutput) threshold() (float64, error) {
	if o.minAcc == "" {
		return -1, nil
	}
	s, pct := strings.CutSuffix(strings.TrimSpace(o.minAcc), "%")
	v, err := strconv.ParseFloat(s, 64)
	if pct {
		v /= 100
	}
	if err != nil || !(v >= 0 && v <= 1) {
		return 0, fmt.Errorf("--min-accuracy %s: give a fraction from 0 to 1 (0.9) or a percentage (90%%)", o.minAcc)
	}
	return v, nil
}

// write prints e in the chosen form and applies --min-accuracy.
func (o *evalOutput) write(c *cli, cmd string, e *analysis.Evaluation) int {
	top := o.top
	var err error
	switch {
	case o.json:
		if top < 0 {
			top = len(e.Mistakes)
		}
		enc := json.NewEncoder(c.stdout)
		enc.SetIndent("", "  ")
		enc.SetEscapeHTML(false)
		err = enc.Encode(evaluateDocOf(e, top))
	case o.csv:
		err = e.WriteCSV(c.stdout)
	default:
		if top < 0 {
			top = 20
		}
		writeEvalText(c.stdout, e, top)
	}
	if err != nil {
		fmt.Fprintf(c.stderr, "fovea %s: writing the result: %v\n", cmd, err)
		return exitFail
	}
	if x, _ := o.threshold(); x >= 0 && e.Accuracy() < x {
		fmt.Fprintf(c.stderr, "fovea %s: accuracy %.4f is below --min-accuracy %s\n", cmd, e.Accuracy(), o.minAcc)
		return exitGate
	}
	return exitOK
}

// The JSON form of `fovea evaluate` (with data,
// correct, top5 null for 5 classes or fewer, least_sure, and per class the
// number predicted as it).
type evaluateDoc struct {
	Model      string                  `json:"model"`
	Data       string                  `json:"data"`
	Images     int                     `json:"images"`
	Correct    int                     `json:"correct"`
	Accuracy   float64                 `json:"accuracy"`
	AccuracyCI [2]float64              `json:"accuracy_ci"` // 95 % Wilson score interval
	Top5       *float64                `json:"top5"`
	Classes    []analysis.ClassMetrics `json:"classes"`
	Confusion  [][]int                 `json:"confusion"` // [true][predicted]
	Mistakes   []mistakeDoc            `json:"mistakes"`
	LeastSure  []leastSureDoc          `json:"least_sure"`
	Skipped    []skippedDoc            `json:"skipped"`
}

type mistakeDoc struct {
	File       string  `json:"file"`
	True       int     `json:"true"`
	Predicted  int     `json:"predicted"`
	PPredicted float64 `json:"p_predicted"`
	PTrue      float64 `json:"p_true"`
}

type leastSureDoc struct {
	File   string  `json:"file"`
	True   int     `json:"true"`
	Margin float64 `json:"margin"`
}

type skippedDoc struct {
	File   string `json:"file"`
	Reason string `json:"reason"`
}

func evaluateDocOf(e *analysis.Evaluation, top int) evaluateDoc {
	lo, hi := analysis.Wilson(e.Correct, e.Images, analysis.Z95)
	d := evaluateDoc{Model: e.Model, Data: e.Data, Images: e.Images, Correct: e.Correct, Accuracy: e.Accuracy(),
		AccuracyCI: [2]float64{lo, hi}, Classes: e.PerClass(), Confusion: e.Confusion,
		Mistakes: []mistakeDoc{}, LeastSure: []leastSureDoc{}, Skipped: []skippedDoc{}}
	if e.Classes > 5 && e.Images > 0 {
		v := float64(e.Top5) / float64(e.Images)
		d.Top5 = &v
	}
	for _, r := range e.Mistakes[:min(top, len(e.Mistakes))] {
		d.Mistakes = append(d.Mistakes, mistakeDoc{r.File, r.True, r.Predicted, r.PPredicted, r.PTrue})
	}
	for _, r := range e.LeastSure[:min(top, len(e.LeastSure))] {
		d.LeastSure = append(d.LeastSure, leastSureDoc{r.File, r.True, r.Margin})
	}
	for _, s := range e.Skipped {
		d.Skipped = append(d.Skipped, skippedDoc{s.File, s.Reason})
	}
	return d
}

// writeSkipped lists the entries that were not evaluated.
func writeSkipped(w io.Writer, e *analysis.Evaluation) {
	for _, s := range e.Skipped {
		fmt.Fprintf(w, "skipped %s: %s\n", s.File, s.Reason)
	}
}

func pct(v float64) string { return strconv.FormatFloat(100*v, 'f', 2, 64) + "%" }

// writeEvalText prints the summary a person reads.
func writeEvalText(w io.Writer, e *analysis.Evaluation, top int) {
	lo, hi := analysis.Wilson(e.Correct, e.Images, analysis.Z95)
	fmt.Fprintf(w, "%s on %s: %d images, %d classes\n", e.Model, e.Data, e.Images, e.Classes)
	fmt.Fprintf(w, "accuracy %s (%d/%d), 95%% interval %s – %s (Wilson score)\n", pct(e.Accuracy()), e.Correct, e.Images, pct(lo), pct(hi))
	if e.Classes > 5 {
		fmt.Fprintf(w, "top-5 accuracy %s (%d/%d)\n", pct(float64(e.Top5)/float64(e.Images)), e.Top5, e.Images)
	}
	if len(e.Skipped) > 0 {
		fmt.Fprintf(w, "%d entries skipped:\n", len(e.Skipped))
		writeSkipped(w, e)
	}
	fmt.Fprintln(w)
	t := table{right: []bool{true, false, true, true, true}}
	t.add("class", "label", "support", "precision", "recall")
	var empty []string
	for _, m := range e.PerClass() {
		t.add(strconv.Itoa(m.Index), m.Label, strconv.Itoa(m.Support), pct(m.Precision), pct(m.Recall))
		if m.Support == 0 {
			empty = append(empty, m.Label)
		}
	}
	t.write(w)
	if len(empty) > 0 {
		fmt.Fprintf(w, "classes without images: %s\n", strings.Join(empty, ", "))
	}
	fmt.Fprintln(w, "\nconfusion matrix (rows: true class, columns: predicted class)")
	cm := table{right: []bool{false}}
	head := []string{""}
	for c := 0; c < e.Classes; c++ {
		head = append(head, strconv.Itoa(c))
		cm.right = append(cm.right, true)
	}
	cm.add(head...)
	for r, row := range e.Confusion {
		cells := []string{strconv.Itoa(r) + " " + classes.Label(e.Labels, r)}
		for _, n := range row {
			cells = append(cells, strconv.Itoa(n))
		}
		cm.add(cells...)
	}
	cm.write(w)
	if n := len(e.Mistakes); n > 0 {
		fmt.Fprintf(w, "\nmistakes, most confident first (%d of %d):\n", min(top, n), n)
		mt := table{right: []bool{true, true, false, false, false}}
		mt.add("p(pred)", "p(true)", "true", "predicted", "file")
		for _, r := range e.Mistakes[:min(top, n)] {
			mt.add(prob(r.PPredicted), prob(r.PTrue), classes.Label(e.Labels, r.True), classes.Label(e.Labels, r.Predicted), r.File)
		}
		mt.write(w)
	}
	if n := len(e.LeastSure); n > 0 && top > 0 {
		fmt.Fprintf(w, "\nleast sure correct answers (smallest margin between the top two):\n")
		lt := table{right: []bool{true, false, false}}
		lt.add("margin", "class", "file")
		for _, r := range e.LeastSure[:min(top, n)] {
			lt.add(prob(r.Margin), classes.Label(e.Labels, r.True), r.File)
		}
		lt.write(w)
	}
	fmt.Fprintln(w, "\nAccuracy on these images says how the model does on images like them; the interval assumes they are a random sample.")
}

func prob(v float64) string {
	if math.IsNaN(v) {
		return "NaN"
	}
	return strconv.FormatFloat(v, 'f', 4, 64)
}
