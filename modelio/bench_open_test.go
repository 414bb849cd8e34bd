package modelio_test

// Opening benchmark: modelio.Open on a model of about 500 MB
// (VGG-16 with random weights, 553 MB, written by modelio/internal/synth at
// benchmark time, never committed) against reading the same file once with
// os.ReadFile, and the peak resident memory of opening against the file's
// size. `make bench` runs it and prints the table.

import (
	"bufio"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"fovea/modelio"
	"fovea/modelio/internal/synth"
)

// Environment of the child process that measures peak memory: what to do
// ("open" or "base") and the model file.
const (
	openChildEnv = "FOVEA_BENCH_OPEN_CHILD"
	openFileEnv  = "FOVEA_BENCH_OPEN_FILE"
)

// init turns the test binary into the measuring child when openChildEnv is
// set: it opens the model (or, for the baseline, does nothing), prints its
// peak resident set size (VmHWM of /proc/self/status) and exits before any
// test runs.
func init() {
	mode := os.Getenv(openChildEnv)
	if mode == "" {
		return
	}
	var keep *modelio.Model
	if mode == "open" {
		m, err := modelio.Open(os.Getenv(openFileEnv))
		if err != nil {
			fmt.Fprintln(os.Stderr, err)
			os.Exit(2)
		}
		if len(m.Layers) == 0 {
			fmt.Fprintln(os.Stderr, "no layers")
			os.Exit(2)
		}
		keep = m
	}
	kb, err := peakRSS()
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(2)
	}
	runtime.KeepAlive(keep)
	fmt.Printf("VmHWM %d\n", kb)
	os.Exit(0)
}

// peakRSS reads the peak resident set size of this process, in kB, from
// /proc/self/status (proc(5): "VmHWM: Peak resident set size").
func peakRSS() (int64, error) {
	f, err := os.Open("/proc/self/status")
	if err != nil {
		return 0, err
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		if rest, ok := strings.CutPrefix(sc.Text(), "VmHWM:"); ok {
			return strconv.ParseInt(strings.TrimSuffix(strings.TrimSpace(rest), " kB"), 10, 64)
		}
	}
	return 0, fmt.Errorf("/proc/self/status: no VmHWM line")
}

// childPeak runs this test binary as the measuring child and returns its
// peak resident set size in bytes.
func childPeak(b *testing.B, mode, path string) int64 {
	cmd := exec.Command(os.Args[0], "-test.run=^$", "-test.bench=^$")
	cmd.Env = append(os.Environ(), openChildEnv+"="+mode, openFileEnv+"="+path)
	out, err := cmd.Output()
	if err != nil {
		msg := ""
		if ee, ok := err.(*exec.ExitError); ok {
			msg = string(ee.Stderr)
		}
		b.Fatalf("measuring child (%s): %v %s", mode, err, msg)
	}
	kb, err := strconv.ParseInt(strings.TrimSpace(strings.TrimPrefix(string(out), "VmHWM ")), 10, 64)
	if err != nil {
		b.Fatalf("measuring child (%s) printed %q", mode, out)
	}
	return kb * 1024
}

// openBenchModel returns the path of the VGG-16 file: from
// $FOVEA_BENCH_MODELS when make bench has written it there, else written
// now into a temporary folder (about 553 MB; a few seconds).
func openBenchModel(b *testing.B) string {
	if d := os.Getenv("FOVEA_BENCH_MODELS"); d != "" {
		p := filepath.Join(d, "vgg16.onnx")
		if st, err := os.Stat(p); err == nil && st.Mode().IsRegular() {
			return p
		}
	}
	p := filepath.Join(b.TempDir(), "vgg16.onnx")
	if err := synth.VGG16(1000).WriteFile(p); err != nil {
		b.Fatal(err)
	}
	return p
}

// BenchmarkOpenRatio reports the time of modelio.Open (read, decode, layer
// table) over the time of os.ReadFile of the same file (goal: at most 2;
// the median pair, interleaved with alternating order, both from the page
// cache); and the
// peak resident memory of a fresh process that opens the model, less that
// of one that does not, over the file's size (goal: at most 1.5).
func BenchmarkOpenRatio(b *testing.B) {
	path := openBenchModel(b)
	st, err := os.Stat(path)
	if err != nil {
		b.Fatal(err)
	}
	size := st.Size()

	var sink int
	read := func() {
		data, err := os.ReadFile(path)
		if err != nil {
			b.Fatal(err)
		}
		sink += len(data)
	}
	open := func() {
		m, err := modelio.Open(path)
		if err != nil {
			b.Fatal(err)
		}
		sink += len(m.Layers)
	}
	// Each operation starts with the previous one's memory collected, so
	// neither pays for the other's garbage.
	timed := func(f func()) time.Duration {
		runtime.GC()
		s := time.Now()
		f()
		return time.Since(s)
	}
	timed(read) // brings the file into the page cache
	timed(open)
	var tr, to time.Duration
	var ratios []float64
	i := 0
	b.ReportAllocs()
	for b.Loop() {
		var r, o time.Duration
		if i%2 == 0 {
			r = timed(read)
			o = timed(open)
		} else {
			o = timed(open)
			r = timed(read)
		}
		tr += r
		to += o
		ratios = append(ratios, float64(o)/float64(r))
		i++
	}
	// The median pair: on a shared machine one can fall into a burst of
	// someone else's work.
	slices.Sort(ratios)
	k := len(ratios) / 2
	med := ratios[k]
	if len(ratios)%2 == 0 {
		med = (ratios[k-1] + ratios[k]) / 2
	}
	base := childPeak(b, "base", path)
	peak := childPeak(b, "open", path)
	b.ReportMetric(med, "open/read")
	b.ReportMetric(ratios[0], "min-ratio")
	b.ReportMetric(ratios[len(ratios)-1], "max-ratio")
	b.ReportMetric(float64(len(ratios)), "pairs")
	b.ReportMetric(float64(peak-base)/float64(size), "peakRSS/size")
	b.ReportMetric(tr.Seconds()*1000/float64(i), "read-ms")
	b.ReportMetric(to.Seconds()*1000/float64(i), "open-ms")
	b.ReportMetric(float64(peak-base)/1e6, "peak-MB")
	b.ReportMetric(float64(base)/1e6, "baseline-MB")
	b.ReportMetric(float64(size)/1e6, "file-MB")
	if sink == 0 {
		b.Fatal("nothing read")
	}
}
