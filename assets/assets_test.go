package assets

import (
	"bytes"
	"encoding/json"
	"image/png"
	"io/fs"
	"path"
	"slices"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	"fovea/modelio/onnxpb"
)

// These tests check that the embedded files keep the promises of assets/README.md and of the
// package comment. They read the files with the standard library's PNG decoder, the ONNX
// protobuf schema (onnx.proto, via modelio/onnxpb) and encoding/json; they do not run the
// networks (the Go tests of modelio/infer and app do that through ONNX Runtime).

func readInfo(t *testing.T) info {
	t.Helper()
	var in info
	if err := json.Unmarshal(mustRead(InfoFile), &in); err != nil {
		t.Fatalf("%s: %v", InfoFile, err)
	}
	return in
}

// info is the part of demo.json these tests read.
type info struct {
	Labels     []string        `json:"labels"`
	Preprocess json.RawMessage `json:"preprocess"`
	Input      struct {
		Name  string `json:"name"`
		Shape []any  `json:"shape"`
	} `json:"input"`
	Output struct {
		Name string `json:"name"`
	} `json:"output"`
	TestSet struct {
		Images          int     `json:"images"`
		HealthyAccuracy float64 `json:"healthy_accuracy"`
	} `json:"test_set"`
	Probe struct {
		Images         int     `json:"images"`
		HealthyCorrect int     `json:"healthy_correct"`
		HealthyAcc     float64 `json:"healthy_accuracy"`
		Predictions    []struct {
			File    string `json:"file"`
			Label   int    `json:"label"`
			Healthy int    `json:"healthy"`
		} `json:"predictions"`
	} `json:"probe"`
	Images []struct {
		File          string `json:"file"`
		Label         string `json:"label"`
		Index         int    `json:"index"`
		Predicted     int    `json:"healthy_predicted"`
		Misclassified bool   `json:"misclassified"`
	} `json:"images"`
	Misclassified struct {
		File      string `json:"file"`
		Label     string `json:"label"`
		Predicted string `json:"predicted"`
	} `json:"misclassified"`
}

func decodeModel(t *testing.T, name string) *onnxpb.ModelProto {
	t.Helper()
	var m onnxpb.ModelProto
	if err := proto.Unmarshal(mustRead(name), &m); err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	return &m
}

func metadata(m *onnxpb.ModelProto) map[string]string {
	out := map[string]string{}
	for _, p := range m.GetMetadataProps() {
		out[p.GetKey()] = p.GetValue()
	}
	return out
}

func TestFilesPresent(t *testing.T) {
	for _, name := range []string{ModelFile, UnhealthyModelFile, LabelsFile, HealthyTruthFile,
		UnhealthyTruthFile, InfoFile, ProbeLabelsFile, IconFile} {
		if b, err := Files.ReadFile(name); err != nil || len(b) == 0 {
			t.Errorf("%s: %d bytes, %v", name, len(b), err)
		}
	}
}

// Issue 3: seven bins here (at least five asked), labels in a text file and in the
// model metadata, in the same order.
func TestLabels(t *testing.T) {
	labels := Labels()
	if len(labels) != 7 || slices.Contains(labels, "") {
		t.Fatalf("labels %q", labels)
	}
	if in := readInfo(t); !slices.Equal(in.Labels, labels) {
		t.Errorf("demo.json labels %q, labels.txt %q", in.Labels, labels)
	}
	for _, f := range []string{ModelFile, UnhealthyModelFile} {
		if got := metadata(decodeModel(t, f))["labels"]; got != strings.Join(labels, "\n") {
			t.Errorf("%s: metadata labels %q", f, got)
		}
	}
}

// Issue 3: opset >= 13, dynamic batch axis, each model <= 2 MB; the preprocess metadata
// is the JSON the package comment describes and the same as demo.json's.
func TestModels(t *testing.T) {
	in := readInfo(t)
	var want map[string]any
	if err := json.Unmarshal(in.Preprocess, &want); err != nil {
		t.Fatal(err)
	}
	for _, f := range []string{ModelFile, UnhealthyModelFile} {
		if n := len(mustRead(f)); n > 2*1000*1000 {
			t.Errorf("%s: %d bytes, more than 2 MB", f, n)
		}
		m := decodeModel(t, f)
		for _, o := range m.GetOpsetImport() {
			if o.GetDomain() == "" && (o.GetVersion() < 13 || o.GetVersion() > 17) {
				t.Errorf("%s: opset %d", f, o.GetVersion())
			}
		}
		g := m.GetGraph()
		if len(g.GetInput()) != 1 || g.GetInput()[0].GetName() != in.Input.Name || in.Input.Name != "image" {
			t.Fatalf("%s: inputs %v, demo.json says %q", f, g.GetInput(), in.Input.Name)
		}
		dims := g.GetInput()[0].GetType().GetTensorType().GetShape().GetDim()
		if len(dims) != 4 || dims[0].GetDimParam() != "batch" || dims[1].GetDimValue() != 3 ||
			dims[2].GetDimValue() != 64 || dims[3].GetDimValue() != 64 {
			t.Errorf("%s: input dims %v, want [batch 3 64 64]", f, dims)
		}
		if len(g.GetOutput()) != 1 || g.GetOutput()[0].GetName() != in.Output.Name {
			t.Errorf("%s: outputs %v, demo.json says %q", f, g.GetOutput(), in.Output.Name)
		}
		var got map[string]any
		if err := json.Unmarshal([]byte(metadata(m)["preprocess"]), &got); err != nil {
			t.Fatalf("%s: preprocess metadata: %v", f, err)
		}
		if !jsonEqual(got, want) {
			t.Errorf("%s: preprocess %v, demo.json %v", f, got, want)
		}
		if got["layout"] != "nchw" || got["range"] != "0-1" || got["channels"] != "rgb" || got["resize"] != "stretch" {
			t.Errorf("%s: preprocess %v", f, got)
		}
		for _, k := range []string{"mean", "std"} {
			v, ok := got[k].([]any)
			if !ok || len(v) != 3 {
				t.Errorf("%s: preprocess %s = %v, want 3 numbers", f, k, got[k])
				continue
			}
			for _, x := range v {
				if x, ok := x.(float64); !ok || x <= 0 || x >= 1 {
					t.Errorf("%s: preprocess %s = %v, want numbers in (0,1)", f, k, v)
				}
			}
		}
	}
}

func jsonEqual(a, b any) bool {
	x, _ := json.Marshal(a)
	y, _ := json.Marshal(b)
	return bytes.Equal(x, y)
}

func checkPNG(t *testing.T, name string, w, h int) {
	t.Helper()
	img, err := png.Decode(bytes.NewReader(mustRead(name)))
	if err != nil {
		t.Errorf("%s: %v", name, err)
		return
	}
	if b := img.Bounds(); b.Dx() != w || b.Dy() != h {
		t.Errorf("%s: %v, want %d×%d", name, b, w, h)
	}
}

// Issue 3: at least 200 probe images with their true labels in the file names and a CSV.
func TestProbe(t *testing.T) {
	probe, err := Probe()
	if err != nil {
		t.Fatal(err)
	}
	if len(probe) < 200 {
		t.Fatalf("%d probe images, want at least 200", len(probe))
	}
	labels := Labels()
	seen := map[string]int{}
	for _, p := range probe {
		if p.Index < 0 || p.Index >= len(labels) || labels[p.Index] != p.Label {
			t.Errorf("%s: label %q index %d", p.File, p.Label, p.Index)
			continue
		}
		if !strings.HasPrefix(path.Base(p.File), strings.ReplaceAll(p.Label, " ", "-")+"-") {
			t.Errorf("%s: name does not start with its label %q", p.File, p.Label)
		}
		seen[p.Label]++
		checkPNG(t, p.File, 64, 64)
	}
	for _, l := range labels {
		if seen[l] == 0 {
			t.Errorf("no probe image of %q", l)
		}
	}
	if n := len(pngs(ProbeDir)); n != len(probe) {
		t.Errorf("%d PNG files in %s, %d rows in labels.csv", n, ProbeDir, len(probe))
	}
	in := readInfo(t)
	if len(in.Probe.Predictions) != len(probe) || in.Probe.Images != len(probe) {
		t.Fatalf("demo.json: %d probe predictions for %d images", len(in.Probe.Predictions), len(probe))
	}
	correct := 0
	for i, p := range in.Probe.Predictions {
		if path.Join(ProbeDir, p.File) != probe[i].File || p.Label != probe[i].Index {
			t.Errorf("demo.json probe %d: %s/%d, labels.csv %s/%d", i, p.File, p.Label, probe[i].File, probe[i].Index)
		}
		if p.Healthy == p.Label {
			correct++
		}
	}
	if correct != in.Probe.HealthyCorrect {
		t.Errorf("demo.json: %d probe predictions correct, its count says %d", correct, in.Probe.HealthyCorrect)
	}
}

// Issue 3: at least 12 demo images covering every class, with at least one genuine
// misclassification by the healthy model.
func TestDemoImages(t *testing.T) {
	imgs := Images()
	if len(imgs) < 12 {
		t.Fatalf("%d demo images, want at least 12", len(imgs))
	}
	in := readInfo(t)
	if len(in.Images) != len(imgs) {
		t.Fatalf("demo.json lists %d images, %s holds %d", len(in.Images), ImagesDir, len(imgs))
	}
	labels := Labels()
	covered := map[string]bool{}
	wrong := 0
	for i, im := range in.Images {
		if path.Join("demo", im.File) != imgs[i] {
			t.Errorf("demo.json image %d is %s, folder has %s", i, im.File, imgs[i])
		}
		if !strings.HasSuffix(im.File, "-"+strings.ReplaceAll(im.Label, " ", "-")+".png") || labels[im.Index] != im.Label {
			t.Errorf("%s: label %q index %d", im.File, im.Label, im.Index)
		}
		covered[im.Label] = true
		if im.Misclassified != (im.Predicted != im.Index) {
			t.Errorf("%s: misclassified %v, predicted %d, true %d", im.File, im.Misclassified, im.Predicted, im.Index)
		}
		if im.Misclassified {
			wrong++
			if im.File != in.Misclassified.File || in.Misclassified.Predicted != labels[im.Predicted] {
				t.Errorf("%s: misclassified entry %+v disagrees", im.File, in.Misclassified)
			}
		}
		checkPNG(t, imgs[i], 64, 64)
	}
	if len(covered) != len(labels) {
		t.Errorf("demo images cover %d of %d classes", len(covered), len(labels))
	}
	if wrong == 0 {
		t.Error("no demo image is misclassified by the healthy model")
	}
}

func TestIcon(t *testing.T) {
	checkPNG(t, IconFile, 256, 256)
	if !bytes.Equal(Icon(), mustRead(IconFile)) {
		t.Error("Icon() differs from the file")
	}
}

// truthDoc is the part of truth_*.json these tests read.
type truthDoc struct {
	Model     string `json:"model"`
	DeadTotal int    `json:"dead_total"`
	RareTotal int    `json:"rare_total"`
	Probe     struct {
		Images int `json:"images"`
	} `json:"probe"`
	Relus []struct {
		Node      string `json:"node"`
		Output    string `json:"output"`
		Follows   string `json:"follows"`
		Channels  int    `json:"channels"`
		Dead      []int  `json:"dead"`
		Rare      []int  `json:"rare"`
		FireCount []int  `json:"fire_count"`
	} `json:"relus"`
}

// Issue 3's definitions: a channel is dead when it fires on no probe image, rare when it
// fires on fewer than 1 % of them. The lists must follow from the counts, name real ReLU
// nodes of the model, and the unhealthy model must have dead channels.
func TestTruth(t *testing.T) {
	for _, c := range []struct{ truth, model string }{{HealthyTruthFile, ModelFile}, {UnhealthyTruthFile, UnhealthyModelFile}} {
		var tr truthDoc
		if err := json.Unmarshal(mustRead(c.truth), &tr); err != nil {
			t.Fatalf("%s: %v", c.truth, err)
		}
		if tr.Model != path.Base(c.model) || tr.Probe.Images != len(pngs(ProbeDir)) {
			t.Errorf("%s: model %q, %d probe images", c.truth, tr.Model, tr.Probe.Images)
		}
		nodes := map[string]*onnxpb.NodeProto{}
		for _, n := range decodeModel(t, c.model).GetGraph().GetNode() {
			nodes[n.GetName()] = n
		}
		dead, rare := 0, 0
		for _, r := range tr.Relus {
			n := nodes[r.Node]
			if n == nil || n.GetOpType() != "Relu" || n.GetOutput()[0] != r.Output {
				t.Errorf("%s: %s/%s is not a Relu node of %s", c.truth, r.Node, r.Output, c.model)
			}
			if f := nodes[r.Follows]; f == nil || n == nil || f.GetOutput()[0] != n.GetInput()[0] {
				t.Errorf("%s: %s does not follow %s", c.truth, r.Node, r.Follows)
			}
			if len(r.FireCount) != r.Channels {
				t.Errorf("%s: %s: %d counts for %d channels", c.truth, r.Node, len(r.FireCount), r.Channels)
			}
			var wd, wr []int
			for i, k := range r.FireCount {
				switch {
				case k == 0:
					wd = append(wd, i)
				case float64(k) < 0.01*float64(tr.Probe.Images):
					wr = append(wr, i)
				}
			}
			if !slices.Equal(wd, r.Dead) || !slices.Equal(wr, r.Rare) {
				t.Errorf("%s: %s: dead %v rare %v, counts say %v and %v", c.truth, r.Node, r.Dead, r.Rare, wd, wr)
			}
			dead += len(r.Dead)
			rare += len(r.Rare)
		}
		if dead != tr.DeadTotal || rare != tr.RareTotal {
			t.Errorf("%s: totals %d/%d, lists add up to %d/%d", c.truth, tr.DeadTotal, tr.RareTotal, dead, rare)
		}
		if c.truth == UnhealthyTruthFile && dead == 0 {
			t.Errorf("%s: no dead channel", c.truth)
		}
	}
}

var _ fs.FS = Files
