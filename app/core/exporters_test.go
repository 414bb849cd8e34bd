package core

// Models from other exporters: the PyTorch-exported single-layer models of
// the ONNX conformance data (Debian libonnx-testdata), whose inputs and
// outputs are not those of an image classifier.

import (
	"context"
	"fovea/viz/analysis"
	"path/filepath"
	"strings"
	"testing"
)

const conformanceData = "/usr/share/libonnx-testdata/data/pytorch-converted"

func openConformance(t *testing.T, name string) *Workspace {
	t.Helper()
	start(t)
	w, err := OpenModel(filepath.Join(conformanceData, name, "model.onnx"))
	if err != nil {
		t.Fatalf("%s (Debian package libonnx-testdata): %v", name, err)
	}
	t.Cleanup(func() { w.Close() })
	return w
}

// A 4-channel image input (test_Conv2d_depthwise takes [2,4,6,6]) cannot be
// filled from a picture: every analysis returns an input error naming the model
// and the channel count instead of panicking in prep.
func TestFourChannelInput(t *testing.T) {
	w := openConformance(t, "test_Conv2d_depthwise")
	img := demoImage(t, 0)
	ctx := context.Background()
	check := func(what string, err error) {
		t.Helper()
		if err == nil || !IsInput(err) || !strings.Contains(err.Error(), "model.onnx") || !strings.Contains(err.Error(), "4 channels") {
			t.Errorf("%s: %v, want an input error naming model.onnx and its 4 channels", what, err)
		}
	}
	_, err := w.Classify(ctx, img, 3)
	check("Classify", err)
	_, err = w.Activations(ctx, img)
	check("Activations", err)
	_, _, err = w.Occlude(ctx, img, DefaultOcclusion(6, 6), nil, nil)
	check("Occlude", err)
	_, err = w.Scan(ctx, []string{"unused.png"}, analysis.ScanOptions{}, nil)
	check("Scan", err)
}

// A model without a ReLU-like layer (test_Sigmoid is one Sigmoid) has
// nothing to scan: an input error naming the model, which the command line
// turns into exit 2, not a failure while running.
func TestScanNothingToScan(t *testing.T) {
	w := openConformance(t, "test_Sigmoid")
	_, err := w.Scan(context.Background(), []string{"unused.png"}, analysis.ScanOptions{}, nil)
	if err == nil || !IsInput(err) || !strings.Contains(err.Error(), "model.onnx") || !strings.Contains(err.Error(), "ReLU-like") {
		t.Errorf("Scan: %v, want an input error naming model.onnx and the missing ReLU-like layer", err)
	}
}

// Classes, read from the file, equals the number of scores a run returns
// per image (infer.Result.Scores), so class numbers and label files are
// checked against what classification shows. The conformance models'
// outputs are feature maps like [2,4,5,3]: a per-image count of 60 (not the
// last dimension, 3). Before this was checked, occlusion and the report
// refused the predicted class ("class 54 is outside 0…3").
func TestClassesMatchScores(t *testing.T) {
	img := demoImage(t, 0)
	ran := 0
	for _, name := range []string{"test_Conv2d", "test_Conv2d_strided", "test_ReLU", "test_MaxPool2d", "test_Sigmoid"} {
		w := openConformance(t, name)
		cl, err := w.Classify(context.Background(), img, 1)
		if err != nil {
			t.Errorf("%s: %v", name, err)
			continue
		}
		ran++
		if n := w.Classes(); n != len(cl.Scores) {
			t.Errorf("%s: Classes() = %d, a run gives %d scores per image (output %s)", name, n, len(cl.Scores), w.Model.Outputs[0].Shape)
		}
		// The predicted class is a valid class for occlusion.
		if _, _, err := w.Occlude(context.Background(), img, DefaultOcclusion(w.cfg.Width, w.cfg.Height), []int{cl.Top[0].Index}, nil); err != nil {
			t.Errorf("%s: occlusion of the predicted class %d: %v", name, cl.Top[0].Index, err)
		}
	}
	if ran < 3 {
		t.Errorf("only %d conformance models ran", ran)
	}
}
