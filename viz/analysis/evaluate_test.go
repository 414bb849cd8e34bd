package analysis

import (
	"context"
	"encoding/json"
	"errors"
	"math"
	"os"
	"path"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"testing"
	"testing/fstest"

	"fovea/modelio"
	"fovea/modelio/infer"
	"fovea/modelio/prep"
)

// evalReference is testdata/evaluate/reference.json, written by
// make_reference.py beside it with scikit-learn 1.2.1 and statsmodels 0.13.5
// (Debian python3-sklearn, python3-statsmodels) from the committed PyTorch
// predictions in assets/demo/demo.json and literal cases.
type evalReference struct {
	Cases []struct {
		Name      string    `json:"name"`
		Classes   int       `json:"classes"`
		YTrue     []int     `json:"y_true"`
		YPred     []int     `json:"y_pred"`
		Files     []string  `json:"files"`
		Confusion [][]int   `json:"confusion_matrix"`
		Precision []float64 `json:"precision"`
		Recall    []float64 `json:"recall"`
		Support   []int     `json:"support"`
		Accuracy  float64   `json:"accuracy_score"`
	} `json:"cases"`
	Wilson []struct {
		K    int     `json:"successes"`
		N    int     `json:"trials"`
		Low  float64 `json:"low"`
		High float64 `json:"high"`
	} `json:"wilson"`
}

func readEvalReference(t *testing.T) *evalReference {
	t.Helper()
	data, err := os.ReadFile(filepath.Join("..", "..", "testdata", "evaluate", "reference.json"))
	if err != nil {
		t.Fatal(err)
	}
	var r evalReference
	if err := json.Unmarshal(data, &r); err != nil {
		t.Fatal(err)
	}
	if len(r.Cases) < 3 || len(r.Wilson) < 5 {
		t.Fatalf("reference.json holds %d cases and %d intervals; regenerate it", len(r.Cases), len(r.Wilson))
	}
	return &r
}

// TestWilsonStatsmodels: the Wilson score interval (E. B. Wilson, JASA 22
// (1927) 209–212) against statsmodels.stats.proportion.proportion_confint(
// method="wilson", alpha=0.05). One pair is also a textbook worked example,
// from memory: 81 of 263 gives 0.2553–0.3662 (R. G. Newcombe, Statistics in
// Medicine 17 (1998) 857–872, Table II). Tolerance 1e-12: the same closed
// formula in float64.
func TestWilsonStatsmodels(t *testing.T) {
	ref := readEvalReference(t)
	for _, w := range ref.Wilson {
		lo, hi := Wilson(w.K, w.N, Z95)
		if math.Abs(lo-w.Low) > 1e-12 || math.Abs(hi-w.High) > 1e-12 {
			t.Errorf("Wilson(%d, %d) = [%.15g, %.15g], statsmodels [%.15g, %.15g]", w.K, w.N, lo, hi, w.Low, w.High)
		}
	}
	lo, hi := Wilson(81, 263, Z95)
	if math.Round(lo*1e4) != 2553 || math.Round(hi*1e4) != 3662 {
		t.Errorf("Wilson(81, 263) = [%.4f, %.4f], Newcombe's example 0.2553–0.3662", lo, hi)
	}
}

// oneHot is a probability vector that predicts class p.
func oneHot(n, p int) []float32 {
	v := make([]float32, n)
	v[p] = 1
	return v
}

// evalFromPredictions counts literal predictions as an evaluation would.
func evalFromPredictions(classes int, yTrue, yPred []int) *Evaluation {
	e := &Evaluation{Classes: classes, Confusion: make([][]int, classes)}
	for i := range e.Confusion {
		e.Confusion[i] = make([]int, classes)
	}
	for i := range yTrue {
		e.add(answer(i, "", yTrue[i], oneHot(classes, yPred[i])))
	}
	e.finish()
	return e
}

// TestMetricsSklearn: confusion matrix, precision, recall, support and
// accuracy against scikit-learn's confusion_matrix,
// precision_recall_fscore_support(average=None, zero_division=0) and
// accuracy_score on the same predictions (reference.json). Counts exact;
// ratios within 1e-12 (one float64 division each).
func TestMetricsSklearn(t *testing.T) {
	ref := readEvalReference(t)
	for _, c := range ref.Cases {
		t.Run(c.Name, func(t *testing.T) {
			e := evalFromPredictions(c.Classes, c.YTrue, c.YPred)
			if !reflect.DeepEqual(e.Confusion, c.Confusion) {
				t.Errorf("confusion %v, sklearn %v", e.Confusion, c.Confusion)
			}
			if math.Abs(e.Accuracy()-c.Accuracy) > 1e-12 {
				t.Errorf("accuracy %v, sklearn %v", e.Accuracy(), c.Accuracy)
			}
			for i, m := range e.PerClass() {
				if math.Abs(m.Precision-c.Precision[i]) > 1e-12 || math.Abs(m.Recall-c.Recall[i]) > 1e-12 || m.Support != c.Support[i] {
					t.Errorf("class %d: precision %v recall %v support %d; sklearn %v %v %d", i,
						m.Precision, m.Recall, m.Support, c.Precision[i], c.Recall[i], c.Support[i])
				}
			}
			if len(e.Mistakes) != e.Images-e.Correct {
				t.Errorf("%d mistakes listed, %d counted", len(e.Mistakes), e.Images-e.Correct)
			}
		})
	}
}

// TestAnswer: the most probable class, the margin and the top-5 test on
// literal probabilities; ties go to the lower index as classes.TopK orders
// them (common practice: numpy's argmax does the same).
func TestAnswer(t *testing.T) {
	for _, tc := range []struct {
		p          []float32
		true_      int
		pred       int
		margin     float64
		top5       bool
		pPred, pTr float64
	}{
		{[]float32{0.1, 0.6, 0.3}, 2, 1, float64(float32(0.6)) - float64(float32(0.3)), true, float64(float32(0.6)), float64(float32(0.3))},
		{[]float32{0.25, 0.25, 0.5, 0}, 1, 2, 0.25, true, 0.5, 0.25},
		{[]float32{0.5, 0.5}, 1, 0, 0, true, 0.5, 0.5},
		// True class ranked 6th of 7: not in the top five.
		{[]float32{0.3, 0.2, 0.15, 0.12, 0.11, 0.07, 0.05}, 6, 0, float64(float32(0.3)) - float64(float32(0.2)), false, float64(float32(0.3)), float64(float32(0.05))},
		// Ranked 5th: in.
		{[]float32{0.3, 0.2, 0.15, 0.12, 0.11, 0.07, 0.05}, 4, 0, float64(float32(0.3)) - float64(float32(0.2)), true, float64(float32(0.3)), float64(float32(0.11))},
		// A NaN is never the answer.
		{[]float32{float32(math.NaN()), 0.2, 0.8}, 2, 2, float64(float32(0.8)) - float64(float32(0.2)), true, float64(float32(0.8)), float64(float32(0.8))},
	} {
		a := answer(0, "x", tc.true_, tc.p)
		if a.row.Predicted != tc.pred || math.Abs(a.row.Margin-tc.margin) > 1e-9 || a.top5 != tc.top5 ||
			a.row.PPredicted != tc.pPred || a.row.PTrue != tc.pTr {
			t.Errorf("answer(%v, true %d) = %+v top5 %v; want predicted %d margin %v top5 %v", tc.p, tc.true_, a.row, a.top5, tc.pred, tc.margin, tc.top5)
		}
	}
}

// demoPredictions are demo.json's probe predictions: the class PyTorch gave
// each probe image under each checkpoint (assets/make_demo.py), and the
// reference's sklearn confusion matrices of them.
func demoPredictions(t *testing.T) map[string]map[string]int {
	data, err := os.ReadFile(filepath.Join(demoDir(), "demo.json"))
	if err != nil {
		t.Fatal(err)
	}
	var d struct {
		Probe struct {
			Predictions []struct {
				File      string `json:"file"`
				Label     int    `json:"label"`
				Healthy   int    `json:"healthy"`
				Unhealthy int    `json:"unhealthy"`
			} `json:"predictions"`
		} `json:"probe"`
	}
	if err := json.Unmarshal(data, &d); err != nil {
		t.Fatal(err)
	}
	out := map[string]map[string]int{"healthy": {}, "unhealthy": {}}
	for _, p := range d.Probe.Predictions {
		out["healthy"][p.File] = p.Healthy
		out["unhealthy"][p.File] = p.Unhealthy
	}
	return out
}

// demoLabelledFolder arranges the demo's probe images as a labelled folder:
// sub-folders named by label in mixed case ("Hex Nut") or by class number,
// plus the entries that must be reported: an unreadable image, a folder
// that names no class, an empty class folder and an image in no folder.
func demoLabelledFolder(t *testing.T, extras bool) string {
	t.Helper()
	list, err := OpenList(filepath.Join(demoDir(), "probe", "labels.csv"), ClassResolver{Labels: demoLabels(t), Classes: 7})
	if err != nil {
		t.Fatal(err)
	}
	labels := demoLabels(t)
	dir := t.TempDir()
	for _, s := range list.Samples {
		sub := strings.ToUpper(labels[s.Class][:1]) + labels[s.Class][1:]
		if s.Class == 4 {
			sub = "4" // by number
		}
		data, err := os.ReadFile(filepath.Join(demoDir(), "probe", s.File))
		if err != nil {
			t.Fatal(err)
		}
		if err := os.MkdirAll(filepath.Join(dir, sub), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, sub, s.File), data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	if extras {
		bad, err := os.ReadFile(filepath.Join("..", "..", "testdata", "images", "truncated.png"))
		if err != nil {
			t.Fatal(err)
		}
		for name, data := range map[string][]byte{
			"Washer/zz-truncated.png": bad, "bolts/a.png": bad, "root.png": bad, "Wall plug/.hidden.png": bad,
		} {
			os.MkdirAll(filepath.Dir(filepath.Join(dir, name)), 0o755)
			if err := os.WriteFile(filepath.Join(dir, name), data, 0o644); err != nil {
				t.Fatal(err)
			}
		}
		if err := os.MkdirAll(filepath.Join(dir, "6", "empty"), 0o755); err != nil {
			t.Fatal(err)
		}
	}
	return dir
}

func demoLabels(t *testing.T) []string {
	data, err := os.ReadFile(filepath.Join(demoDir(), "labels.txt"))
	if err != nil {
		t.Fatal(err)
	}
	return strings.Split(strings.TrimSpace(string(data)), "\n")
}

// TestEvaluateDemoProbe: both demo checkpoints over the 280 probe images,
// read as the list file labels.csv and as a labelled folder. Every image's
// predicted class equals the one PyTorch gave (demo.json; the smallest gap
// between the top two logits is 0.0067, far above float32 differences
// between runtimes), the counts equal scikit-learn's confusion_matrix of
// those predictions (reference.json), and the accuracy is demo.json's
// 256/280 and 216/280.
func TestEvaluateDemoProbe(t *testing.T) {
	ref := readEvalReference(t)
	preds := demoPredictions(t)
	labels := demoLabels(t)
	folder := demoLabelledFolder(t, false)
	for ci, kind := range []string{"healthy", "unhealthy"} {
		t.Run(kind, func(t *testing.T) {
			file := "parts.onnx"
			if kind == "unhealthy" {
				file = "parts_unhealthy.onnx"
			}
			m, err := modelio.Open(filepath.Join(demoDir(), file))
			if err != nil {
				t.Fatal(err)
			}
			s := newSession(t, m, infer.Options{})
			cfg := prep.Guess(m)
			res := ClassResolver{Labels: labels, Classes: 7}
			list, err := OpenList(filepath.Join(demoDir(), "probe", "labels.csv"), res)
			if err != nil {
				t.Fatal(err)
			}
			fold, err := OpenFolder(folder, res)
			if err != nil {
				t.Fatal(err)
			}
			var confs [][][]int
			for _, data := range []*Labelled{list, fold} {
				e, err := Evaluate(context.Background(), s, data, cfg, EvalOptions{Labels: labels}, nil)
				if err != nil {
					t.Fatal(err)
				}
				if e.Images != 280 || len(e.Skipped) != 0 || len(e.Rows) != 280 {
					t.Fatalf("%s: %d images, %d skipped (%v), %d rows; want 280, 0", data.Source, e.Images, len(e.Skipped), e.Skipped, len(e.Rows))
				}
				for _, r := range e.Rows {
					if want, ok := preds[kind][path.Base(r.File)]; !ok || r.Predicted != want {
						t.Errorf("%s: %s predicted %d, PyTorch %d", data.Source, r.File, r.Predicted, want)
					}
				}
				c := ref.Cases[ci]
				if !reflect.DeepEqual(e.Confusion, c.Confusion) {
					t.Errorf("%s: confusion %v, sklearn on PyTorch's predictions %v", data.Source, e.Confusion, c.Confusion)
				}
				want := map[string]int{"healthy": 256, "unhealthy": 216}[kind]
				if e.Correct != want {
					t.Errorf("%s: %d correct, demo.json says %d", data.Source, e.Correct, want)
				}
				confs = append(confs, e.Confusion)
			}
		})
	}
}

// TestEvaluateProblems: unreadable images, folders that name no class,
// empty class folders and images outside class folders are reported by
// name, and the run goes on; hidden files are passed over.
func TestEvaluateProblems(t *testing.T) {
	labels := demoLabels(t)
	dir := demoLabelledFolder(t, true)
	m, err := modelio.Open(filepath.Join(demoDir(), "parts.onnx"))
	if err != nil {
		t.Fatal(err)
	}
	data, err := OpenFolder(dir, ClassResolver{Labels: labels, Classes: 7})
	if err != nil {
		t.Fatal(err)
	}
	s := newSession(t, m, infer.Options{})
	e, err := Evaluate(context.Background(), s, data, prep.Guess(m), EvalOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	got := map[string]string{}
	for _, k := range e.Skipped {
		got[k.File] = k.Reason
	}
	for file, want := range map[string]string{
		"Washer/zz-truncated.png": "truncated",
		"bolts/a.png":             `unknown label "bolts"`,
		"root.png":                "not inside a class folder",
		"6/":                      "class folder without images",
	} {
		if !strings.Contains(got[file], want) {
			t.Errorf("skipped %s: reason %q, want one containing %q", file, got[file], want)
		}
	}
	if len(e.Skipped) != 4 || e.Images != 280 {
		t.Errorf("%d skipped (%v), %d images; want 4 and 280", len(e.Skipped), e.Skipped, e.Images)
	}
}

// TestEvaluateShards: the k-th of n shards, evaluated separately and merged,
// give exactly the single run's result, for n = 1, 3 and 7 (the issue's
// acceptance test), over data with reported problems too.
func TestEvaluateShards(t *testing.T) {
	labels := demoLabels(t)
	dir := demoLabelledFolder(t, true)
	m, err := modelio.Open(filepath.Join(demoDir(), "parts_unhealthy.onnx"))
	if err != nil {
		t.Fatal(err)
	}
	data, err := OpenFolder(dir, ClassResolver{Labels: labels, Classes: 7})
	if err != nil {
		t.Fatal(err)
	}
	s := newSession(t, m, infer.Options{})
	cfg := prep.Guess(m)
	opt := EvalOptions{Model: "parts_unhealthy.onnx", Labels: labels}
	whole, err := Evaluate(context.Background(), s, data, cfg, opt, nil)
	if err != nil {
		t.Fatal(err)
	}
	whole.Rows = nil
	for _, n := range []int{1, 3, 7} {
		var parts []*Evaluation
		for k := n - 1; k >= 0; k-- { // any order
			sh, err := data.Shard(k, n)
			if err != nil {
				t.Fatal(err)
			}
			o := opt
			o.Offset, o.Entries = len(data.Samples)*k/n, len(data.Samples)
			e, err := Evaluate(context.Background(), s, sh, cfg, o, nil)
			if err != nil {
				t.Fatal(err)
			}
			// Through JSON, as the parts travel between machines.
			b, err := json.Marshal(e)
			if err != nil {
				t.Fatal(err)
			}
			var back Evaluation
			if err := json.Unmarshal(b, &back); err != nil {
				t.Fatal(err)
			}
			parts = append(parts, &back)
		}
		merged, err := Merge(parts)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(merged, whole) {
			a, _ := json.Marshal(merged)
			b, _ := json.Marshal(whole)
			t.Errorf("n = %d: merged\n%s\nsingle run\n%s", n, a, b)
		}
	}
	if _, err := Merge([]*Evaluation{whole, whole}); err == nil {
		t.Error("merging a result with itself: no error")
	}
}

// TestEvaluateCancel: a cancelled context ends the run with its error.
func TestEvaluateCancel(t *testing.T) {
	m, err := modelio.Open(filepath.Join(demoDir(), "parts.onnx"))
	if err != nil {
		t.Fatal(err)
	}
	data, err := OpenList(filepath.Join(demoDir(), "probe", "labels.csv"), ClassResolver{Labels: demoLabels(t)})
	if err != nil {
		t.Fatal(err)
	}
	s := newSession(t, m, infer.Options{})
	ctx, cancel := context.WithCancel(context.Background())
	calls := 0
	_, err = Evaluate(ctx, s, data, prep.Guess(m), EvalOptions{}, func(done, total int) {
		calls++
		if done > 0 {
			cancel()
		}
	})
	if !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled run: err %v, want context.Canceled", err)
	}
}

// TestReadList: CSV and TSV lists, a header, comments, unknown labels and
// short lines (common practice for such lists; the demo's labels.csv has
// the header file,label,index).
func TestReadList(t *testing.T) {
	fsys := fstest.MapFS{}
	r := ClassResolver{Labels: []string{"cat", "Dog"}, Classes: 2}
	for _, tc := range []struct {
		text string
		want []Sample
	}{
		{"path,label\nb.png,cat\na.png,DOG\n# note\nc.png,1\n", []Sample{{"a.png", 1, ""}, {"b.png", 0, ""}, {"c.png", 1, ""}}},
		{"x/b.png\tcat\nx/a.png\tbird\n", []Sample{{"x/a.png", -1, `unknown label "bird"`}, {"x/b.png", 0, ""}}},
		{"a.png\nb.png,2\n", []Sample{{"b.png", -1, "class 2 is outside 0…1"}, {"l.csv:1", -1, "line has no label (want path,label)"}}},
	} {
		l, err := ReadList([]byte(tc.text), "l.csv", r, fsys, ".")
		if err != nil {
			t.Errorf("%q: %v", tc.text, err)
			continue
		}
		if !slices.Equal(l.Samples, tc.want) {
			t.Errorf("%q: %+v, want %+v", tc.text, l.Samples, tc.want)
		}
	}
	if _, err := ReadList([]byte("a.png,\"cat\n"), "l.csv", r, fsys, "."); err == nil || !strings.Contains(err.Error(), "l.csv: line 1") {
		t.Errorf("bad quoting: err %v, want one naming l.csv line 1", err)
	}
}
