package modelio

import (
	"errors"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	"fovea/modelio/onnxpb"
)

// conformanceDir holds the ONNX backend test data as packaged by Debian
// (libonnx-testdata): one folder per case with model.onnx and
// test_data_set_0/{input,output}_N.pb.
const conformanceDir = "/usr/share/libonnx-testdata/data"

func needConformance(t *testing.T) {
	t.Helper()
	if _, err := os.Stat(conformanceDir); err != nil {
		t.Fatalf("ONNX conformance data missing (%v): `make test` installs the Debian package libonnx-testdata", err)
	}
}

// expectedDims reads the dims of a stored expected output (a TensorProto).
func expectedDims(t *testing.T, path string) []int64 {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	var tp onnxpb.TensorProto
	if err := proto.Unmarshal(data, &tp); err != nil {
		// A file of the conformance data that does not parse is a broken
		// installation or a misread, not a case to pass over.
		t.Fatalf("%s: not a TensorProto: %v", path, err)
	}
	return tp.GetDims()
}

// conformancePrefixes are the operators the layer table must infer exactly,
// matched case-insensitively against "test_<prefix>" folder
// names under node/ and pytorch-converted/. PyTorch's converted tests call
// AveragePool "AvgPool" and BatchNormalization "BatchNorm".
var conformancePrefixes = []string{"conv", "maxpool", "averagepool", "avgpool", "globalaveragepool", "globalmaxpool",
	"flatten", "gemm", "relu", "softmax", "batchnorm"}

// unsupportedConformance lists cases whose output shape static inference
// does not produce, with the reason ("suite/test_name": "why"). The list may
// only shrink; it is empty now: every matching case passes, 1-D and 3-D
// convolution and pooling, ConvTranspose, ConvInteger, MaxPool's indices
// output and batch normalisation's training outputs included. A listed case
// that starts passing fails the test until it is removed.
var unsupportedConformance = map[string]string{}

func TestConformanceShapes(t *testing.T) {
	needConformance(t)
	// Source: ONNX backend test data (onnx/backend/test/data), expected
	// outputs computed by the ONNX reference implementation / PyTorch.
	checked := 0
	for _, suite := range []string{"node", "pytorch-converted"} {
		entries, err := os.ReadDir(filepath.Join(conformanceDir, suite))
		if err != nil {
			t.Fatal(err)
		}
		for _, e := range entries {
			name := strings.ToLower(e.Name())
			match := false
			for _, p := range conformancePrefixes {
				if strings.HasPrefix(name, "test_"+p) {
					match = true
				}
			}
			if !match {
				continue
			}
			dir := filepath.Join(conformanceDir, suite, e.Name())
			key := suite + "/" + e.Name()
			t.Run(key, func(t *testing.T) {
				checked++
				got, err := conformanceCase(t, dir)
				if why, ok := unsupportedConformance[key]; ok {
					if err == nil {
						t.Errorf("listed as unsupported (%s) but now passes: remove it from the list", why)
					}
					return
				}
				if err != nil {
					t.Error(err)
				}
				_ = got
			})
		}
	}
	if checked < 100 {
		t.Errorf("only %d conformance cases matched; the data folder looks incomplete", checked)
	}
}

type caseErr string

func (e caseErr) Error() string { return string(e) }

// conformanceCase opens a case's model and compares the inferred shape of
// every graph output with the stored expected output.
func conformanceCase(t *testing.T, dir string) (Shape, error) {
	m, err := Open(filepath.Join(dir, "model.onnx"))
	if err != nil {
		return nil, err
	}
	var last Shape
	for k, out := range m.Outputs {
		want := expectedDims(t, filepath.Join(dir, "test_data_set_0", "output_"+itoa(k)+".pb"))
		info := m.g.info[out.Name]
		if info == nil || !info.static() || !allKnown(info.shape) || info.declared {
			why := "unknown"
			if info != nil {
				why = info.why
			}
			return nil, caseErr("output " + out.Name + ": shape not inferred: " + why)
		}
		if !slices.Equal(info.shape.Ints(), want) {
			return nil, caseErr("output " + out.Name + ": inferred " + info.shape.String() + ", expected " + ShapeOf(want...).String())
		}
		last = info.shape
	}
	return last, nil
}

func allKnown(s Shape) bool {
	for _, d := range s {
		if !d.Known() {
			return false
		}
	}
	return true
}

func itoa(i int) string { return strconv.Itoa(i) }

// TestConformanceNeverGuesses runs every case under node/ and
// pytorch-converted/: opening never panics, failures are *Error values, and
// whenever static inference claims a full shape for a graph output it equals
// the stored expected output. Source: ONNX backend test data.
func TestConformanceNeverGuesses(t *testing.T) {
	needConformance(t)
	var cases, opened, inferred int
	for _, suite := range []string{"node", "pytorch-converted", "pytorch-operator", "simple"} {
		entries, err := os.ReadDir(filepath.Join(conformanceDir, suite))
		if err != nil {
			t.Fatal(err)
		}
		for _, e := range entries {
			dir := filepath.Join(conformanceDir, suite, e.Name())
			cases++
			m, err := Open(filepath.Join(dir, "model.onnx"))
			if err != nil {
				var me *Error
				if !errors.As(err, &me) {
					t.Errorf("%s: error of type %T: %v", e.Name(), err, err)
				}
				if !strings.HasPrefix(err.Error(), "modelio: model.onnx: ") {
					t.Errorf("%s: error does not name the file: %v", e.Name(), err)
				}
				continue
			}
			opened++
			for k, out := range m.Outputs {
				if k > 9 {
					break
				}
				info := m.g.info[out.Name]
				if info == nil || !info.static() || !allKnown(info.shape) {
					continue
				}
				if info.declared {
					continue // declared in the file, not inferred
				}
				want := expectedDims(t, filepath.Join(dir, "test_data_set_0", "output_"+itoa(k)+".pb"))
				inferred++
				if !slices.Equal(info.shape.Ints(), want) {
					t.Errorf("%s/%s output %q: inferred %s, expected %s", suite, e.Name(), out.Name, info.shape, ShapeOf(want...))
				}
			}
		}
	}
	t.Logf("%d cases, %d opened, %d output shapes inferred and checked", cases, opened, inferred)
	if inferred < 300 {
		t.Errorf("only %d output shapes inferred; expected several hundred", inferred)
	}
}
