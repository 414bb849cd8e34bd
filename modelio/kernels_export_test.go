package modelio

import (
	"encoding/json"
	"os"
	"path/filepath"
	"testing"
)

// Kernels read from real exports agree exactly with the same weights read
// independently by the onnx package's numpy_helper.to_array (outside
// reference: testdata/onnxref/kernels.json, written by gen_kernels.py with
// Debian python3-onnx 1.12; Python does not run in `make test`). The files:
// a PyTorch 1.13 export whose BatchNormalization torch.onnx folded into the
// Conv (the generator checks the fold against W·γ/√(σ²+ε)), the same graph
// with its weights in Constant nodes, and the same graph stored in float16
// behind Casts. Every value must match bit for bit: both sides read the same
// stored numbers, and float16 widens to float32 exactly.
func TestKernelsMatchOnnxNumpyHelper(t *testing.T) {
	dir := filepath.Join("testdata", "onnxref")
	raw, err := os.ReadFile(filepath.Join(dir, "kernels.json"))
	if err != nil {
		t.Fatal(err)
	}
	var ref map[string]struct {
		Node  string    `json:"node"`
		Dims  []int     `json:"dims"`
		Group int       `json:"group"`
		W     []float64 `json:"w"`
		Bias  []float64 `json:"bias"`
	}
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatalf("kernels.json: %v", err)
	}
	if len(ref) != 3 {
		t.Fatalf("kernels.json has %d models, want 3", len(ref))
	}
	for name, want := range ref {
		t.Run(name, func(t *testing.T) {
			m, err := Open(filepath.Join(dir, name))
			if err != nil {
				t.Fatal(err)
			}
			k, err := m.Kernels("")
			if err != nil {
				t.Fatal(err)
			}
			if k.Node != want.Node || k.M != want.Dims[0] || k.C != want.Dims[1] ||
				k.KH != want.Dims[2] || k.KW != want.Dims[3] || k.Group != want.Group {
				t.Fatalf("kernels of %q: %d×%d×%d×%d group %d, numpy_helper: node %q dims %v group %d",
					k.Node, k.M, k.C, k.KH, k.KW, k.Group, want.Node, want.Dims, want.Group)
			}
			if len(k.W) != len(want.W) || len(k.Bias) != len(want.Bias) {
				t.Fatalf("%d weights and %d biases, numpy_helper %d and %d", len(k.W), len(k.Bias), len(want.W), len(want.Bias))
			}
			for i, v := range want.W {
				if k.W[i] != float32(v) {
					t.Fatalf("W[%d] = %v, numpy_helper %v", i, k.W[i], float32(v))
				}
			}
			for i, v := range want.Bias {
				if k.Bias[i] != float32(v) {
					t.Fatalf("bias[%d] = %v, numpy_helper %v", i, k.Bias[i], float32(v))
				}
			}
		})
	}
}
