package analysis

import (
	"context"
	"encoding/json"
	"image"
	"math"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"fovea/modelio"
	"fovea/modelio/infer"
	"fovea/modelio/onnxbuild"
	"fovea/modelio/prep"
	"fovea/modelio/testkit"
)

// McNemar's exact p-value against SciPy: testdata/compare/mcnemar_scipy.json
// holds scipy.stats.binomtest(b, b+c, 0.5).pvalue (Debian python3-scipy),
// written once by testdata/compare/make_mcnemar.py (McNemar, Psychometrika
// 12 (1947) 153–157; the exact version is the two-sided binomial test of the
// discordant pairs at ½).
func TestMcNemarExactAgainstSciPy(t *testing.T) {
	data, err := os.ReadFile("../../testdata/compare/mcnemar_scipy.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Source string
		Cases  []struct {
			B, C int
			P    float64
		}
	}
	if err := json.Unmarshal(data, &ref); err != nil {
		t.Fatal(err)
	}
	if len(ref.Cases) < 10 {
		t.Fatalf("only %d reference cases", len(ref.Cases))
	}
	for _, c := range ref.Cases {
		got := McNemarExact(c.B, c.C)
		if math.Abs(got-c.P) > 1e-12*max(1, c.P) && math.Abs(got-c.P)/c.P > 1e-9 {
			t.Errorf("McNemarExact(%d, %d) = %.17g, SciPy %.17g", c.B, c.C, got, c.P)
		}
		if sym := McNemarExact(c.C, c.B); sym != got {
			t.Errorf("McNemarExact is not symmetric at (%d, %d): %g against %g", c.B, c.C, got, sym)
		}
	}
	// Hand check (from memory, 2·C(10,0..1)/2^10): b=1, c=9: 2·(1+10)/1024.
	if got, want := McNemarExact(1, 9), 22.0/1024; math.Abs(got-want) > 1e-15 {
		t.Errorf("McNemarExact(1, 9) = %g, want %g", got, want)
	}
	if McNemarExact(0, 0) != 1 {
		t.Error("no discordant pair must give p = 1")
	}
}

// Cosine against the direct formula x·y / (‖x‖‖y‖) written out here on
// planted kernels (common practice: the cosine similarity's definition).
func TestCosinePlanted(t *testing.T) {
	x := []float32{1, -2, 0.5, 3, 0, -1}
	ref := func(a, b []float32) float64 {
		var d, na, nb float64
		for i := range a {
			d += float64(a[i]) * float64(b[i])
			na += float64(a[i]) * float64(a[i])
			nb += float64(b[i]) * float64(b[i])
		}
		return d / math.Sqrt(na*nb)
	}
	neg := make([]float32, len(x))
	scaled := make([]float32, len(x))
	for i, v := range x {
		neg[i], scaled[i] = -v, 3*v
	}
	other := []float32{0.5, 1, -1, 2, 4, 0}
	for _, c := range []struct {
		name string
		y    []float32
		want float64 // by hand where a closed form exists
	}{
		{"same", x, 1},
		{"negated", neg, -1},
		{"scaled", scaled, 1},
		{"other", other, math.NaN()},
	} {
		t.Run(c.name, func(t *testing.T) {
			got, ok := Cosine(x, c.y)
			if !ok {
				t.Fatal("undefined")
			}
			if r := ref(x, c.y); math.Abs(got-r) > 1e-12 {
				t.Errorf("cosine %g, direct %g", got, r)
			}
			if !math.IsNaN(c.want) && math.Abs(got-c.want) > 1e-12 {
				t.Errorf("cosine %g, want %g", got, c.want)
			}
		})
	}
	// (1·0.5 − 2·1 − 0.5 + 6 + 0 + 0) / (√15.25 · √22.25), by hand.
	if got, _ := Cosine(x, other); math.Abs(got-4/math.Sqrt(15.25*22.25)) > 1e-12 {
		t.Errorf("cosine(x, other) = %g, want %g", got, 4/math.Sqrt(15.25*22.25))
	}
	if _, ok := Cosine(make([]float32, 3), []float32{1, 2, 3}); ok {
		t.Error("cosine with a zero vector must be undefined")
	}
}

func pairModels(t *testing.T) (a, b *modelio.Model) {
	t.Helper()
	da, db, err := onnxbuild.Pair()
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	open := func(name string, data []byte) *modelio.Model {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, data, 0o644); err != nil {
			t.Fatal(err)
		}
		m, err := modelio.Open(p)
		if err != nil {
			t.Fatal(err)
		}
		return m
	}
	return open("a.onnx", da), open("b.onnx", db)
}

// The planted pair (onnxbuild.Pair): the same architecture, filter 0
// negated, filter 1 scaled by 2, channels 2 and 3 killed by their bias; the
// comparison must report exactly those and nothing else.
func TestComparePlantedStatic(t *testing.T) {
	a, b := pairModels(t)
	rows, same := AlignLayers(a, b)
	if !same {
		t.Fatalf("same architecture not recognised: %+v", rows)
	}
	for _, r := range rows {
		if r.Changed || r.By != "name" {
			t.Errorf("layer %s reported changed or not paired by name: %+v", r.Name, r)
		}
	}
	for _, match := range []Matching{MatchIndex, MatchGreedy} {
		layers, skipped, err := CompareFilters(a, b, match)
		if err != nil || len(skipped) != 0 || len(layers) != 1 || layers[0].Layer != "conv1" {
			t.Fatalf("%s: layers %v, skipped %v, err %v", match, layers, skipped, err)
		}
		var changed []int
		for _, p := range layers[0].Pairs {
			if p.Changed {
				changed = append(changed, p.Index)
			}
		}
		want := []int{0, 1, 2, 3}
		if !slices.Equal(changed, want) {
			t.Errorf("%s: changed filters %v, want %v", match, changed, want)
		}
		ps := layers[0].Pairs
		// Greedy matching: filter 0's negation is its worst partner, but
		// each of the others has an exact twin (cosine 1), so 0 keeps 0 only
		// if nothing better is free: check what was paired and say so.
		if match == MatchIndex {
			if c := *ps[0].Cosine; math.Abs(c+1) > 1e-9 {
				t.Errorf("negated filter: cosine %g, want -1", c)
			}
			if r := *ps[0].NormRatio; math.Abs(r-1) > 1e-9 {
				t.Errorf("negated filter: norm ratio %g, want 1", r)
			}
		}
		if ps[1].Match == 1 {
			if c, r := *ps[1].Cosine, *ps[1].NormRatio; math.Abs(c-1) > 1e-9 || math.Abs(r-onnxbuild.PairScale) > 1e-9 {
				t.Errorf("%s: scaled filter: cosine %g ratio %g, want 1 and %g", match, c, r, onnxbuild.PairScale)
			}
		}
		for _, k := range onnxbuild.PairKilled {
			if ps[k].Match == k && (ps[k].BiasA != 0 || ps[k].BiasB != -10 || *ps[k].Cosine < 1-1e-9) {
				t.Errorf("%s: killed filter %d: %+v", match, k, ps[k])
			}
		}
		most := MostChanged(layers)
		if match == MatchIndex && (most[0].Index != 0 || len(most) != 6) {
			t.Errorf("most changed first: got %+v", most[0])
		}
	}
}

// Greedy matching recovers a permutation: B = A with its filters in another
// order must pair every filter with its twin at cosine 1.
func TestCompareGreedyPermutation(t *testing.T) {
	k := &modelio.Kernels{M: 3, C: 1, KH: 1, KW: 2, Group: 1, W: []float32{1, 0, 0, 1, 1, 1}}
	p := &modelio.Kernels{M: 3, C: 1, KH: 1, KW: 2, Group: 1, W: []float32{1, 1, 1, 0, 0, 1}} // filters 2, 0, 1
	pairs := compareKernels("c", k, p, MatchGreedy)
	want := []int{1, 2, 0}
	for i, q := range pairs {
		if q.Match != want[i] || math.Abs(*q.Cosine-1) > 1e-12 || q.Changed {
			t.Errorf("filter %d: %+v, want match %d at cosine 1", i, q, want[i])
		}
	}
	byIndex := compareKernels("c", k, p, MatchIndex)
	if !byIndex[0].Changed {
		t.Error("index matching must see the permuted filter 0 as changed")
	}
}

// The planted pair run through ONNX Runtime: the scans of both over the same
// probe pictures report exactly channels 2 and 3 as newly dead and nothing
// revived; the answers flip exactly on the planted images.
func TestComparePlantedRun(t *testing.T) {
	testkit.NeedRuntime(t)
	a, b := pairModels(t)
	dir := t.TempDir()
	var files []string
	var imgs []image.Image
	for i, red := range onnxbuild.PairRed {
		pix, w, h := onnxbuild.PairImage(red)
		img := &image.NRGBA{Pix: pix, Stride: 4 * w, Rect: image.Rect(0, 0, w, h)}
		p := filepath.Join(dir, "p"+string(rune('a'+i))+".png")
		writePNG(t, p, img)
		files = append(files, p)
		imgs = append(imgs, img)
	}
	cfg := prep.Config{Width: 8, Height: 8, Channels: 3, Resize: "stretch", Range: "0-1", Std: [3]float32{1, 1, 1}, Layout: "nchw"}
	scan := func(m *modelio.Model) (*ScanReport, []Answer) {
		s, err := infer.NewSession(m, ScanSession(m, nil))
		if err != nil {
			t.Fatal(err)
		}
		defer s.Close()
		r, err := Scan(context.Background(), s, m, cfg, files, ScanOptions{}, nil)
		if err != nil {
			t.Fatal(err)
		}
		in, _, err := cfg.Batch(imgs)
		if err != nil {
			t.Fatal(err)
		}
		res, err := s.Run(context.Background(), in, len(imgs))
		if err != nil {
			t.Fatal(err)
		}
		var ans []Answer
		for i := range imgs {
			sc := res.Scores(i)
			pred := 0
			if sc[1] > sc[0] {
				pred = 1
			}
			ans = append(ans, Answer{File: filepath.Base(files[i]), True: onnxbuild.PairTruth[i], Predicted: pred})
		}
		return r, ans
	}
	ra, ansA := scan(a)
	rb, ansB := scan(b)
	h, err := CompareHealth(ra, rb)
	if err != nil {
		t.Fatal(err)
	}
	var dead []int
	for _, c := range h.NewlyDead {
		if c.Layer != "relu1" || !slices.Equal(c.Flags, []modelio.Flag{modelio.FlagDead}) {
			t.Errorf("newly dead %+v", c)
		}
		dead = append(dead, c.Index)
	}
	if !slices.Equal(dead, onnxbuild.PairKilled) || len(h.Revived) != 0 || len(h.Unmatched) != 0 {
		t.Errorf("newly dead %v (want %v), revived %v, unmatched %v", dead, onnxbuild.PairKilled, h.Revived, h.Unmatched)
	}
	if len(h.Firing) != 2 || h.Firing[0].A != 1 || h.Firing[0].B != 0 {
		t.Errorf("firing changes %+v, want channels 2 and 3 from 1 to 0", h.Firing)
	}
	// The reverse comparison sees them revived.
	if back, _ := CompareHealth(rb, ra); len(back.Revived) != 2 || len(back.NewlyDead) != 0 {
		t.Errorf("B against A: revived %v newly dead %v", back.Revived, back.NewlyDead)
	}
	d, err := ComparePredictions(ansA, ansB)
	if err != nil {
		t.Fatal(err)
	}
	var worse, better []int
	for i, f := range onnxbuild.PairFlip {
		switch f {
		case "worse":
			worse = append(worse, i)
		case "better":
			better = append(better, i)
		}
	}
	if d.Worse != len(worse) || d.Better != len(better) || len(d.Flips) != len(worse)+len(better) {
		t.Fatalf("flips %+v, want worse %v better %v", d.Flips, worse, better)
	}
	for _, f := range d.Flips {
		i := int(f.File[1] - 'a')
		if (f.Worse && onnxbuild.PairFlip[i] != "worse") || (!f.Worse && onnxbuild.PairFlip[i] != "better") || f.True != onnxbuild.PairTruth[i] {
			t.Errorf("flip %+v not planted", f)
		}
	}
	if d.CorrectA != 5 || d.CorrectB != 4 {
		t.Errorf("correct %d and %d, want 5 and 4", d.CorrectA, d.CorrectB)
	}
	if d.P != McNemarExact(2, 1) || d.P != 1 {
		t.Errorf("p = %g, want 1 (2 against 1 discordant)", d.P)
	}
}

func TestComparePredictionsErrors(t *testing.T) {
	a := []Answer{{"x", 0, 0}, {"y", 1, 1}}
	for name, b := range map[string][]Answer{
		"missing":   {{"x", 0, 0}},
		"other":     {{"x", 0, 0}, {"z", 1, 1}},
		"truth":     {{"x", 0, 0}, {"y", 0, 1}},
		"duplicate": {{"x", 0, 0}, {"x", 0, 0}},
	} {
		t.Run(name, func(t *testing.T) {
			if _, err := ComparePredictions(a, b); err == nil {
				t.Error("no error")
			}
		})
	}
}

// Alignment by hand-made layer tables: a renamed layer of the same op and
// shape pairs by position; a changed width marks shape, params and MACs; a
// layer of one model only is reported as such (common practice: what a
// reader diffing two tables by eye would pair).
func TestAlignLayersByHand(t *testing.T) {
	sh := func(d ...int64) modelio.Shape {
		var s modelio.Shape
		for _, v := range d {
			s = append(s, modelio.Dim{Size: v})
		}
		return s
	}
	a := &modelio.Model{Layers: []modelio.Layer{
		{Name: "conv1", Op: "Conv", Shape: sh(1, 8, 4, 4), Params: 224, MACs: 3456},
		{Name: "act", Op: "Relu", Shape: sh(1, 8, 4, 4)},
		{Name: "fc", Op: "Gemm", Shape: sh(1, 2), Params: 258, MACs: 256},
	}}
	b := &modelio.Model{Layers: []modelio.Layer{
		{Name: "conv1", Op: "Conv", Shape: sh(1, 16, 4, 4), Params: 448, MACs: 6912},
		{Name: "relu_0", Op: "Relu", Shape: sh(1, 8, 4, 4)},
		{Name: "fc", Op: "Gemm", Shape: sh(1, 2), Params: 258, MACs: 256},
		{Name: "prob", Op: "Softmax", Shape: sh(1, 2)},
	}}
	rows, same := AlignLayers(a, b)
	if same || len(rows) != 4 {
		t.Fatalf("same %v, %d rows: %+v", same, len(rows), rows)
	}
	if r := rows[0]; !r.Changed || !slices.Equal(r.Differs, []string{"shape", "params", "macs"}) {
		t.Errorf("conv1: %+v", r)
	}
	if r := rows[1]; r.By != "position" || r.NameB != "relu_0" || r.Changed {
		t.Errorf("renamed relu: %+v", r)
	}
	if r := rows[2]; r.Changed || r.By != "name" {
		t.Errorf("fc: %+v", r)
	}
	if r := rows[3]; r.A != nil || r.B == nil || !slices.Equal(r.Differs, []string{"only in b"}) {
		t.Errorf("softmax: %+v", r)
	}
}
