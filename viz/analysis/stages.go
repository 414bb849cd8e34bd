package analysis

import (
	"fmt"
	"time"
)

// Stages says where the time of a folder analysis (a scan, an evaluation)
// went, so that a user can see what limits it: slow storage or large JPEGs
// show as decoding, a heavy model as running. The stages overlap (the
// workers decode the next images while the model runs), so their shares of
// the wall time can add up to more than 100 %; Decode and Prepare are
// summed over the workers.
type Stages struct {
	Wall      time.Duration // the whole analysis
	Decode    time.Duration // reading and decompressing files, summed over the workers
	Prepare   time.Duration // fitting to the input size and converting to values, summed over the workers
	Run       time.Duration // the model's runs
	Summarise time.Duration // gathering the results of the runs (statistics, scores)
	// Wait is how long the model's goroutine waited for prepared images:
	// near 0 when decoding keeps up, a large share when it is the limit.
	Wait    time.Duration
	Workers int // decoding goroutines
}

// String gives each stage as a share of the wall time, e.g.
//
//	2.31 s: decoding 141 % (4 workers), preparing 9 %, running 83 %, summarising 12 %; waiting for images 6 %
func (s Stages) String() string {
	if s.Wall <= 0 {
		return "no time measured"
	}
	pc := func(d time.Duration) string { return fmt.Sprintf("%.0f %%", 100*d.Seconds()/s.Wall.Seconds()) }
	workers := "1 worker"
	if s.Workers != 1 {
		workers = fmt.Sprintf("%d workers", s.Workers)
	}
	return fmt.Sprintf("%.2f s: decoding %s (%s), preparing %s, running %s, summarising %s; waiting for images %s",
		s.Wall.Seconds(), pc(s.Decode), workers, pc(s.Prepare), pc(s.Run), pc(s.Summarise), pc(s.Wait))
}
