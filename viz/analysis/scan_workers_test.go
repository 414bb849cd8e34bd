package analysis

import (
	"context"
	"fmt"
	"math"
	"path/filepath"
	"slices"
	"testing"

	"fovea/modelio"
	"fovea/modelio/infer"
	"fovea/modelio/prep"
	"fovea/modelio/testkit"
)

// sameReport says where two scan reports differ, comparing every number
// bit for bit (math.Float64bits, so that even -0 and 0 differ), or "".
func sameReport(a, b *ScanReport) string {
	if a.Images != b.Images || a.Rare != b.Rare || !slices.Equal(a.Skipped, b.Skipped) || len(a.Layers) != len(b.Layers) {
		return fmt.Sprintf("images %d/%d, skipped %v/%v, %d/%d layers", a.Images, b.Images, a.Skipped, b.Skipped, len(a.Layers), len(b.Layers))
	}
	for i, la := range a.Layers {
		lb := b.Layers[i]
		if la.Name != lb.Name || la.Output != lb.Output || la.Conv != lb.Conv || len(la.Channels) != len(lb.Channels) {
			return fmt.Sprintf("layer %d: %s/%s", i, la.Name, lb.Name)
		}
		for j, ca := range la.Channels {
			cb := lb.Channels[j]
			if ca.Index != cb.Index || math.Float64bits(ca.Fires) != math.Float64bits(cb.Fires) ||
				math.Float64bits(ca.Max) != math.Float64bits(cb.Max) || math.Float64bits(ca.Mean) != math.Float64bits(cb.Mean) ||
				!slices.Equal(ca.Flags, cb.Flags) {
				return fmt.Sprintf("%s channel %d: %+v against %+v", la.Name, j, ca, cb)
			}
		}
	}
	return ""
}

// TestScanWorkersIdentical: the scan of both demo checkpoints over the
// demo's probe images gives the same report, bit for bit, with 1, 2, 3 and
// 8 decoding workers and with batches of 16 and 5 images, also with
// unreadable files among the probes. (Common practice for a parallel pipeline: the result
// must not depend on scheduling; the reference is the one-worker scan, the
// sequential pipeline.)
func TestScanWorkersIdentical(t *testing.T) {
	testkit.NeedRuntime(t)
	dir := demoDir()
	all, err := ProbeFiles(filepath.Join(dir, "probe"))
	if err != nil {
		t.Fatalf("the demo assets are needed (assets/make_demo.py): %v", err)
	}
	// Every other probe (all classes, half the time on a 2-core machine).
	var files []string
	for i := 0; i < len(all); i += 2 {
		files = append(files, all[i])
	}
	// Unreadable probes at places that fall inside and at the edges of
	// batches: a missing file and a model file (not an image).
	withBad := slices.Clone(files)
	withBad = slices.Insert(withBad, 16, filepath.Join(dir, "no-such-probe.png"))
	withBad = slices.Insert(withBad, 40, filepath.Join(dir, "parts.onnx"))
	for _, name := range []string{"parts.onnx", "parts_unhealthy.onnx"} {
		m, err := modelio.Open(filepath.Join(dir, name))
		if err != nil {
			t.Fatal(err)
		}
		cfg := prep.Guess(m)
		var first *ScanReport
		for _, batch := range []int{16, 5} {
			s := newSession(t, m, infer.Options{Capture: ScanCapture(m), Batch: batch})
			for _, probes := range []struct {
				name  string
				files []string
			}{{"probes", files}, {"with-unreadable", withBad}} {
				o := ScanOptions{SkipUnreadable: true}
				ref, err := Scan(context.Background(), s, m, cfg, probes.files, o, nil)
				if err != nil {
					t.Fatal(err)
				}
				if probes.name == "probes" {
					if first == nil {
						first = ref
					} else if d := sameReport(first, ref); d != "" {
						// ONNX Runtime's CPU kernels compute each image
						// alone, and the statistics add image after image,
						// so the batch size does not change the report either.
						t.Errorf("%s: batch %d differs from batch 16: %s", name, s.BatchSize(), d)
					}
				}
				if ref.Images != len(files) || len(ref.Skipped) != len(probes.files)-len(files) {
					t.Fatalf("%s batch %d %s: %d images, %d skipped", name, s.BatchSize(), probes.name, ref.Images, len(ref.Skipped))
				}
				for _, workers := range []int{1, 2, 3, 8} {
					o.Workers = workers
					r, err := Scan(context.Background(), s, m, cfg, probes.files, o, nil)
					if err != nil {
						t.Fatal(err)
					}
					if r.Stages.Workers != workers {
						t.Errorf("%d workers asked, %d used", workers, r.Stages.Workers)
					}
					if d := sameReport(ref, r); d != "" {
						t.Errorf("%s, batch %d, %s, %d workers: differs from the first scan: %s", name, s.BatchSize(), probes.name, workers, d)
					}
				}
			}
		}
	}
}
