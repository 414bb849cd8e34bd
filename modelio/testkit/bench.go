package testkit

import (
	"os"
	"path/filepath"
	"testing"

	"fovea/modelio/internal/synth"
)

// benchNets are the synthetic networks BenchModels writes, by file name.
var benchNets = map[string]func() *synth.Net{
	"parts.onnx":    synth.Parts,
	"resnet18.onnx": func() *synth.Net { return synth.ResNet18(1000) },
	"vgg16.onnx":    func() *synth.Net { return synth.VGG16(1000) },
}

// BenchModels returns a folder holding the synthetic benchmark models named
// (parts.onnx, resnet18.onnx, vgg16.onnx: modelio/internal/synth, random
// He-scaled weights): $FOVEA_BENCH_MODELS when `make bench` wrote them
// there once for all packages, else a temporary folder of tb (removed when
// it ends) where they are written now, in this process (vgg16.onnx is
// about 553 MB, a few seconds).
func BenchModels(tb testing.TB, names ...string) string {
	tb.Helper()
	if d := os.Getenv("FOVEA_BENCH_MODELS"); d != "" {
		return d
	}
	dir := tb.TempDir()
	for _, n := range names {
		net, ok := benchNets[n]
		if !ok {
			tb.Fatalf("testkit: no synthetic model %q", n)
		}
		if err := net().WriteFile(filepath.Join(dir, n)); err != nil {
			tb.Fatal(err)
		}
	}
	return dir
}
