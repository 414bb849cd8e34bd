package analysis

import (
	"fmt"
	"os"
	"runtime"
	"slices"
	"strconv"
	"testing"

	"fovea/modelio/testkit"

	"golang.org/x/sys/unix"
)

// BenchmarkScanCores is BenchmarkScanRatio with the process limited to 1, 2
// and all of the cores it may use: GOMAXPROCS, ONNX Runtime's threads
// (infer.Options.Threads) and the CPU affinity of every thread of the
// process (sched_setaffinity(2)) set together, so that neither the
// decoders nor the runtime can borrow a core the other side is denied. The
// demo network reads 64×64 PNG probes, the ResNet-18-sized one 224×224 PNG
// and JPEG probes. Goal: scan throughput at least 0.8 of plain inference at
// every core count.
func BenchmarkScanCores(b *testing.B) {
	testkit.NeedRuntime(b)
	var all unix.CPUSet
	if err := unix.SchedGetaffinity(0, &all); err != nil {
		b.Fatalf("reading the CPU affinity: %v", err)
	}
	n := all.Count()
	counts := slices.Compact([]int{1, min(2, n), n})
	cases := benchCases(b)
	for _, cores := range counts {
		name := "cores" + strconv.Itoa(cores)
		if cores == n && n > 2 {
			name = "coresall"
		}
		b.Run(name, func(b *testing.B) {
			for _, bc := range cases {
				formats := []string{"png"}
				if bc.name == "resnet18" {
					formats = append(formats, "jpeg")
				}
				for _, format := range formats {
					b.Run(bc.name+"-"+format, func(b *testing.B) {
						// Here, not around the sub-benchmarks: the testing
						// package sets GOMAXPROCS before each of them.
						restore := limitCores(b, all, cores)
						defer restore()
						scanRatioWith(b, bc, format, cores)
					})
				}
			}
		})
	}
}

// limitCores sets GOMAXPROCS to cores and every thread of the process to
// the first cores CPUs of all; new threads inherit the mask of the thread
// that creates them. The returned function undoes both.
func limitCores(b *testing.B, all unix.CPUSet, cores int) func() {
	var set unix.CPUSet
	for cpu, k := 0, 0; k < cores && cpu < 1024; cpu++ {
		if all.IsSet(cpu) {
			set.Set(cpu)
			k++
		}
	}
	if err := setAllThreads(&set); err != nil {
		b.Fatalf("limiting the process to %d cores: %v", cores, err)
	}
	old := runtime.GOMAXPROCS(cores)
	return func() {
		runtime.GOMAXPROCS(old)
		if err := setAllThreads(&all); err != nil {
			b.Errorf("restoring the CPU affinity: %v", err)
		}
	}
}

// setAllThreads sets the CPU affinity of every thread of the process
// (/proc/self/task, proc(5)), twice: a thread started by one not yet
// limited during the first pass is caught by the second.
func setAllThreads(set *unix.CPUSet) error {
	for range 2 {
		if err := setThreads(set); err != nil {
			return err
		}
	}
	return nil
}

func setThreads(set *unix.CPUSet) error {
	tasks, err := os.ReadDir("/proc/self/task")
	if err != nil {
		return err
	}
	for _, t := range tasks {
		tid, err := strconv.Atoi(t.Name())
		if err != nil {
			continue
		}
		if err := unix.SchedSetaffinity(tid, set); err != nil && err != unix.ESRCH {
			return fmt.Errorf("thread %d: %w", tid, err)
		}
	}
	return nil
}
