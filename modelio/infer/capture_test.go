package infer

import (
	"context"
	"path/filepath"
	"slices"
	"testing"

	"fovea/modelio"
	"fovea/modelio/onnxbuild"
)

// The model's own outputs are those of a plain run, bit for bit, whatever is
// captured ("The rewrite must not change the model's own
// outputs"). ONNX Runtime folds a BatchNormalization into the Conv before
// it, and arithmetic with a constant into the node before it, only while the
// tensor between them is not a graph output (its graph optimisers, common
// practice; the ResNet-18-sized network changed 1,756 of 2,000 logits by up
// to 4e-5 when every Conv output was captured). Each model here captures
// every tensor a node computes, runs a batch of 3 through both sessions and
// compares the outputs bit for bit.
func TestCaptureKeepsOutputs(t *testing.T) {
	cases := []struct {
		name  string
		build func(b *onnxbuild.Builder)
		twin  bool // the session needs the unchanged model for its outputs
	}{
		{"conv-bn-relu-pool", func(b *onnxbuild.Builder) {
			x := b.Input("image", onnxbuild.Float, "N", 3, 24, 24)
			x = b.MaxPool(b.Relu(b.BatchNorm(b.Conv(x, 3, 16, 3, 1, 1), 16)), 2, 2, 0)
			x = b.Relu(b.BatchNorm(b.Conv(x, 16, 16, 3, 1, 1), 16))
			b.Output(b.Gemm(b.Flatten(b.GlobalAveragePool(x)), 16, 5))
		}, true},
		{"residual", func(b *onnxbuild.Builder) {
			x := b.Input("image", onnxbuild.Float, "N", 3, 16, 16)
			x = b.Relu(b.Conv(x, 3, 16, 3, 1, 1))
			y := b.BatchNorm(b.Conv(b.Relu(b.BatchNorm(b.Conv(x, 16, 16, 3, 1, 1), 16)), 16, 16, 3, 1, 1), 16)
			x = b.Relu(b.Add(y, x))
			b.Output(b.Gemm(b.Flatten(b.GlobalAveragePool(x)), 16, 5))
		}, true},
		{"conv-relu-pool", func(b *onnxbuild.Builder) {
			x := b.Input("image", onnxbuild.Float, "N", 3, 20, 20)
			x = b.MaxPool(b.Relu(b.Conv(x, 3, 16, 5, 1, 2)), 2, 2, 0)
			x = b.Relu(b.Gemm(b.Flatten(x), 16*10*10, 32))
			b.Output(b.Gemm(x, 32, 5))
		}, false},
		{"constant-arithmetic", func(b *onnxbuild.Builder) {
			x := b.Input("image", onnxbuild.Float, "N", 3, 16, 16)
			x = b.Conv(x, 3, 16, 3, 1, 1)
			x = b.Op("Add", []string{x, b.Weight("shift", 16, 1, 1)})
			x = b.Op("Mul", []string{x, b.Weight("scale", 16, 1, 1)})
			x = b.Relu(x)
			f := b.Flatten(x)
			f = b.Op("MatMul", []string{f, b.Weight("proj", 16*16*16, 300)})
			f = b.Op("Add", []string{f, b.Weight("proj_b", 300)})
			f = b.Op("Mul", []string{f, b.Weight("gain", 300)})
			b.Output(b.Op("MatMul", []string{f, b.Weight("head", 300, 5)}))
		}, true},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			b := onnxbuild.New(13, onnxbuild.Random)
			c.build(b)
			p := filepath.Join(t.TempDir(), c.name+".onnx")
			if err := b.Write(p); err != nil {
				t.Fatal(err)
			}
			m, err := modelio.Open(p)
			if err != nil {
				t.Fatal(err)
			}
			var every []string
			for _, l := range m.Layers {
				if l.Output != "" && !slices.Contains(every, l.Output) && l.Output != m.Outputs[0].Name {
					every = append(every, l.Output)
				}
			}
			plain := newSession(t, m, Options{})
			capt := newSession(t, m, Options{Capture: every})
			maps := newSession(t, m, Options{Capture: modelio.OutputsOf(m.MapLayers())})
			if got := capt.twin != nil; got != c.twin {
				t.Errorf("capturing every tensor: second run for the outputs = %v, want %v", got, c.twin)
			}
			if maps.twin != nil {
				t.Errorf("ActivationOutputs %v needs a second run; it should capture only maps the runtime materialises anyway", modelio.OutputsOf(m.MapLayers()))
			}
			dims, err := plain.ImageDims()
			if err != nil {
				t.Fatal(err)
			}
			per := 1
			for _, d := range dims {
				per *= int(d)
			}
			x := randn(41, 3*per, 1)
			ctx := context.Background()
			want, err := plain.Run(ctx, x, 3)
			if err != nil {
				t.Fatal(err)
			}
			for _, s := range []*Session{capt, maps} {
				for range 2 { // the first run learns the shapes, the second writes in place
					got, err := s.Run(ctx, x, 3)
					if err != nil {
						t.Fatal(err)
					}
					if !bitsEqual(got.Outputs[0].Data, want.Outputs[0].Data) {
						t.Errorf("%d captures: outputs %v, plain run %v", len(got.Maps), got.Outputs[0].Data[:5], want.Outputs[0].Data[:5])
					}
					if s == capt && len(got.Maps) != len(every) {
						t.Errorf("%d maps returned, %d captured", len(got.Maps), len(every))
					}
				}
			}
		})
	}
}

// Options.NoSpin changes how the runtime's threads wait, not what they
// compute: the outputs and maps equal the default session's bit for bit.
func TestNoSpinSameResults(t *testing.T) {
	m := openTiny(t, 0, false)
	def := newSession(t, m, Options{Capture: tinyOutputs, Threads: 2})
	quiet := newSession(t, m, Options{Capture: tinyOutputs, Threads: 2, NoSpin: true})
	x := images(4)
	a, err := def.Run(context.Background(), x, 4)
	if err != nil {
		t.Fatal(err)
	}
	b, err := quiet.Run(context.Background(), x, 4)
	if err != nil {
		t.Fatal(err)
	}
	if !bitsEqual(a.Outputs[0].Data, b.Outputs[0].Data) {
		t.Error("outputs differ with NoSpin")
	}
	for name, ma := range a.Maps {
		if !bitsEqual(ma.Data, b.Maps[name].Data) {
			t.Errorf("map %s differs with NoSpin", name)
		}
	}
	if len(a.Maps) != len(tinyOutputs) || len(b.Maps) != len(a.Maps) {
		t.Errorf("maps: %d and %d, want %d", len(a.Maps), len(b.Maps), len(tinyOutputs))
	}
}
