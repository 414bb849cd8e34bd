package analysis

import (
	"runtime"
	"sync"
	"weak"

	"fovea/modelio"
)

// Kernel flags depend on the weights alone, and on a ResNet-18-sized model
// they take a fifth of a second: as long as a scan of 32 images of the
// same size. A model's weights never change once it is open, so the flags
// of each convolution are computed once per *modelio.Model and kept until
// the model is garbage collected; a second scan of the same model (or the
// window's rescan) reads them from here.
var kernelMemo = struct {
	sync.Mutex
	byModel map[weak.Pointer[modelio.Model]]map[string]convFlags
}{byModel: map[weak.Pointer[modelio.Model]]map[string]convFlags{}}

// memoForgot, when set (by tests only, under kernelMemo's lock), is called
// after the memo has dropped a collected model's flags: the runtime runs
// cleanups on its own goroutine, and a test needs to know when it has.
var memoForgot func(weak.Pointer[modelio.Model])

// memoFlags returns the flags of convolution node of m, computing them with
// compute on the first call. compute's result is kept only when ok.
func memoFlags(m *modelio.Model, node string, compute func() (convFlags, bool)) (convFlags, bool) {
	key := weak.Make(m)
	kernelMemo.Lock()
	if f, ok := kernelMemo.byModel[key][node]; ok {
		kernelMemo.Unlock()
		return f, true
	}
	kernelMemo.Unlock()
	f, ok := compute()
	if !ok {
		return f, false
	}
	kernelMemo.Lock()
	defer kernelMemo.Unlock()
	byNode := kernelMemo.byModel[key]
	if byNode == nil {
		byNode = map[string]convFlags{}
		kernelMemo.byModel[key] = byNode
		runtime.AddCleanup(m, func(k weak.Pointer[modelio.Model]) {
			kernelMemo.Lock()
			delete(kernelMemo.byModel, k)
			done := memoForgot
			kernelMemo.Unlock()
			if done != nil {
				done(k)
			}
		}, key)
	}
	byNode[node] = f
	return f, true
}
