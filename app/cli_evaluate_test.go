package main

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strconv"
	"strings"
	"testing"

	"fovea/assets"
)

// evalRef is testdata/evaluate/reference.json (see make_reference.py
// beside it): scikit-learn's confusion matrices of the PyTorch predictions
// in demo.json, and statsmodels' Wilson intervals.
type evalRef struct {
	Cases []struct {
		Confusion [][]int   `json:"confusion_matrix"`
		Precision []float64 `json:"precision"`
		Recall    []float64 `json:"recall"`
		Accuracy  float64   `json:"accuracy_score"`
	} `json:"cases"`
}

func readEvalRef(t *testing.T) evalRef {
	t.Helper()
	b, err := os.ReadFile("../testdata/evaluate/reference.json")
	if err != nil {
		t.Fatal(err)
	}
	var r evalRef
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	return r
}

// probeFolder writes the demo's probe images as a labelled folder (class
// sub-folders named by label, some in upper case, one by number) and as a
// list file beside it, in a folder with spaces and non-ASCII letters.
func probeFolder(t *testing.T) (folder, list string) {
	t.Helper()
	root := filepath.Join(t.TempDir(), "held out ü")
	folder = filepath.Join(root, "by class")
	probe, err := assets.Probe()
	if err != nil {
		t.Fatal(err)
	}
	var lines []string
	for _, p := range probe {
		sub := p.Label
		switch p.Index {
		case 2:
			sub = strings.ToUpper(sub)
		case 4:
			sub = strconv.Itoa(p.Index)
		}
		b, err := assets.Files.ReadFile(p.File)
		if err != nil {
			t.Fatal(err)
		}
		name := filepath.Join(folder, sub, filepath.Base(p.File))
		os.MkdirAll(filepath.Dir(name), 0o755)
		if err := os.WriteFile(name, b, 0o644); err != nil {
			t.Fatal(err)
		}
		lines = append(lines, "by class/"+sub+"/"+filepath.Base(p.File)+"\t"+p.Label)
	}
	list = filepath.Join(root, "list.tsv")
	if err := os.WriteFile(list, []byte("path\tlabel\n"+strings.Join(lines, "\n")+"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	return folder, list
}

type evalDoc struct {
	Model      string     `json:"model"`
	Images     int        `json:"images"`
	Accuracy   float64    `json:"accuracy"`
	AccuracyCI [2]float64 `json:"accuracy_ci"`
	Top5       *float64   `json:"top5"`
	Classes    []struct {
		Index     int     `json:"index"`
		Label     string  `json:"label"`
		Precision float64 `json:"precision"`
		Recall    float64 `json:"recall"`
		Support   int     `json:"support"`
	} `json:"classes"`
	Confusion [][]int `json:"confusion"`
	Mistakes  []struct {
		File       string  `json:"file"`
		True       int     `json:"true"`
		Predicted  int     `json:"predicted"`
		PPredicted float64 `json:"p_predicted"`
		PTrue      float64 `json:"p_true"`
	} `json:"mistakes"`
	Skipped []struct{ File, Reason string } `json:"skipped"`
}

// TestCLIEvaluateDemo: `fovea evaluate --json` on the unhealthy checkpoint
// over the probe images, as a folder and as a list file. The confusion
// matrix equals scikit-learn's confusion_matrix of the PyTorch predictions
// in demo.json (reference.json), precision and recall its
// precision_recall_fscore_support, the interval statsmodels'
// proportion_confint(216, 280, method="wilson").
func TestCLIEvaluateDemo(t *testing.T) {
	d := newDemoFiles(t)
	ref := readEvalRef(t)
	folder, list := probeFolder(t)
	var docs []evalDoc
	for _, data := range []string{folder, list} {
		var doc evalDoc
		decodeJSON(t, mustRun(t, "evaluate", "--model", d.unhealthy, "--data", data, "--json"), &doc)
		docs = append(docs, doc)
		c := ref.Cases[1]
		if doc.Images != 280 || !reflect.DeepEqual(doc.Confusion, c.Confusion) || math.Abs(doc.Accuracy-c.Accuracy) > 1e-12 {
			t.Errorf("%s: %d images, accuracy %v, confusion %v; sklearn %v %v", data, doc.Images, doc.Accuracy, doc.Confusion, c.Accuracy, c.Confusion)
		}
		for i, cl := range doc.Classes {
			if cl.Index != i || math.Abs(cl.Precision-c.Precision[i]) > 1e-12 || math.Abs(cl.Recall-c.Recall[i]) > 1e-12 || cl.Support != 40 {
				t.Errorf("%s: class %+v; sklearn precision %v recall %v support 40", data, cl, c.Precision[i], c.Recall[i])
			}
		}
		// statsmodels proportion_confint(216, 280, method="wilson").
		if math.Abs(doc.AccuracyCI[0]-0.7187666829580955) > 1e-12 || math.Abs(doc.AccuracyCI[1]-0.8167435297907059) > 1e-12 {
			t.Errorf("%s: interval %v", data, doc.AccuracyCI)
		}
		if doc.Top5 == nil || len(doc.Mistakes) != 64 || len(doc.Skipped) != 0 {
			t.Fatalf("%s: top5 %v, %d mistakes, skipped %v; want a top-5 figure (7 classes), 64 mistakes, none skipped", data, doc.Top5, len(doc.Mistakes), doc.Skipped)
		}
		for i, m := range doc.Mistakes {
			if i > 0 && m.PPredicted > doc.Mistakes[i-1].PPredicted {
				t.Errorf("%s: mistakes not sorted by p_predicted at %d", data, i)
			}
			if m.True == m.Predicted || m.PTrue > m.PPredicted || doc.Confusion[m.True][m.Predicted] == 0 {
				t.Errorf("%s: mistake %+v inconsistent", data, m)
			}
		}
	}
	// The folder's file names are relative to it, the list's as written.
	if f := docs[0].Mistakes[0].File; strings.HasPrefix(f, "/") || !strings.Contains(f, "/") {
		t.Errorf("folder mistake file %q: want class/file relative to the folder", f)
	}
	if f := docs[1].Mistakes[0].File; !strings.HasPrefix(f, "by class/") {
		t.Errorf("list mistake file %q: want the path as the list gives it", f)
	}
}

// TestCLIEvaluateShards: `evaluate --shard K/N` for N = 1, 3 and 7, merged
// by `fovea merge`, prints byte for byte what one run prints, as JSON, CSV
// and text; a missing or repeated shard is refused.
func TestCLIEvaluateShards(t *testing.T) {
	d := newDemoFiles(t)
	folder, _ := probeFolder(t)
	// Problems travel through the shards too.
	os.WriteFile(filepath.Join(folder, "washer", "zz broken.png"), []byte("not a png"), 0o644)
	os.MkdirAll(filepath.Join(folder, "Wall Plug"), 0o755)
	base := []string{"evaluate", "--model", d.unhealthy, "--data", folder}
	single := map[string]string{}
	for _, form := range []string{"--json", "--csv", "--top=7"} {
		single[form] = mustRun(t, append(base, form)...)
	}
	if !strings.Contains(single["--json"], "zz broken.png") || !strings.Contains(single["--json"], "Wall Plug/") {
		t.Fatalf("the single run does not report the broken image and the empty class folder:\n%s", single["--json"])
	}
	partDir := t.TempDir()
	for _, n := range []int{1, 3, 7} {
		var parts []string
		for k := 1; k <= n; k++ {
			out := mustRun(t, append(base, "--shard", fmt.Sprintf("%d/%d", k, n))...)
			p := filepath.Join(partDir, fmt.Sprintf("part %d of %d.json", k, n))
			if err := os.WriteFile(p, []byte(out), 0o644); err != nil {
				t.Fatal(err)
			}
			parts = append(parts, p)
		}
		slices.Reverse(parts) // order does not matter
		for form, want := range single {
			got := mustRun(t, append(append([]string{"merge"}, parts...), form)...)
			if got != want {
				t.Errorf("n = %d, %s: merged output differs from the single run:\n%s\n---\n%s", n, form, got, want)
			}
		}
		if n == 3 {
			if _, errs, code := runCLI(t, "merge", parts[0], parts[1]); code != exitUsage || !strings.Contains(errs, "missing") {
				t.Errorf("merge of 2 of 3 shards: exit %d, %q", code, errs)
			}
			if _, errs, code := runCLI(t, "merge", parts[0], parts[0], parts[1], parts[2]); code != exitUsage || !strings.Contains(errs, "both shard") {
				t.Errorf("merge with a shard twice: exit %d, %q", code, errs)
			}
		}
	}
	if _, errs, code := runCLI(t, append(base, "--shard", "4/3")...); code != exitUsage || !strings.Contains(errs, "--shard 4/3") {
		t.Errorf("--shard 4/3: exit %d, %q", code, errs)
	}
}

// TestCLIEvaluateGate: --min-accuracy exits 3 below the threshold (the
// unhealthy checkpoint's 77.14 % on the probe images), 0 at or above it.
func TestCLIEvaluateGate(t *testing.T) {
	for _, tc := range []struct {
		args []string
		code int
	}{
		{[]string{"--demo", "unhealthy", "--min-accuracy", "0.9"}, exitGate},
		{[]string{"--demo", "unhealthy", "--min-accuracy", "75%"}, exitOK},
		{[]string{"--demo", "healthy", "--min-accuracy", "0.9", "--json"}, exitOK},
		{[]string{"--demo", "healthy", "--min-accuracy", "1.5"}, exitUsage},
		{[]string{"--demo", "healthy", "--json", "--csv"}, exitUsage},
		{[]string{"--data", "/nonexistent/folder"}, exitUsage},
	} {
		_, errs, code := runCLI(t, append([]string{"evaluate"}, tc.args...)...)
		if code != tc.code {
			t.Errorf("evaluate %v: exit %d, want %d (%s)", tc.args, code, tc.code, errs)
		}
	}
}

// TestCLIEvaluateOtherExporter: a tf2onnx-style Keras model (NHWC input,
// Softmax in the graph, 10 classes, no labels) over class folders named by
// number: every image's answer equals what `fovea classify` says about it
// alone (the issue asks for exactly classify's preparation), and the
// counts add up.
func TestCLIEvaluateOtherExporter(t *testing.T) {
	dir := t.TempDir()
	b := exNew(exModels[0].opset)
	exModels[0].make(b, dir)
	model := filepath.Join(dir, exModels[0].name)
	if err := b.Write(model); err != nil {
		t.Fatal(err)
	}
	folder := filepath.Join(dir, "data")
	probe, err := assets.Probe()
	if err != nil {
		t.Fatal(err)
	}
	var files []string
	for i, p := range probe[:30] {
		bs, _ := assets.Files.ReadFile(p.File)
		f := filepath.Join(folder, strconv.Itoa(i%10), filepath.Base(p.File))
		os.MkdirAll(filepath.Dir(f), 0o755)
		os.WriteFile(f, bs, 0o644)
		files = append(files, f)
	}
	var doc evalDoc
	decodeJSON(t, mustRun(t, "evaluate", "--model", model, "--data", folder, "--json"), &doc)
	if doc.Images != 30 || len(doc.Classes) != 10 {
		t.Fatalf("%d images, %d classes; want 30, 10", doc.Images, len(doc.Classes))
	}
	want := make([][]int, 10)
	for i := range want {
		want[i] = make([]int, 10)
	}
	mistakes := map[string]float64{}
	for _, f := range files {
		var cl struct {
			Top []struct {
				Index       int     `json:"index"`
				Probability float64 `json:"probability"`
			} `json:"top"`
		}
		decodeJSON(t, mustRun(t, "classify", "--model", model, "--image", f, "--json", "--k", "1"), &cl)
		tr, _ := strconv.Atoi(filepath.Base(filepath.Dir(f)))
		want[tr][cl.Top[0].Index]++
		if tr != cl.Top[0].Index {
			rel, _ := filepath.Rel(folder, f)
			mistakes[filepath.ToSlash(rel)] = cl.Top[0].Probability
		}
	}
	if !reflect.DeepEqual(doc.Confusion, want) {
		t.Errorf("confusion %v, from classify one by one %v", doc.Confusion, want)
	}
	for _, m := range doc.Mistakes {
		if p, ok := mistakes[m.File]; !ok || p != m.PPredicted {
			t.Errorf("mistake %s p %v; classify says %v (listed: %v)", m.File, m.PPredicted, p, ok)
		}
	}
	if len(doc.Mistakes) != len(mistakes) {
		t.Errorf("%d mistakes, classify finds %d", len(doc.Mistakes), len(mistakes))
	}
}

// TestCLIScanShards: `scan --shard K/N` for N = 1, 3 and 7, merged by
// `fovea merge`, prints byte for byte what one scan prints (text, CSV, JSON),
// with the same --max-dead gate.
func TestCLIScanShards(t *testing.T) {
	d := newDemoFiles(t)
	folder, _ := probeFolder(t)
	probe := filepath.Join(folder, "washer") // 40 images, some channels dead
	base := []string{"scan", "--model", d.unhealthy, "--probe", probe}
	single := map[string]string{}
	for _, form := range []string{"--json", "--csv", "--all"} {
		single[form] = mustRun(t, append(base, form)...)
	}
	dir := t.TempDir()
	for _, n := range []int{1, 3, 7} {
		var parts []string
		for k := 1; k <= n; k++ {
			p := filepath.Join(dir, fmt.Sprintf("scan %d of %d.json", k, n))
			os.WriteFile(p, []byte(mustRun(t, append(base, "--shard", fmt.Sprintf("%d/%d", k, n))...)), 0o644)
			parts = append(parts, p)
		}
		for form, want := range single {
			if got := mustRun(t, append(append([]string{"merge"}, parts...), form)...); got != want {
				t.Errorf("n = %d, %s: merged scan differs from the single scan:\n%s\n---\n%s", n, form, got, want)
			}
		}
		if _, _, code := runCLI(t, append(append([]string{"merge"}, parts...), "--max-dead", "0")...); code != exitGate {
			t.Errorf("n = %d: merge --max-dead 0 exit %d, want 3", n, code)
		}
	}
}
