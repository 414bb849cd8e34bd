package main

import (
	"strings"
	"testing"
)

// benchOutput is go test -bench output in the format of the testing
// package ("Benchmark results format", Go proposal 14313): name with the
// GOMAXPROCS suffix, iterations, then value/unit pairs; other lines are
// logs and package headers.
const benchOutput = `goos: linux
pkg: fovea/viz
BenchmarkOcclusionRatio/demo-2         	       3	 755347477 ns/op	        16.00 batch	       226.0 images	         0.9907 occlusion/plain	         0.2398 plain-ms/image	 7223856 B/op	    9156 allocs/op
BenchmarkOcclusionRatio/resnet18-2         	       3	6333579303 ns/op	         2.000 batch	       170.0 images	         1.180 occlusion/plain	        17.91 plain-ms/image	0.9 cpu-ratio
BenchmarkScanRatio/demo-2              	       3	 527061312 ns/op	         0.5505 scan/plain	0.51 min-ratio	0.6 max-ratio	12 pairs
BenchmarkScanRatio/resnet18-2              	       3	 527061312 ns/op	         0.8000 scan/plain
BenchmarkEvaluateRatio/resnet18-2          	      10	 912345678 ns/op	         0.9300 evaluate/plain	0.88 min-ratio	0.97 max-ratio	10 pairs
BenchmarkTopRatio/resnet18-2              	       3	 627061312 ns/op	         0.7700 top/plain	32 images	20.5 plain-ms/image
BenchmarkScanCores/cores1/demo-png-2         	       4	1475832530 ns/op	        16.00 batch	         0.3065 cpu-ratio	       256.0 images	         0.3985 max-ratio	         0.2844 min-ratio	         4.000 pairs	         1.378 plain-ms/image	         0.3198 scan/plain
BenchmarkScanCores/cores1/resnet18-png-2 	4	7330871992 ns/op	0.85 scan/plain
BenchmarkScanCores/cores1/resnet18-jpeg-2 	4	7330871992 ns/op	0.9 scan/plain
BenchmarkScanCores/cores2/demo-png-2 	4	7330871992 ns/op	0.6 scan/plain
BenchmarkScanCores/cores2/resnet18-png-2 	4	7330871992 ns/op	0.82 scan/plain
BenchmarkScanCores/cores2/resnet18-jpeg-2 	4	7330871992 ns/op	0.95 scan/plain
--- BENCH: BenchmarkCaptureRatio-2
    bench_test.go:63: a log line 1.5 capture/plain
BenchmarkCaptureRatio-2           	       3	   7277841 ns/op	      4790 capture-µs/op	         1.2 capture/plain	      2486 plain-µs/op
BenchmarkIncrementalRatio/demo/stride4-2	1	9 ns/op	0.98 incremental/every	3 pairs	0.9 min-ratio	1.1 max-ratio
BenchmarkIncrementalRatio/demo/stride8-2	1	9 ns/op	1.02 incremental/every
BenchmarkIncrementalRatio/resnet18/stride16-2	1	9 ns/op	0.55 incremental/every
BenchmarkIncrementalRatio/resnet18/stride8-2	1	9 ns/op	0.45 incremental/every
BenchmarkIncrementalRatio/vgg16/stride16-2	1	9 ns/op	0.3 incremental/every
BenchmarkIncrementalRatio/vgg16/stride8-2	1	9 ns/op	0.28 incremental/every
BenchmarkOpenRatio	       3	 481490250 ns/op	         0.8869 open/read	         1.004 peakRSS/size
PASS
`

func TestParse(t *testing.T) {
	res, err := parse(strings.NewReader(benchOutput))
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		bench, unit string
		want        float64
	}{
		{"BenchmarkOcclusionRatio/demo", "occlusion/plain", 0.9907},
		{"BenchmarkOcclusionRatio/demo", "images", 226},
		{"BenchmarkOcclusionRatio/demo", "allocs/op", 9156},
		{"BenchmarkOcclusionRatio/resnet18", "occlusion/plain", 1.18},
		{"BenchmarkCaptureRatio", "capture/plain", 1.2}, // not the log line's 1.5
		{"BenchmarkCaptureRatio", "plain-µs/op", 2486},
		{"BenchmarkOpenRatio", "peakRSS/size", 1.004}, // no -GOMAXPROCS suffix when it is 1
	} {
		if got, ok := res[tc.bench][tc.unit]; !ok || got != tc.want {
			t.Errorf("%s %s = %v (present %v), want %v", tc.bench, tc.unit, got, ok, tc.want)
		}
	}
}

func TestTable(t *testing.T) {
	res, err := parse(strings.NewReader(benchOutput))
	if err != nil {
		t.Fatal(err)
	}
	var b strings.Builder
	missing := writeTable(&b, res, false, "1.00 2.00 3.00")
	out := b.String()
	// Missing from the output above: the ResNet-18 capture ratio.
	if missing != 1 {
		t.Errorf("%d ratios missing, want 1\n%s", missing, out)
	}
	if strings.Contains(out, "all cores") {
		t.Errorf("the all-cores rows were not run and should be left out:\n%s", out)
	}
	for _, want := range []string{
		"| 0.99 | ≤ 1.10 | met |",                                         // demo occlusion
		"| 1.18 | ≤ 1.10 | missed |",                                      // ResNet-18 occlusion
		"| 0.55 | ≥ 0.80 | missed | median of 12 pairs, range 0.51–0.60;", // demo scan
		"| 0.80 | ≥ 0.80 | met |",                                         // the goal itself is met
		"| 1.20 | ≤ 1.30 | met |",
		"| 0.89 | ≤ 2.00 | met |",
		"| 1.00 | ≤ 1.50 | met |",
		"| 0.93 | ≥ 0.80 | met | median of 10 pairs, range 0.88–0.97;", // ResNet-18 evaluation
		"MISSING (BenchmarkCaptureRatioResNet18 did not report capture/plain)",
		"demo stand-in",
		"| 0.98 | ≤ 1.00 | met |", // incremental occlusion
		"| 1.02 | ≤ 1.00 | missed |",
		"| 0.30 | ≤ 0.40 | met |",
		"| scan throughput / plain inference throughput, 1 core | demo stand-in (assets/demo/parts.onnx absent; same architecture, random weights) 64×64 (patch 8, stride 4), PNG | 0.32 | ≥ 0.80 | missed | CPU-time ratio 0.31; median of 4 pairs, range 0.28–0.40; 256 images, plain 1.38 ms/image |",
		"| scan throughput / plain inference throughput, 2 cores | ResNet-18 224×224, JPEG | 0.95 | ≥ 0.80 | met |",
		// The all-cores rows are absent (a 2-core run has none): left out, not missing.
		"| scan with strongest patches and per-class firing / plain inference, same captures | ResNet-18 224×224, PNG | 0.77 | ≥ 0.75 | met | 32 images, plain 20.50 ms/image |",
		"goals met: 16 of 22; load average over the last 1, 5, 15 minutes: 1.00 2.00 3.00",
		"1 ratios missing",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("table lacks %q:\n%s", want, out)
		}
	}
}
