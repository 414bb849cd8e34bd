package main

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"image"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"fovea/app/core"
	"fovea/modelio/onnxbuild"
)

// compareOut is the part of `fovea compare --json` the tests read.
type compareOut struct {
	A, B struct {
		Model, SHA256 string
	}
	Same   bool `json:"same_architecture"`
	Layers []struct {
		Name    string
		Changed bool
	}
	Filters []struct {
		Layer     string
		Index     int
		Cosine    *float64
		NormRatio *float64 `json:"norm_ratio"`
		Changed   bool
	}
	NewlyDead []struct {
		Layer string
		Index int
	} `json:"newly_dead"`
	Revived []struct {
		Layer string
		Index int
	}
	Accuracy *struct{ A, B float64 }
	Flipped  []struct {
		File, True, A, B string
		Worse            bool `json:"right_to_wrong"`
	}
	McNemarP *float64 `json:"mcnemar_p"`
}

func decodeCompare(t *testing.T, out string) compareOut {
	t.Helper()
	var c compareOut
	if err := json.Unmarshal([]byte(out), &c); err != nil {
		t.Fatalf("compare --json: %v\n%s", err, out)
	}
	return c
}

// The demo's two checkpoints over the demo's probe images: the channels
// newly dead or rare in the unhealthy one, and those revived, must be what
// the demo's generator measured with PyTorch (assets/demo/truth_*.json:
// dead ∪ rare of the unhealthy checkpoint minus those of the healthy one).
func TestCLICompareDemoPairAgainstPyTorch(t *testing.T) {
	truth := func(name string) map[string]bool {
		data, err := os.ReadFile(filepath.Join("..", "assets", "demo", name))
		if err != nil {
			t.Fatal(err)
		}
		var tr struct {
			Relus []struct {
				Node       string
				Dead, Rare []int
			}
		}
		if err := json.Unmarshal(data, &tr); err != nil {
			t.Fatal(err)
		}
		out := map[string]bool{}
		for _, r := range tr.Relus {
			for _, i := range append(slices.Clone(r.Dead), r.Rare...) {
				out[r.Node+"#"+strconv.Itoa(i)] = true
			}
		}
		return out
	}
	healthy, unhealthy := truth("truth_healthy.json"), truth("truth_unhealthy.json")
	var wantDead, wantRevived []string
	for k := range unhealthy {
		if !healthy[k] {
			wantDead = append(wantDead, k)
		}
	}
	for k := range healthy {
		if !unhealthy[k] {
			wantRevived = append(wantRevived, k)
		}
	}
	slices.Sort(wantDead)
	slices.Sort(wantRevived)
	if len(wantDead) == 0 {
		t.Fatal("the truth files name no newly dead channel: nothing to check")
	}
	c := decodeCompare(t, mustRun(t, "compare", "--demo", "healthy", "--against-demo", "unhealthy", "--json"))
	var gotDead, gotRevived []string
	for _, d := range c.NewlyDead {
		gotDead = append(gotDead, d.Layer+"#"+strconv.Itoa(d.Index))
	}
	for _, d := range c.Revived {
		gotRevived = append(gotRevived, d.Layer+"#"+strconv.Itoa(d.Index))
	}
	slices.Sort(gotDead)
	slices.Sort(gotRevived)
	if !slices.Equal(gotDead, wantDead) || !slices.Equal(gotRevived, wantRevived) {
		t.Errorf("newly dead %v\nwant (PyTorch) %v\nrevived %v, want %v", gotDead, wantDead, gotRevived, wantRevived)
	}
	if !c.Same || c.A.Model != "parts.onnx" || c.B.Model != "parts_unhealthy.onnx" || len(c.A.SHA256) != 64 || c.A.SHA256 == c.B.SHA256 {
		t.Errorf("header: %+v %+v same %v", c.A, c.B, c.Same)
	}
	// The flipped images are those PyTorch's predictions of the two
	// checkpoints (assets/demo/demo.json, probe.predictions, written by the
	// demo's generator) get right under one and wrong under the other.
	var demo struct {
		Probe struct {
			Predictions []struct {
				File                      string
				Label, Healthy, Unhealthy int
			}
		}
	}
	raw, err := os.ReadFile(filepath.Join("..", "assets", "demo", "demo.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(raw, &demo); err != nil {
		t.Fatal(err)
	}
	var wantFlip, gotFlip []string
	for _, p := range demo.Probe.Predictions {
		if (p.Healthy == p.Label) != (p.Unhealthy == p.Label) {
			wantFlip = append(wantFlip, p.File)
		}
	}
	for _, f := range c.Flipped {
		gotFlip = append(gotFlip, filepath.Base(f.File))
	}
	slices.Sort(wantFlip)
	slices.Sort(gotFlip)
	if len(wantFlip) == 0 || !slices.Equal(gotFlip, wantFlip) {
		t.Errorf("flipped %v\nPyTorch %v", gotFlip, wantFlip)
	}
	// McNemar's p for the demo's discordant counts (checked above against
	// PyTorch's predictions), as SciPy computed it: the case is one of those
	// in testdata/compare/mcnemar_scipy.json.
	var worse, better int
	for _, f := range c.Flipped {
		if f.Worse {
			worse++
		} else {
			better++
		}
	}
	refData, err := os.ReadFile(filepath.Join("..", "testdata", "compare", "mcnemar_scipy.json"))
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Cases []struct {
			B, C int
			P    float64
		}
	}
	if err := json.Unmarshal(refData, &ref); err != nil {
		t.Fatal(err)
	}
	found := false
	for _, r := range ref.Cases {
		if (r.B == better && r.C == worse) || (r.B == worse && r.C == better) {
			found = true
			if c.McNemarP == nil || math.Abs(*c.McNemarP-r.P) > 1e-12*r.P {
				t.Errorf("mcnemar_p %v, SciPy's binomtest(%d, %d) %g", c.McNemarP, r.B, r.B+r.C, r.P)
			}
		}
	}
	if !found {
		t.Errorf("no SciPy reference for %d against %d discordant images: add the case to testdata/compare/make_mcnemar.py", worse, better)
	}
	// Both accuracies are what fovea evaluate reports for each model alone.
	for _, x := range []struct {
		demo string
		got  float64
	}{{"healthy", c.Accuracy.A}, {"unhealthy", c.Accuracy.B}} {
		var e struct{ Accuracy float64 }
		if err := json.Unmarshal([]byte(mustRun(t, "evaluate", "--demo", x.demo, "--json")), &e); err != nil {
			t.Fatal(err)
		}
		if e.Accuracy != x.got || e.Accuracy == 0 {
			t.Errorf("%s: compare says accuracy %g, evaluate %g", x.demo, x.got, e.Accuracy)
		}
	}
	// The gate: exactly len(wantDead) newly dead channels.
	n := strconv.Itoa(len(wantDead))
	if _, _, code := runCLI(t, "compare", "--demo", "healthy", "--against-demo", "unhealthy", "--max-newly-dead", n); code != exitOK {
		t.Errorf("--max-newly-dead %s: exit %d, want 0", n, code)
	}
	_, errs, code := runCLI(t, "compare", "--demo", "healthy", "--against-demo", "unhealthy", "--max-newly-dead", strconv.Itoa(len(wantDead)-1))
	if code != exitGate || !strings.Contains(errs, "newly dead") {
		t.Errorf("--max-newly-dead %d: exit %d (%s), want 3", len(wantDead)-1, code, errs)
	}
}

// pairFiles writes onnxbuild.Pair's models and its pictures into a folder:
// probe/ holds the pictures, data/<class>/ the same pictures by true class.
func pairFiles(t *testing.T) (a, b, probe, data string) {
	t.Helper()
	dir := t.TempDir()
	da, db, err := onnxbuild.Pair()
	if err != nil {
		t.Fatal(err)
	}
	a, b = filepath.Join(dir, "ref.onnx"), filepath.Join(dir, "cand.onnx")
	for p, d := range map[string][]byte{a: da, b: db} {
		if err := os.WriteFile(p, d, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	probe, data = filepath.Join(dir, "probe"), filepath.Join(dir, "data")
	for i, red := range onnxbuild.PairRed {
		pix, w, h := onnxbuild.PairImage(red)
		img := &image.NRGBA{Pix: pix, Stride: 4 * w, Rect: image.Rect(0, 0, w, h)}
		name := "img" + strconv.Itoa(i) + ".png"
		for _, p := range []string{filepath.Join(probe, name), filepath.Join(data, strconv.Itoa(onnxbuild.PairTruth[i]), name)} {
			if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
				t.Fatal(err)
			}
			if err := core.SavePNG(p, img); err != nil {
				t.Fatal(err)
			}
		}
	}
	return a, b, probe, data
}

var pairPrep = []string{"--size", "8x8", "--resize", "stretch", "--range", "0-1", "--mean", "0,0,0", "--std", "1,1,1", "--layout", "nchw"}

// Two checkpoints built from one network with planted changes
// (onnxbuild.Pair): exactly the planted differences are reported.
func TestCLIComparePlanted(t *testing.T) {
	a, b, probe, _ := pairFiles(t)
	args := append([]string{"compare", "--model", a, "--against", b, "--probe", probe, "--json"}, pairPrep...)
	c := decodeCompare(t, mustRun(t, args...))
	if !c.Same {
		t.Fatal("same architecture not recognised")
	}
	for _, l := range c.Layers {
		if l.Changed {
			t.Errorf("layer %s reported changed (only weights were planted)", l.Name)
		}
	}
	changed := map[int]bool{}
	for _, f := range c.Filters {
		if f.Changed {
			changed[f.Index] = true
		}
	}
	if len(changed) != 4 || !changed[0] || !changed[1] || !changed[2] || !changed[3] {
		t.Errorf("changed filters %v, want 0 (negated), 1 (scaled), 2 and 3 (bias)", changed)
	}
	if f := c.Filters[0]; f.Index != 0 || math.Abs(*f.Cosine+1) > 1e-9 {
		t.Errorf("most changed first: %+v, want filter 0 at cosine -1", f)
	}
	for _, f := range c.Filters {
		if f.Index == 1 && math.Abs(*f.NormRatio-onnxbuild.PairScale) > 1e-6 {
			t.Errorf("scaled filter: norm ratio %g, want %g", *f.NormRatio, onnxbuild.PairScale)
		}
	}
	var dead []int
	for _, d := range c.NewlyDead {
		if d.Layer != "relu1" {
			t.Errorf("newly dead in %s", d.Layer)
		}
		dead = append(dead, d.Index)
	}
	if !slices.Equal(dead, onnxbuild.PairKilled) || len(c.Revived) != 0 {
		t.Errorf("newly dead %v, want %v; revived %v", dead, onnxbuild.PairKilled, c.Revived)
	}
	for _, x := range []struct{ path, got string }{{a, c.A.SHA256}, {b, c.B.SHA256}} {
		data, _ := os.ReadFile(x.path)
		if sum := sha256.Sum256(data); hex.EncodeToString(sum[:]) != x.got {
			t.Errorf("%s: sha256 %s, the file's is %x", x.path, x.got, sum)
		}
	}
	page := filepath.Join(t.TempDir(), "page.png")
	mustRun(t, append([]string{"compare", "--model", a, "--against", b, "--probe", probe, "--out", page}, pairPrep...)...)
	f, err := os.Open(page)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if pic, err := png.Decode(f); err != nil || pic.Bounds().Dx() < 1000 {
		t.Errorf("--out: %v", err)
	}
	if c.Accuracy != nil || c.McNemarP != nil {
		t.Error("no --data: accuracy and p must be null")
	}
	gate := append([]string{"compare", "--model", a, "--against", b, "--probe", probe, "--max-newly-dead", "1"}, pairPrep...)
	if _, _, code := runCLI(t, gate...); code != exitGate {
		t.Errorf("--max-newly-dead 1 with 2 newly dead: exit %d, want 3", code)
	}
}

// The planted pair on a labelled folder: both accuracies, exactly the
// planted flips, McNemar's p for 2 against 1 discordant images (1: from
// the definition, 2·(C(3,0)+C(3,1))/2³ = 1 capped at 1), and the
// accuracy gate.
func TestCLIComparePlantedPredictions(t *testing.T) {
	a, b, _, data := pairFiles(t)
	args := append([]string{"compare", "--model", a, "--against", b, "--data", data, "--json"}, pairPrep...)
	c := decodeCompare(t, mustRun(t, args...))
	if c.Accuracy == nil || math.Abs(c.Accuracy.A-5.0/6) > 1e-12 || math.Abs(c.Accuracy.B-4.0/6) > 1e-12 {
		t.Fatalf("accuracy %+v, want 5/6 and 4/6", c.Accuracy)
	}
	var got []string
	for _, f := range c.Flipped {
		got = append(got, f.File+":"+f.True+":"+f.A+":"+f.B)
	}
	var want []string
	for i, fl := range onnxbuild.PairFlip {
		if fl == "" {
			continue
		}
		tr := onnxbuild.PairTruth[i]
		pa, pb := tr, 1-tr // worse: a right, b wrong
		if fl == "better" {
			pa, pb = 1-tr, tr
		}
		want = append(want, fmt.Sprintf("%d/img%d.png:class %d:class %d:class %d", tr, i, tr, pa, pb))
	}
	slices.Sort(want)
	if !slices.Equal(got, want) {
		t.Errorf("flipped %v\nwant %v", got, want)
	}
	if c.McNemarP == nil || *c.McNemarP != 1 {
		t.Errorf("mcnemar_p %v, want 1", c.McNemarP)
	}
	gate := append([]string{"compare", "--model", a, "--against", b, "--data", data}, pairPrep...)
	if _, _, code := runCLI(t, append(gate, "--max-accuracy-drop", "0.2")...); code != exitOK {
		t.Errorf("drop 1/6 under 0.2: exit %d", code)
	}
	if _, errs, code := runCLI(t, append(gate, "--max-accuracy-drop", "0.1")...); code != exitGate || !strings.Contains(errs, "accuracy dropped") {
		t.Errorf("drop 1/6 over 0.1: exit %d (%s), want 3", code, errs)
	}
}

// Different architectures: only the layer table and the predictions are
// compared, and the output says why.
func TestCLICompareOtherArchitecture(t *testing.T) {
	a, _, _, _ := pairFiles(t)
	out := mustRun(t, "compare", "--demo", "healthy", "--against", a, "--json")
	var raw map[string]json.RawMessage
	if err := json.Unmarshal([]byte(out), &raw); err != nil {
		t.Fatal(err)
	}
	c := decodeCompare(t, out)
	if c.Same || len(c.Filters) != 0 || string(raw["newly_dead"]) != "null" || c.Accuracy == nil {
		t.Errorf("same %v, %d filters, newly_dead %s, accuracy %v", c.Same, len(c.Filters), raw["newly_dead"], c.Accuracy)
	}
	if !strings.Contains(string(raw["notes"]), "architectures differ") {
		t.Errorf("notes %s do not say why", raw["notes"])
	}
}

func TestCLICompareUsage(t *testing.T) {
	for _, c := range []struct {
		name string
		args []string
		want string
	}{
		{"no candidate", []string{"compare"}, "--against"},
		{"unknown matching", []string{"compare", "--against-demo", "unhealthy", "--match", "best"}, "--match"},
		{"missing file", []string{"compare", "--against", "/nonexistent/cand.onnx"}, "cand.onnx"},
		{"unknown demo", []string{"compare", "--against-demo", "sick"}, "sick"},
		{"drop not a fraction", []string{"compare", "--against-demo", "unhealthy", "--max-accuracy-drop", "2"}, "fraction"},
		{"missing data", []string{"compare", "--against-demo", "unhealthy", "--data", "/nonexistent/labelled"}, "labelled"},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, errs, code := runCLI(t, c.args...)
			if code != exitUsage || !strings.Contains(errs, c.want) {
				t.Errorf("%v: exit %d, stderr %q; want 2 naming %q", c.args, code, errs, c.want)
			}
		})
	}
}
