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

// benchEvalImages is how many labelled PNGs the evaluation benchmark reads
// per run: a few batches of the ResNet-18-sized network.
const benchEvalImages = 48

// BenchmarkEvaluateRatio reports the throughput of evaluating a labelled
// folder of 224×224 PNGs (listing, decoding, fitting, running, counting)
// over that of plain batched inference of the same images, already as
// tensors, by a session with the same options, in the same run: goal at
// least 0.8 on the ResNet-18-sized network.
func BenchmarkEvaluateRatio(b *testing.B) {
	testkit.NeedRuntime(b)
	for _, bc := range benchCases(b) {
		if bc.name != "resnet18" {
			continue
		}
		b.Run(bc.name, func(b *testing.B) { evaluateRatio(b, bc) })
	}
}

func evaluateRatio(b *testing.B, bc benchCase) {
	ctx := context.Background()
	m, cfg := benchOpen(b, bc.path)
	s, err := infer.NewSession(m, infer.Options{})
	if err != nil {
		b.Fatal(err)
	}
	defer s.Close()
	dir := b.TempDir()
	input := make([]float32, benchEvalImages*cfg.Len())
	for i := range benchEvalImages {
		pic := benchPicture(cfg.Width, cfg.Height, uint32(i))
		sub := filepath.Join(dir, fmt.Sprint(i%10))
		if err := os.MkdirAll(sub, 0o755); err != nil {
			b.Fatal(err)
		}
		f, err := os.Create(filepath.Join(sub, fmt.Sprintf("img%03d.png", i)))
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
		if res, err = s.RunInto(ctx, input, benchEvalImages, res); err != nil {
			b.Fatal(err)
		}
	}
	evaluate := func() {
		data, err := OpenFolder(dir, ClassResolver{Classes: 1000})
		if err != nil {
			b.Fatal(err)
		}
		e, err := Evaluate(ctx, s, data, cfg, EvalOptions{}, nil)
		if err != nil {
			b.Fatal(err)
		}
		if e.Images != benchEvalImages {
			b.Fatalf("evaluated %d images of %d (skipped %v)", e.Images, benchEvalImages, e.Skipped)
		}
	}
	interleave(b, plain, evaluate).report(b, "evaluate/plain", true, benchEvalImages)
	b.ReportMetric(float64(s.BatchSize()), "batch")
}
