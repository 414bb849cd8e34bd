package viz

import (
	"context"
	"fmt"
	"path/filepath"
	"testing"
	"time"

	"fovea/modelio/infer"
)

// benchProbes is the number of probe images of BenchmarkScan.
const benchProbes = 256

// BenchmarkScan reports the scan's throughput over that of plain batched
// inference with the same activations captured, on images already in
// tensor form (goal of issue 6: at least 0.80). The scan decodes PNG files
// on top of that.
func BenchmarkScan(b *testing.B) {
	m := benchModel(b)
	s := newSession(b, m, infer.Options{Capture: ScanCapture(m)})
	cfg := benchConfig()
	dir := b.TempDir()
	files := make([]string, benchProbes)
	for i := range files {
		files[i] = filepath.Join(dir, fmt.Sprintf("p%03d.png", i))
		writePNG(b, files[i], testImage(benchSide, benchSide, uint32(i)))
	}
	input := lcgWeights(benchProbes*cfg.Len(), 9, 1)
	plainRuns(b, s, input, benchProbes) // warm up both paths
	if _, err := Scan(context.Background(), s, m, cfg, files, ScanOptions{}, nil); err != nil {
		b.Fatal(err)
	}
	var plain, scan time.Duration
	b.ReportAllocs()
	for b.Loop() {
		plain += plainRuns(b, s, input, benchProbes)
		start := time.Now()
		if _, err := Scan(context.Background(), s, m, cfg, files, ScanOptions{}, nil); err != nil {
			b.Fatal(err)
		}
		scan += time.Since(start)
	}
	b.ReportMetric(float64(plain)/float64(scan), "scan/plain-throughput")
}
