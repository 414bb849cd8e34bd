// Command synthbench is the helper of `make bench`: it writes the synthetic
// models the benchmarks run on, and turns the output of `go test -bench`
// into the table of ratios with their goals.
//
//	synthbench models DIR [parts|resnet18|vgg16 ...]   (default: all three)
//	synthbench table [FILE]                            (default: standard input)
//
// The models are written into DIR, which the caller creates and removes;
// they are never committed. vgg16.onnx is about 553 MB.
//
// The table lists every ratio with its goal and whether it was met. A ratio
// whose benchmark did not run or failed is listed as missing, and makes the
// command exit with status 1; a missed goal is reported, not an error
// (the machine is shared and the figures move).
package main

import (
	"bufio"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"time"

	"fovea/modelio/internal/synth"
)

func main() {
	if len(os.Args) < 2 {
		usage()
	}
	switch os.Args[1] {
	case "models":
		if len(os.Args) < 3 {
			usage()
		}
		if err := writeModels(os.Args[2], os.Args[3:], os.Stdout); err != nil {
			fmt.Fprintln(os.Stderr, "synthbench:", err)
			os.Exit(1)
		}
	case "table":
		in := io.Reader(os.Stdin)
		if len(os.Args) > 2 {
			f, err := os.Open(os.Args[2])
			if err != nil {
				fmt.Fprintln(os.Stderr, "synthbench:", err)
				os.Exit(1)
			}
			defer f.Close()
			in = f
		}
		res, err := parse(in)
		if err != nil {
			fmt.Fprintln(os.Stderr, "synthbench:", err)
			os.Exit(1)
		}
		_, demoErr := os.Stat(demoPath)
		var load string
		if la, err := os.ReadFile("/proc/loadavg"); err == nil {
			if f := strings.Fields(string(la)); len(f) >= 3 {
				load = strings.Join(f[:3], " ")
			}
		}
		if missing := writeTable(os.Stdout, res, demoErr == nil, load); missing > 0 {
			os.Exit(1)
		}
	default:
		usage()
	}
}

func usage() {
	fmt.Fprintln(os.Stderr, "usage: synthbench models DIR [parts|resnet18|vgg16 ...]\n       synthbench table [FILE]")
	os.Exit(2)
}

// demoPath is the demo classifier, relative to the repository root (where
// make runs).
const demoPath = "assets/demo/parts.onnx"

// builders are the models `synthbench models` can write, by file name
// without ".onnx".
var builders = map[string]func() *synth.Net{
	"parts":    synth.Parts,
	"resnet18": func() *synth.Net { return synth.ResNet18(1000) },
	"vgg16":    func() *synth.Net { return synth.VGG16(1000) },
}

func writeModels(dir string, names []string, log io.Writer) error {
	if len(names) == 0 {
		names = []string{"parts", "resnet18", "vgg16"}
	}
	for _, name := range names {
		build, ok := builders[name]
		if !ok {
			return fmt.Errorf("unknown model %q (want parts, resnet18 or vgg16)", name)
		}
		start := time.Now()
		n := build()
		path := filepath.Join(dir, name+".onnx")
		if err := n.WriteFile(path); err != nil {
			return err
		}
		st, err := os.Stat(path)
		if err != nil {
			return err
		}
		fmt.Fprintf(log, "wrote %s: %d parameters, %.1f MB, in %.1fs\n", path, n.Params, float64(st.Size())/1e6,
			time.Since(start).Seconds())
	}
	return nil
}

// results maps a benchmark's name (without the -GOMAXPROCS suffix) to its
// metrics by unit.
type results map[string]map[string]float64

// parse reads `go test -bench` output: lines
//
//	BenchmarkName/sub-2   3   123 ns/op   1.05 occlusion/plain   ...
//
// Other lines are ignored.
func parse(r io.Reader) (results, error) {
	res := results{}
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 1<<16), 1<<20)
	for sc.Scan() {
		f := strings.Fields(sc.Text())
		if len(f) < 4 || !strings.HasPrefix(f[0], "Benchmark") || len(f)%2 != 0 {
			continue
		}
		if _, err := strconv.Atoi(f[1]); err != nil {
			continue
		}
		name := f[0]
		if i := strings.LastIndexByte(name, '-'); i > 0 {
			if _, err := strconv.Atoi(name[i+1:]); err == nil {
				name = name[:i]
			}
		}
		m := map[string]float64{}
		for i := 2; i+1 < len(f); i += 2 {
			v, err := strconv.ParseFloat(f[i], 64)
			if err != nil {
				m = nil
				break
			}
			m[f[i+1]] = v
		}
		if m != nil {
			res[name] = m
		}
	}
	return res, sc.Err()
}

// row is one line of the table: a ratio, where it comes from, its goal.
type row struct {
	what, model string
	bench, unit string
	goal        float64
	atMost      bool // the ratio must be ≤ goal (else ≥)
	detail      func(m map[string]float64) string
}

// optional rows are left out of the table, not reported missing, when their
// benchmark did not run: the all-cores scan rows, which a machine with at
// most 2 cores does not run (its 2-core rows are its all-cores rows).
func (r row) optional() bool { return strings.Contains(r.bench, "/coresall/") }

func rows(demo string) []row {
	perImage := func(m map[string]float64) string {
		return fmt.Sprintf("%.0f images, plain %.2f ms/image", m["images"], m["plain-ms/image"])
	}
	pairsOf := func(m map[string]float64) string {
		return fmt.Sprintf("%.0f pairs, range %.2f–%.2f", m["pairs"], m["min-ratio"], m["max-ratio"])
	}
	out := []row{
		{"occlusion / plain batched inference, same images", demo, "BenchmarkOcclusionRatio/demo", "occlusion/plain", 1.10, true, perImage},
		{"occlusion / plain batched inference, same images", "ResNet-18 224×224 (patch 32, stride 16)", "BenchmarkOcclusionRatio/resnet18", "occlusion/plain", 1.10, true, perImage},
		{"incremental occlusion / every occluded image, same positions", demo + ", stride 4", "BenchmarkIncrementalRatio/demo/stride4", "incremental/every", 1.00, true, pairsOf},
		{"incremental occlusion / every occluded image, same positions", demo + ", stride 8", "BenchmarkIncrementalRatio/demo/stride8", "incremental/every", 1.00, true, pairsOf},
		{"incremental occlusion / every occluded image, same positions", "ResNet-18 224×224 (patch 32, stride 16)", "BenchmarkIncrementalRatio/resnet18/stride16", "incremental/every", 0.70, true, pairsOf},
		{"incremental occlusion / every occluded image, same positions", "ResNet-18 224×224 (patch 32, stride 8)", "BenchmarkIncrementalRatio/resnet18/stride8", "incremental/every", 0.70, true, pairsOf},
		{"incremental occlusion / every occluded image, same positions", "VGG-16 224×224 (patch 32, stride 16)", "BenchmarkIncrementalRatio/vgg16/stride16", "incremental/every", 0.40, true, pairsOf},
		{"incremental occlusion / every occluded image, same positions", "VGG-16 224×224 (patch 32, stride 8)", "BenchmarkIncrementalRatio/vgg16/stride8", "incremental/every", 0.40, true, pairsOf},
		{"run returning every activation map / plain run", demo, "BenchmarkCaptureRatio", "capture/plain", 1.3, true, func(m map[string]float64) string {
			return fmt.Sprintf("plain %.2f ms/run", m["plain-µs/op"]/1000)
		}},
		{"run returning every activation map / plain run", "ResNet-18 224×224", "BenchmarkCaptureRatioResNet18", "capture/plain", 1.3, true, func(m map[string]float64) string {
			return fmt.Sprintf("batch %.0f, %.0f maps, plain %.0f ms/run", m["batch"], m["maps"], m["plain-ms/run"])
		}},
		{"scan throughput / plain inference throughput with activations", demo, "BenchmarkScanRatio/demo", "scan/plain", 0.8, false, perImage},
		{"scan throughput / plain inference throughput with activations", "ResNet-18 224×224", "BenchmarkScanRatio/resnet18", "scan/plain", 0.8, false, perImage},
		{"scan with strongest patches and per-class firing / plain inference, same captures", "ResNet-18 224×224, PNG", "BenchmarkTopRatio/resnet18", "top/plain", 0.75, false, perImage},
	}
	// The scan at 1, 2 and all cores (BenchmarkScanCores): GOMAXPROCS, the
	// runtime's threads and the CPU affinity limited together.
	for _, cores := range []string{"1", "2", "all"} {
		on := map[string]string{"1": "1 core", "2": "2 cores", "all": "all cores"}[cores]
		for _, c := range []struct{ model, bench string }{
			{demo + ", PNG", "demo-png"},
			{"ResNet-18 224×224, PNG", "resnet18-png"},
			{"ResNet-18 224×224, JPEG", "resnet18-jpeg"},
		} {
			out = append(out, row{"scan throughput / plain inference throughput, " + on, c.model,
				"BenchmarkScanCores/cores" + cores + "/" + c.bench, "scan/plain", 0.8, false, perImage})
		}
	}
	return append(out, []row{
		{"labelled-folder evaluation throughput / plain batched inference throughput", "ResNet-18 224×224", "BenchmarkEvaluateRatio/resnet18", "evaluate/plain", 0.8, false, perImage},
		{"open + layer table / reading the file once", "VGG-16 (553 MB)", "BenchmarkOpenRatio", "open/read", 2, true, func(m map[string]float64) string {
			return fmt.Sprintf("read %.0f ms, open %.0f ms", m["read-ms"], m["open-ms"])
		}},
		{"peak resident memory of opening / file size", "VGG-16 (553 MB)", "BenchmarkOpenRatio", "peakRSS/size", 1.5, true, func(m map[string]float64) string {
			return fmt.Sprintf("%.0f MB above a %.0f MB baseline", m["peak-MB"], m["baseline-MB"])
		}},
	}...)
}

// writeTable prints the table and returns how many ratios are missing.
//
// load, when not empty, is the system's load average (/proc/loadavg), which
// says how much the figures may have been disturbed by other work.
func writeTable(w io.Writer, res results, demoPresent bool, load string) (missing int) {
	demo := "demo parts.onnx 64×64 (patch 8, stride 4)"
	if !demoPresent {
		demo = "demo stand-in (" + demoPath + " absent; same architecture, random weights) 64×64 (patch 8, stride 4)"
	}
	met, shown := 0, 0
	var b strings.Builder
	b.WriteString("| ratio | model | measured | goal | result | context |\n| --- | --- | ---: | --- | --- | --- |\n")
	for _, r := range rows(demo) {
		op := "≥"
		if r.atMost {
			op = "≤"
		}
		m := res[r.bench]
		v, ok := m[r.unit]
		if !ok && r.optional() {
			continue
		}
		shown++
		if !ok {
			missing++
			fmt.Fprintf(&b, "| %s | %s | — | %s %.2f | MISSING (%s did not report %s) | |\n", r.what, r.model, op, r.goal, r.bench, r.unit)
			continue
		}
		pass := v <= r.goal
		if !r.atMost {
			pass = v >= r.goal
		}
		verdict := "missed"
		if pass {
			verdict = "met"
			met++
		}
		ctx := r.detail(m)
		if lo, ok := m["min-ratio"]; ok && r.unit != "peakRSS/size" {
			ctx = fmt.Sprintf("median of %.0f pairs, range %.2f–%.2f; %s", m["pairs"], lo, m["max-ratio"], ctx)
		}
		if c, ok := m["cpu-ratio"]; ok {
			ctx = fmt.Sprintf("CPU-time ratio %.2f; %s", c, ctx)
		}
		fmt.Fprintf(&b, "| %s | %s | %.2f | %s %.2f | %s | %s |\n", r.what, r.model, v, op, r.goal, verdict, ctx)
	}
	fmt.Fprintf(&b, "\ngoals met: %d of %d", met, shown)
	if load != "" {
		fmt.Fprintf(&b, "; load average over the last 1, 5, 15 minutes: %s (%d CPUs)", load, runtime.NumCPU())
	}
	if missing > 0 {
		fmt.Fprintf(&b, "; %d ratios missing (see the benchmark output above)", missing)
	}
	b.WriteString("\n")
	io.WriteString(w, b.String())
	return missing
}
