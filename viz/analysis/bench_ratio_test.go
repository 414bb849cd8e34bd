package analysis

// Ratio benchmarks for the analyses: occlusion against plain
// batched inference over as many images, and the dead-filter scan against
// plain batched inference with the same activations captured. Each ratio is
// measured against its bound in the same run, the two interleaved (and
// their order alternated) so that both see the same load on a shared
// machine; the median over the pairs is reported, with the lowest and
// highest. `make bench` runs them and prints the table.
//
// Models: the demo classifier (assets/demo/parts.onnx, or a stand-in of its
// architecture with random weights when it is absent) and a ResNet-18-sized
// network, both written by modelio/internal/synth. This package cannot
// import that internal package, so the files come from the folder named by
// $FOVEA_BENCH_MODELS (make bench writes them there once for all packages)
// or, without it, written by testkit.BenchModels in this process.

import (
	"context"
	"fmt"
	"image"
	"image/color"
	"image/jpeg"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"slices"
	"testing"
	"time"

	"fovea/modelio"
	"fovea/modelio/infer"
	"fovea/modelio/prep"
	"fovea/modelio/testkit"
	"fovea/viz"
)

// The demo's input is 64×64: patch 8 and stride 4 hide about the same
// share of it as patch 32 and stride 16 of a 224×224 input (1/8 and 1/7 of
// the side, stride half the patch).
const (
	benchDemoPatch, benchDemoStride     = 8, 4
	benchResNetPatch, benchResNetStride = 32, 16
	// Probe images of the scan benchmark.
	benchDemoProbes, benchResNetProbes = 256, 32
	// benchMinPair is the least time one interleaved pair (bound + measured)
	// should take; short ones are repeated within an iteration so that
	// timer resolution and scheduling noise stay small.
	benchMinPair = 500 * time.Millisecond
)

// benchDemoFile is the demo classifier, relative to this package.
const benchDemoFile = "../../assets/demo/parts.onnx"

// benchCase is one model of the ratio benchmarks.
type benchCase struct {
	name          string // sub-benchmark: demo or resnet18
	path          string
	patch, stride int
	probes        int
}

func benchCases(b *testing.B) []benchCase {
	dir := testkit.BenchModels(b, "parts.onnx", "resnet18.onnx")
	demo := benchDemoFile
	if _, err := os.Stat(demo); err != nil {
		b.Logf("%s not found; the demo rows use a stand-in of its architecture with random weights", demo)
		demo = filepath.Join(dir, "parts.onnx")
	}
	return []benchCase{
		{"demo", demo, benchDemoPatch, benchDemoStride, benchDemoProbes},
		{"resnet18", filepath.Join(dir, "resnet18.onnx"), benchResNetPatch, benchResNetStride, benchResNetProbes},
	}
}

// benchPicture is a deterministic test picture: smooth colour gradients
// with a bright disc whose place depends on seed, and a little noise.
func benchPicture(w, h int, seed uint32) *image.NRGBA {
	img := image.NewNRGBA(image.Rect(0, 0, w, h))
	cx, cy := float64(w)*(0.3+0.4*float64(seed%7)/7), float64(h)*(0.3+0.4*float64(seed%5)/5)
	r := float64(min(w, h)) / 5
	v := seed*2654435761 + 1
	for y := range h {
		for x := range w {
			v = v*1664525 + 1013904223 // Numerical Recipes LCG
			noise := float64(v>>24) / 255 * 0.1
			fx, fy := float64(x)/float64(w), float64(y)/float64(h)
			c := [3]float64{0.2 + 0.5*fx, 0.3 + 0.4*fy, 0.5 + 0.3*math.Sin(6*fx*fy)}
			if math.Hypot(float64(x)-cx, float64(y)-cy) < r {
				c = [3]float64{0.9, 0.85, 0.6}
			}
			px := color.NRGBA{A: 255}
			for i, p := range []*uint8{&px.R, &px.G, &px.B} {
				*p = uint8(math.Min(255, 255*(c[i]+noise)))
			}
			img.SetNRGBA(x, y, px)
		}
	}
	return img
}

// benchOpen opens a model, its preprocessing guess, and checks it is a
// square RGB image classifier.
func benchOpen(b *testing.B, path string) (*modelio.Model, prep.Config) {
	m, err := modelio.Open(path)
	if err != nil {
		b.Fatal(err)
	}
	c := prep.Guess(m)
	if err := c.Validate(); err != nil || c.Width == 0 || c.Width != c.Height || c.Channels != 3 {
		b.Fatalf("%s: unexpected input settings %v (%v)", m.Name, c, err)
	}
	return m, c
}

// pairs is what interleave measured.
type pairs struct {
	bound, measured time.Duration // totals
	ratios          []float64     // measured/bound of each pair
	// CPU time of all pairs (testkit.ProcessCPU); cpuOK is false when unknown.
	cpuBound, cpuMeasured time.Duration
	cpuOK                 bool
}

// median returns the median of the pairs' ratios (inverted when invert, for
// throughputs) and their range. The median, not the ratio of the totals,
// because on a shared machine a pair can fall into a burst of someone
// else's work; a pair's two halves run back to back and see the same load.
func (p pairs) median(invert bool) (med, lo, hi float64) {
	r := slices.Clone(p.ratios)
	if invert {
		for i := range r {
			r[i] = 1 / r[i]
		}
	}
	slices.Sort(r)
	k := len(r) / 2
	med = r[k]
	if len(r)%2 == 0 {
		med = (r[k-1] + r[k]) / 2
	}
	return med, r[0], r[len(r)-1]
}

// interleave runs bound and measured alternately, reps pairs per b.Loop
// iteration (reps chosen from one warm pair so that an iteration takes at
// least benchMinPair), alternating which goes first so that neither always
// runs on the other's warm caches, and records each pair's ratio.
func interleave(b *testing.B, bound, measured func()) pairs {
	t0 := time.Now()
	bound()
	measured()
	reps := max(1, int(math.Ceil(float64(benchMinPair)/float64(time.Since(t0)))))
	var p pairs
	_, p.cpuOK = testkit.ProcessCPU()
	timed := func(f func(), cpu *time.Duration) time.Duration {
		c0, _ := testkit.ProcessCPU()
		s := time.Now()
		f()
		d := time.Since(s)
		c1, _ := testkit.ProcessCPU()
		*cpu += c1 - c0
		return d
	}
	b.ReportAllocs()
	for b.Loop() {
		for range reps {
			var tb, tm time.Duration
			if len(p.ratios)%2 == 0 {
				tb = timed(bound, &p.cpuBound)
				tm = timed(measured, &p.cpuMeasured)
			} else {
				tm = timed(measured, &p.cpuMeasured)
				tb = timed(bound, &p.cpuBound)
			}
			p.bound += tb
			p.measured += tm
			p.ratios = append(p.ratios, float64(tm)/float64(tb))
		}
	}
	return p
}

// report reports the median ratio under unit, its range over the pairs,
// their number, the bound's time per image, and the same ratio of the CPU
// time of all pairs together: a cross-check that the load of other programs
// hardly disturbs (it does not show time lost waiting, which the wall-clock
// ratio, the goal's measure, does).
func (p pairs) report(b *testing.B, unit string, invert bool, images int) {
	med, lo, hi := p.median(invert)
	b.ReportMetric(med, unit)
	b.ReportMetric(lo, "min-ratio")
	b.ReportMetric(hi, "max-ratio")
	if p.cpuOK && p.cpuBound > 0 && p.cpuMeasured > 0 {
		r := float64(p.cpuMeasured) / float64(p.cpuBound)
		if invert {
			r = 1 / r
		}
		b.ReportMetric(r, "cpu-ratio")
	}
	b.ReportMetric(float64(len(p.ratios)), "pairs")
	b.ReportMetric(float64(images), "images")
	b.ReportMetric(p.bound.Seconds()*1000/float64(len(p.ratios)*images), "plain-ms/image")
}

// BenchmarkOcclusionRatio reports occlusion time over the time of plain
// batched inference on as many images as occlusion runs (positions + the
// unoccluded image), same session: goal at most 1.10.
func BenchmarkOcclusionRatio(b *testing.B) {
	testkit.NeedRuntime(b)
	for _, bc := range benchCases(b) {
		b.Run(bc.name, func(b *testing.B) { occlusionRatio(b, bc) })
	}
}

func occlusionRatio(b *testing.B, bc benchCase) {
	ctx := context.Background()
	m, cfg := benchOpen(b, bc.path)
	s, err := infer.NewSession(m, infer.Options{})
	if err != nil {
		b.Fatal(err)
	}
	defer s.Close()
	img := prep.Fit(benchPicture(cfg.Width, cfg.Height, 1), cfg)
	set := viz.OcclusionSettings{Patch: bc.patch, Stride: bc.stride}
	occlude := func() []*viz.Occlusion {
		o, err := Occlude(ctx, s, cfg, img, set, nil, nil)
		if err != nil {
			b.Fatal(err)
		}
		return o
	}
	o := occlude()
	n := len(o[0].Ys)*len(o[0].Xs) + 1
	one := make([]float32, cfg.Len())
	cfg.Tensor(prep.Planes(img), one)
	input := make([]float32, 0, n*len(one))
	for range n {
		input = append(input, one...)
	}
	var res *infer.Result
	plain := func() {
		if res, err = s.RunInto(ctx, input, n, res); err != nil {
			b.Fatal(err)
		}
	}
	interleave(b, plain, func() { occlude() }).report(b, "occlusion/plain", false, n)
	b.ReportMetric(float64(s.BatchSize()), "batch")
}

// BenchmarkScanRatio reports the scan's throughput (probe PNG files decoded,
// fitted, run with the ReLU maps captured, statistics gathered) over that of
// plain batched inference of the same images, already as tensors, with the
// same maps captured, by a session with the default options: goal at least
// 0.8.
func BenchmarkScanRatio(b *testing.B) {
	testkit.NeedRuntime(b)
	for _, bc := range benchCases(b) {
		b.Run(bc.name, func(b *testing.B) { scanRatio(b, bc) })
	}
}

func scanRatio(b *testing.B, bc benchCase) { scanRatioWith(b, bc, "png", 0) }

// scanRatioWith is scanRatio with probe files in format ("png" or "jpeg",
// quality 90) and both sessions' runtime threads set to threads (0: one per
// core).
func scanRatioWith(b *testing.B, bc benchCase, format string, threads int) {
	ctx := context.Background()
	m, cfg := benchOpen(b, bc.path)
	// The scan's session is made as the window's is (ScanSession); the
	// bound's with the default options, the fastest for runs that have the
	// cores to themselves.
	opt := ScanSession(m, nil)
	opt.Threads = threads
	s, err := infer.NewSession(m, opt)
	if err != nil {
		b.Fatal(err)
	}
	defer s.Close()
	// The bound reads the same tensors as the scan, the same way: the
	// maps and the activations' inputs (PreActivationCapture), summarised
	// in the graph where the model fixes their size, else captured whole.
	// The runtime's work is then the same on both sides; reading the maps
	// at all costs the runs themselves 1.2-1.3 times a run that reads none
	// on the ResNet-18-sized network (README, "Benchmarks").
	bound, err := infer.NewSession(m, infer.Options{Capture: opt.Capture, Summarise: opt.Summarise, Threads: threads})
	if err != nil {
		b.Fatal(err)
	}
	defer bound.Close()
	dir := b.TempDir()
	files := make([]string, bc.probes)
	input := make([]float32, bc.probes*cfg.Len())
	for i := range files {
		pic := benchPicture(cfg.Width, cfg.Height, uint32(i))
		files[i] = filepath.Join(dir, fmt.Sprintf("probe%03d.%s", i, format))
		f, err := os.Create(files[i])
		if err != nil {
			b.Fatal(err)
		}
		if format == "jpeg" {
			err = jpeg.Encode(f, pic, &jpeg.Options{Quality: 90})
		} else {
			err = png.Encode(f, pic)
		}
		if err != nil {
			b.Fatal(err)
		}
		if err := f.Close(); err != nil {
			b.Fatal(err)
		}
		cfg.Tensor(prep.Planes(prep.Fit(pic, cfg)), input[i*cfg.Len():(i+1)*cfg.Len()])
	}
	var res *infer.Result
	plain := func() {
		if res, err = bound.RunInto(ctx, input, bc.probes, res); err != nil {
			b.Fatal(err)
		}
	}
	var stages Stages
	scan := func() {
		rep, err := Scan(ctx, s, m, cfg, files, ScanOptions{}, nil)
		if err != nil {
			b.Fatal(err)
		}
		if rep.Images != bc.probes {
			b.Fatalf("scan read %d images of %d", rep.Images, bc.probes)
		}
		stages = rep.Stages
	}
	interleave(b, plain, scan).report(b, "scan/plain", true, bc.probes)
	b.ReportMetric(float64(s.BatchSize()), "batch")
	b.ReportMetric(float64(stages.Workers), "workers")
	// Where the last scan's time went, as shares of its wall time.
	for _, st := range []struct {
		unit string
		d    time.Duration
	}{{"decode-share", stages.Decode}, {"prepare-share", stages.Prepare}, {"run-share", stages.Run}, {"summarise-share", stages.Summarise}, {"wait-share", stages.Wait}} {
		b.ReportMetric(st.d.Seconds()/stages.Wall.Seconds(), st.unit)
	}
}

// BenchmarkIncrementalRatio reports incremental occlusion's time over that
// of running every occluded image (Occlude with NoReuse), same session, same
// positions, interleaved: goals at most 1.00 for the demo, 0.70 for the
// ResNet-18-sized network and 0.40 for the VGG-16-sized one (the last only
// when $FOVEA_BENCH_MODELS holds vgg16.onnx, as make bench writes it). The
// incremental side includes the clean pass and the measurement that picks
// the stages, every time; cutting the sub-models and opening their
// sessions happens once per session (infer.Session.Keep), in the first
// call, whose ratio is reported apart as cold-ratio.
func BenchmarkIncrementalRatio(b *testing.B) {
	testkit.NeedRuntime(b)
	cases := benchCases(b)
	if d := os.Getenv("FOVEA_BENCH_MODELS"); d != "" {
		if p := filepath.Join(d, "vgg16.onnx"); fileExists(p) {
			cases = append(cases, benchCase{name: "vgg16", path: p, patch: benchResNetPatch, stride: benchResNetStride})
		}
	}
	for _, bc := range cases {
		b.Run(fmt.Sprintf("%s/stride%d", bc.name, bc.stride), func(b *testing.B) { incrementalRatio(b, bc) })
		bc.stride = 8
		b.Run(fmt.Sprintf("%s/stride%d", bc.name, bc.stride), func(b *testing.B) { incrementalRatio(b, bc) })
	}
}

func incrementalRatio(b *testing.B, bc benchCase) {
	ctx := context.Background()
	m, cfg := benchOpen(b, bc.path)
	s, err := infer.NewSession(m, infer.Options{})
	if err != nil {
		b.Fatal(err)
	}
	defer s.Close()
	img := prep.Fit(benchPicture(cfg.Width, cfg.Height, 1), cfg)
	set := viz.OcclusionSettings{Patch: bc.patch, Stride: bc.stride}
	every := set
	every.NoReuse = true
	var method string
	run := func(set viz.OcclusionSettings) func() {
		return func() {
			o, err := Occlude(ctx, s, cfg, img, set, nil, nil)
			if err != nil {
				b.Fatal(err)
			}
			if !set.NoReuse {
				method = o[0].Method + ": " + o[0].MethodWhy
			}
		}
	}
	// The first call on a fresh session also cuts the sub-models and opens
	// their sessions (kept with the session for the next calls): its ratio
	// is reported on its own, as cold-ratio; the pairs that follow measure
	// the heatmaps after the first.
	t0 := time.Now()
	run(every)()
	t1 := time.Now()
	run(set)()
	cold := float64(time.Since(t1)) / float64(t1.Sub(t0))
	p := interleave(b, run(every), run(set))
	p.report(b, "incremental/every", false, 1)
	b.ReportMetric(cold, "cold-ratio")
	b.Log(method)
}

func fileExists(p string) bool {
	_, err := os.Stat(p)
	return err == nil
}
