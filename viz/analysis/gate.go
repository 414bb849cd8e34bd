package analysis

import "sync"

// coreGate takes turns between the model and the Go work of a folder
// analysis (decoding the next images, gathering statistics) when the
// runtime's threads already take every core. Sharing the cores then costs
// far more than the Go work itself: the runtime splits each operator among
// its threads and waits for the last one, so a thread pre-empted by a
// decoder stalls the whole operator. Measured on 2 cores with
// BenchmarkScanRatio/resnet18: the model's runs inside the scan took 1.5
// times as long as the same runs alone, while the decoding and the
// statistics they overlapped were under a fifth of the runs' CPU time; a
// gate that only kept new files from starting still left them 1.25 times
// as long (files begun just before a run went on decoding beside it).
//
// So the gate is strict: the model runs once the Go work in progress (one
// file per decoder, one batch's statistics) has finished, and no new Go
// work starts until the run is over. A nil *coreGate never waits.
type coreGate struct{ mu sync.RWMutex }

// work runs f as Go work: not while the model runs.
func (g *coreGate) work(f func()) {
	if g == nil {
		f()
		return
	}
	g.mu.RLock()
	defer g.mu.RUnlock()
	f()
}

// run runs f, the model, alone: it waits for the Go work in progress, and
// new work waits for it (sync.RWMutex lets a waiting writer in before new
// readers).
func (g *coreGate) run(f func()) {
	if g == nil {
		f()
		return
	}
	g.mu.Lock()
	defer g.mu.Unlock()
	f()
}
