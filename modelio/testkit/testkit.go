// Package testkit is the support every package's tests share: the real ONNX
// Runtime loaded once (NeedRuntime), golden pictures with one -update flag
// (Goldens), the synthetic benchmark models (BenchModels) and the checks of
// the module's structure (Packages). It is imported by _test.go files only.
//
// Models for tests are built with the public builder, package
// modelio/onnxbuild.
//
// The package imports modelio/infer and modelio/internal/synth, so the
// internal tests of modelio, modelio/infer and modelio/internal/synth
// cannot import it (Go forbids the import cycle); those keep their own
// small runtime loader (failing the same way) and modelio its own -update
// flag for its stored models.
package testkit

import (
	"sync"
	"testing"

	"fovea/modelio/infer"
)

var runtimeOnce = sync.OnceValue(func() error {
	p, err := infer.FindLibrary("")
	if err != nil {
		return err
	}
	return infer.Init(p)
})

// NeedRuntime loads the real ONNX Runtime library once per test binary
// (infer.FindLibrary(""): $FOVEA_ORT_LIB, the user cache, beside the binary,
// the system folders) and FAILS the test when it is missing or unusable,
// with the reason and the command that fetches it. It never skips: the
// project counts a skipped test as not run, and a runtime test that
// silently skipped on a machine without the library would read as passing.
// `make test` installs the library first.
func NeedRuntime(t testing.TB) {
	t.Helper()
	if err := runtimeOnce(); err != nil {
		t.Fatalf("ONNX Runtime is needed for this test and is not usable (make ort, or bin/fovea fetch-runtime): %v", err)
	}
}
