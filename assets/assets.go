// Package assets embeds Fovea's demo: two trained parts-sorting networks, their labels, the
// truth about their ReLU channels, demo and probe images, and the application icon, so that
// the built binary alone can open the demo.
//
// # Scenario
//
// A camera looks straight down on a conveyor belt in a hardware-parts sorting line. Each
// 64×64 RGB frame shows one part near the centre, to be sorted into one of seven bins, in
// this class-index order:
//
//	0 washer, 1 copper washer, 2 hex nut, 3 wood screw, 4 coil spring, 5 cable tie, 6 wall plug
//
// "washer" and "copper washer" share one geometry and differ only by material colour; the
// other bins differ by shape. Everything is invented and rendered by make_demo.py with numpy:
// no outside data set or model is used.
//
// # Files
//
// Paths are relative to [Files] (forward slashes, as io/fs wants them):
//
//	demo/parts.onnx            healthy model (ONNX opset 13)
//	demo/parts_unhealthy.onnx  same network after a training mishap: some ReLU channels died
//	demo/labels.txt            class names, one a line, in class-index order
//	demo/truth_healthy.json    which ReLU channels of parts.onnx never fire on the probe images
//	demo/truth_unhealthy.json  the same for parts_unhealthy.onnx
//	demo/demo.json             accuracies, per-probe predictions, the demo images and the genuine mistake
//	demo/images/NN-<class>.png demo images, 64×64 RGB
//	demo/probe/<class>-NNNN.png probe images, 64×64 RGB, true class in the name
//	demo/probe/labels.csv      file,label,index for every probe image
//	icon.png                   application icon, 256×256 RGBA
//
// Both models take input "image", float32 [batch, 3, 64, 64] (NCHW, RGB), and return
// "logits", float32 [batch, 7] (no softmax in the graph). Preprocessing, also stored in each
// model's "preprocess" metadata as JSON: scale 8-bit values to 0..1, then subtract the
// per-channel mean and divide by the per-channel std given there. The model metadata key
// "labels" holds the class names joined by "\n".
//
// # Regeneration
//
// The files were made by make_demo.py (PyTorch 1.13.1, numpy 1.24.2, onnx 1.12.0 and
// Pillow 9.4.0 from Debian 12: packages python3-torch, python3-numpy, python3-onnx,
// python3-pil). From the repository root:
//
//	/usr/bin/python3 assets/make_demo.py
//
// It renders all frames from fixed seeds, trains both networks at once with one thread
// each, and rewrites everything listed above; it is never run at build, run or test time.
// The last run took 1771 s on this project's heavily loaded 2-core machine (151 s for the
// earlier network on an idle one). Runs give byte-identical images; for the present network
// two runs gave different trained models (README.md in this folder says more).
//
// # What the files say
//
// Network: /conv1/Conv 12 filters 7×7, stride 2, pad 3, then /relu1/Relu with no pooling;
// three stages of 3×3 convolution, ReLU and 2×2 max pooling (24, 32, 48 filters); one fully
// connected layer. Healthy model: 93.07 % on 1400 held-out rendered frames (not stored),
// 91.43 % (256/280) on the stored probe images, one dead ReLU channel (/relu3 #30), no rare
// one. Unhealthy model: the same run except that the whole first epoch used learning rate
// 0.016 instead of 0.002; 79.86 % on the held-out frames, 77.14 % (216/280) on the probe
// images, 39 dead channels (13 after /conv2/Conv, 11 after /conv3/Conv, 15 after
// /conv4/Conv) and 6 rare ones. truth_*.json name
// each ReLU by its ONNX node ("/relu2/Relu") and output tensor ("/relu2/Relu_output_0"),
// with per-channel fire counts over the probe images and the margins that make the verdicts
// safe to recompute in float32 (README.md in this folder has the full table). The demo image
// demo/images/15-coil-spring.png is the healthy model's genuine mistake: it says "hex nut".
package assets

import (
	"bytes"
	"embed"
	"encoding/csv"
	"fmt"
	"io/fs"
	"path"
	"sort"
	"strconv"
	"strings"
)

// Files holds every embedded demo file under the paths listed in the package comment.
//
//go:embed icon.png demo
var Files embed.FS

// Paths of the embedded files within [Files].
const (
	ModelFile          = "demo/parts.onnx"
	UnhealthyModelFile = "demo/parts_unhealthy.onnx"
	LabelsFile         = "demo/labels.txt"
	HealthyTruthFile   = "demo/truth_healthy.json"
	UnhealthyTruthFile = "demo/truth_unhealthy.json"
	InfoFile           = "demo/demo.json"
	ImagesDir          = "demo/images"
	ProbeDir           = "demo/probe"
	ProbeLabelsFile    = "demo/probe/labels.csv"
	IconFile           = "icon.png"
)

// mustRead returns an embedded file. The files are fixed at build time and checked by this
// package's tests, so a missing one is a programmer mistake.
func mustRead(name string) []byte {
	b, err := Files.ReadFile(name)
	if err != nil {
		panic("assets: " + err.Error())
	}
	return b
}

// Icon returns the application icon (PNG, 256×256).
func Icon() []byte { return mustRead(IconFile) }

// Model returns the healthy demo model (ONNX).
func Model() []byte { return mustRead(ModelFile) }

// UnhealthyModel returns the demo model with dead ReLU channels (ONNX).
func UnhealthyModel() []byte { return mustRead(UnhealthyModelFile) }

// Labels returns the class names in class-index order.
func Labels() []string {
	s := strings.TrimRight(string(mustRead(LabelsFile)), "\n")
	return strings.Split(s, "\n")
}

// Images returns the paths (within [Files]) of the demo images, sorted by name.
func Images() []string { return pngs(ImagesDir) }

// Labelled is one probe image and its true class.
type Labelled struct {
	File  string // path within [Files], e.g. "demo/probe/washer-0007.png"
	Label string // class name
	Index int    // class index
}

// Probe returns the probe images with their true classes, in the order of labels.csv.
func Probe() ([]Labelled, error) {
	r := csv.NewReader(bytes.NewReader(mustRead(ProbeLabelsFile)))
	rows, err := r.ReadAll()
	if err != nil {
		return nil, fmt.Errorf("assets: %s: %v", ProbeLabelsFile, err)
	}
	if len(rows) == 0 || strings.Join(rows[0], ",") != "file,label,index" {
		return nil, fmt.Errorf("assets: %s: header is not file,label,index", ProbeLabelsFile)
	}
	out := make([]Labelled, 0, len(rows)-1)
	for i, row := range rows[1:] {
		idx, err := strconv.Atoi(row[2])
		if err != nil {
			return nil, fmt.Errorf("assets: %s: row %d: index %q: %v", ProbeLabelsFile, i+2, row[2], err)
		}
		out = append(out, Labelled{File: path.Join(ProbeDir, row[0]), Label: row[1], Index: idx})
	}
	return out, nil
}

func pngs(dir string) []string {
	ents, err := fs.ReadDir(Files, dir)
	if err != nil {
		panic("assets: " + err.Error())
	}
	var out []string
	for _, e := range ents {
		if !e.IsDir() && strings.HasSuffix(e.Name(), ".png") {
			out = append(out, path.Join(dir, e.Name()))
		}
	}
	sort.Strings(out)
	return out
}
