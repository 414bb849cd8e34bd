package analysis

import (
	"context"
	"fmt"
	"image/png"
	"os"
	"path/filepath"
	"testing"

	"fovea/modelio/infer"
	"fovea/modelio/prep"
	"fovea/modelio/testkit"
)

// BenchmarkTopRatio reports the throughput of a scan that also keeps each
// channel's nine strongest probe images, the per-class firing of a labelled
// folder (two class subfolders) and the activations' input maxima, over
// that of plain batched inference of the same images (already tensors) with
// the same tensors captured, in the same run: goal at least 0.75, on the
// ResNet-18-sized network over 224×224 PNG probes.
func BenchmarkTopRatio(b *testing.B) {
	testkit.NeedRuntime(b)
	for _, bc := range benchCases(b) {
		if bc.name != "resnet18" {
			continue
		}
		b.Run(bc.name, func(b *testing.B) { topRatio(b, bc) })
	}
}

func topRatio(b *testing.B, bc benchCase) {
	ctx := context.Background()
	m, cfg := benchOpen(b, bc.path)
	opt := ScanSession(m, nil)
	s, err := infer.NewSession(m, opt)
	if err != nil {
		b.Fatal(err)
	}
	defer s.Close()
	bound, err := infer.NewSession(m, infer.Options{Capture: opt.Capture, Summarise: opt.Summarise}) // the same reads as the scan (scanRatioWith)
	if err != nil {
		b.Fatal(err)
	}
	defer bound.Close()
	dir := b.TempDir()
	files := make([]string, bc.probes)
	labels := map[string]string{}
	input := make([]float32, bc.probes*cfg.Len())
	for i := range files {
		pic := benchPicture(cfg.Width, cfg.Height, uint32(i))
		class := []string{"first", "second"}[i%2]
		files[i] = filepath.Join(dir, class, fmt.Sprintf("probe%03d.png", i))
		labels[files[i]] = class
		if err := os.MkdirAll(filepath.Dir(files[i]), 0o755); err != nil {
			b.Fatal(err)
		}
		f, err := os.Create(files[i])
		if err != nil {
			b.Fatal(err)
		}
		if err := png.Encode(f, pic); err != nil {
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
	scan := func() {
		rep, err := Scan(ctx, s, m, cfg, files, ScanOptions{TopK: DefaultTopK, Labels: labels}, nil)
		if err != nil {
			b.Fatal(err)
		}
		if rep.Images != bc.probes || len(rep.Layers[0].Channels[0].Top) != DefaultTopK || len(rep.Classes) != 2 {
			b.Fatalf("scan read %d images of %d, kept %d patches, %d classes", rep.Images, bc.probes, len(rep.Layers[0].Channels[0].Top), len(rep.Classes))
		}
	}
	interleave(b, plain, scan).report(b, "top/plain", true, bc.probes)
	b.ReportMetric(float64(len(opt.Capture)), "captures")
	b.ReportMetric(float64(len(opt.Summarise)), "summaries")
}
