package testkit

import (
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

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

// ProcessCPU returns the CPU time (user + system) this process has used,
// all threads together (ONNX Runtime's included), from /proc/self/stat
// (proc(5): fields 14 and 15, in ticks of 1/100 s on Linux); ok is false
// where there is no such file. Unlike the wall-clock time, it hardly grows
// when other programs compete for the cores.
func ProcessCPU() (d time.Duration, ok bool) {
	data, err := os.ReadFile("/proc/self/stat")
	if err != nil {
		return 0, false
	}
	s := string(data)
	f := strings.Fields(s[strings.LastIndexByte(s, ')')+1:]) // the name may hold spaces
	if len(f) < 13 {
		return 0, false
	}
	ut, err1 := strconv.ParseInt(f[11], 10, 64)
	st, err2 := strconv.ParseInt(f[12], 10, 64)
	if err1 != nil || err2 != nil {
		return 0, false
	}
	return time.Duration(ut+st) * 10 * time.Millisecond, true
}
