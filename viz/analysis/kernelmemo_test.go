package analysis

import (
	"runtime"
	"testing"
	"weak"

	"fovea/modelio"
)

// The memo computes a convolution's flags once per model and forgets the
// model when it is collected (so a long session opening many models does not
// keep their flags).
func TestKernelMemo(t *testing.T) {
	m := scanModel(t)
	calls := 0
	compute := func() (convFlags, bool) {
		calls++
		return convFlags{m: 3, flags: map[int][]modelio.Flag{1: {modelio.FlagZeroKernel}}}, true
	}
	for range 3 {
		f, ok := memoFlags(m, "conv", compute)
		if !ok || f.m != 3 || f.flags[1][0] != modelio.FlagZeroKernel {
			t.Fatalf("memoFlags = %+v, %v", f, ok)
		}
	}
	if calls != 1 {
		t.Errorf("flags computed %d times for one model, want 1", calls)
	}
	if _, ok := memoFlags(m, "other", func() (convFlags, bool) { return convFlags{}, false }); ok {
		t.Error("a failed computation was reported as ok")
	}
	if _, ok := memoFlags(m, "other", compute); !ok || calls != 2 {
		t.Errorf("a failed computation was kept (calls %d)", calls)
	}
	if n := memoSize(); n < 1 {
		t.Fatalf("memo holds %d models", n)
	}
	key := weak.Make(m)
	forgot := make(chan weak.Pointer[modelio.Model], 16)
	kernelMemo.Lock()
	memoForgot = func(k weak.Pointer[modelio.Model]) { forgot <- k }
	kernelMemo.Unlock()
	defer func() {
		kernelMemo.Lock()
		memoForgot = nil
		kernelMemo.Unlock()
	}()
	m = nil // drop the last reference
	// runtime.GC blocks until a full collection is done; the model is then
	// unreachable (checked: its weak pointer is nil), so the runtime has
	// queued the memo's cleanup and will run it: waiting for it needs no
	// deadline (the test binary's -timeout bounds a broken memo).
	runtime.GC()
	if key.Value() != nil {
		t.Fatal("test premise: the model is still reachable after a collection")
	}
	for k := range forgot {
		if k == key {
			break
		}
	}
	if memoHolds(key) {
		t.Error("the memo still holds the flags of a collected model")
	}
}

func memoSize() int {
	kernelMemo.Lock()
	defer kernelMemo.Unlock()
	return len(kernelMemo.byModel)
}

func memoHolds(key weak.Pointer[modelio.Model]) bool {
	kernelMemo.Lock()
	defer kernelMemo.Unlock()
	_, ok := kernelMemo.byModel[key]
	return ok
}
