package synth

import (
	"bytes"
	"context"
	"encoding/binary"
	"math"
	"path/filepath"
	"testing"

	"google.golang.org/protobuf/proto"

	"fovea/modelio"
	"fovea/modelio/infer"
	"fovea/modelio/onnxpb"
)

// TestParams checks the builders against the published sizes of the
// networks they imitate.
func TestParams(t *testing.T) {
	for _, tc := range []struct {
		name   string
		net    *Net
		params int64
		// bn is the number of batch-normalised channels: each has a running
		// mean and variance in the file that are not parameters.
		bn     int64
		source string
	}{
		// He et al. 2016 report 11.7 million; the exact figure is the one
		// commonly published for torchvision's resnet18 (from memory).
		{"resnet18", ResNet18(1000), 11_689_512, 64 + 4*64 + (4*128 + 128) + (4*256 + 256) + (4*512 + 512),
			"He et al. 2016, Table 1 (11.7 M); torchvision resnet18, from memory"},
		// Simonyan & Zisserman 2015, Table 2: 138 million; exact figure of
		// torchvision's vgg16 (from memory).
		{"vgg16", VGG16(1000), 138_357_544, 0, "Simonyan & Zisserman 2015, Table 2 (138 M); torchvision vgg16, from memory"},
		// Parts, the stand-in of PartsNet in assets/make_demo.py, counted by hand layer by layer
		// (weights + biases): 3·12·49+12, 12·24·9+24, 24·32·9+32,
		// 32·32·9+32, 512·64+64, 64·7+7.
		{"parts", Parts(), 1776 + 2616 + 6944 + 9248 + 32832 + 455, 0, "assets/make_demo.py PartsNet, hand count"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if tc.net.Params != tc.params {
				t.Errorf("%s: %d parameters, want %d (%s)", tc.name, tc.net.Params, tc.params, tc.source)
			}
			if got, want := tc.net.Values, tc.params+2*tc.bn; got != want {
				t.Errorf("%s: %d values in the initializers, want %d parameters + 2×%d running statistics", tc.name, got, want, tc.bn)
			}
		})
	}
}

// TestResNet18Table reads the written ResNet-18 back with modelio and checks
// its layer table against He et al. 2016, Table 1: conv5_x ends at 7×7×512,
// the output is 1000 scores, 1.8·10⁹ multiply-adds ("FLOPs" in the paper)
// per 224×224 image, and the 11.7 M parameters (11,689,512 exactly, as
// above).
func TestResNet18Table(t *testing.T) {
	var buf bytes.Buffer
	if _, err := ResNet18(1000).WriteTo(&buf); err != nil {
		t.Fatal(err)
	}
	m, err := modelio.Decode(buf.Bytes(), "resnet18.onnx")
	if err != nil {
		t.Fatal(err)
	}
	if m.Total.Params != 11_689_512 {
		t.Errorf("layer table: %d parameters, want 11,689,512", m.Total.Params)
	}
	// 1.8e9 in the paper, rounded: accept 1.75e9 to 1.85e9.
	if m.Total.MACs < 1.75e9 || m.Total.MACs > 1.85e9 {
		t.Errorf("layer table: %d multiply-adds, want about 1.8·10⁹", m.Total.MACs)
	}
	var lastAdd modelio.Layer
	for _, l := range m.Layers {
		if l.Op == "Add" {
			lastAdd = l
		}
	}
	if s := lastAdd.Shape.Ints(); len(s) != 4 || s[1] != 512 || s[2] != 7 || s[3] != 7 {
		t.Errorf("last residual sum %q has shape %s, want N×512×7×7", lastAdd.Name, lastAdd.Shape)
	}
	out := m.Outputs[0]
	if s := out.Shape; len(s) != 2 || s[1].Size != 1000 || out.Name != "logits" {
		t.Errorf("output %q has shape %s, want N×1000 logits", out.Name, s)
	}
	if m.Image == nil || m.Image.Layout != "nchw" || m.Image.Height != 224 || m.Image.Width != 224 || m.Image.Channels != 3 {
		t.Errorf("image input %+v, want 3×224×224 NCHW", m.Image)
	}
}

// TestStream checks the streamed encoding against the protobuf library:
// proto.Unmarshal reads it, re-marshalling deterministically gives the same
// bytes (so the fields are in canonical order and every length is right),
// the graph is the one described, and each initializer holds 4 bytes per
// value within its declared bounds.
func TestStream(t *testing.T) {
	n := Parts()
	var buf bytes.Buffer
	w, err := n.WriteTo(&buf)
	if err != nil {
		t.Fatal(err)
	}
	if w != int64(buf.Len()) {
		t.Errorf("WriteTo returned %d, wrote %d bytes", w, buf.Len())
	}
	got := &onnxpb.ModelProto{}
	if err := proto.Unmarshal(buf.Bytes(), got); err != nil {
		t.Fatalf("proto.Unmarshal: %v", err)
	}
	again, err := proto.MarshalOptions{Deterministic: true}.Marshal(got)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(again, buf.Bytes()) {
		t.Errorf("streamed encoding (%d bytes) differs from proto.Marshal of the same message (%d bytes)", buf.Len(), len(again))
	}
	if len(got.Graph.Initializer) != len(n.Graph.Initializer) {
		t.Fatalf("%d initializers read back, want %d", len(got.Graph.Initializer), len(n.Graph.Initializer))
	}
	var values int64
	for i, tp := range got.Graph.Initializer {
		f := n.fills[i]
		if int64(len(tp.RawData)) != 4*f.n {
			t.Errorf("%s: %d bytes of raw_data, want 4×%d", tp.Name, len(tp.RawData), f.n)
			continue
		}
		for j := 0; j < len(tp.RawData); j += 4 {
			v := math.Float32frombits(binary.LittleEndian.Uint32(tp.RawData[j:]))
			if !(v >= f.centre-f.bound && v <= f.centre+f.bound) {
				t.Fatalf("%s[%d] = %g, outside %g ± %g", tp.Name, j/4, v, f.centre, f.bound)
			}
		}
		values += f.n
		tp.RawData = nil
	}
	if values != n.Values {
		t.Errorf("%d values read back, Values says %d", values, n.Values)
	}
	if !proto.Equal(got, n.Model) {
		t.Errorf("model read back (without weight values) differs from the one described")
	}

	var second bytes.Buffer
	if _, err := Parts().WriteTo(&second); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(second.Bytes(), buf.Bytes()) {
		t.Errorf("two writes of the same network differ: weights are not reproducible")
	}
}

// TestRun runs the written networks in ONNX Runtime on a random batch of
// two: the files are runnable, and with He-scaled weights the logits are
// finite, differ between images and are of moderate size (common practice:
// the point of the scaling is that activations neither explode nor vanish).
func TestRun(t *testing.T) {
	p, err := infer.FindLibrary("")
	if err == nil {
		err = infer.Init(p)
	}
	if err != nil {
		t.Fatalf("ONNX Runtime is needed for this test and is not usable: %v", err)
	}
	dir := t.TempDir()
	for _, n := range []*Net{Parts(), ResNet18(1000)} {
		path := filepath.Join(dir, n.Graph.Name+".onnx")
		if err := n.WriteFile(path); err != nil {
			t.Fatal(err)
		}
		m, err := modelio.Open(path)
		if err != nil {
			t.Fatal(err)
		}
		s, err := infer.NewSession(m, infer.Options{})
		if err != nil {
			t.Fatal(err)
		}
		per := 3 * m.Image.Height * m.Image.Width
		x := make([]float32, 2*per)
		var v uint32 = 1
		for i := range x {
			v = v*1664525 + 1013904223 // Numerical Recipes LCG
			x[i] = float32(v>>8)/(1<<24)*2 - 1
		}
		r, err := s.Run(context.Background(), x, 2)
		s.Close()
		if err != nil {
			t.Fatal(err)
		}
		a, b := r.Scores(0), r.Scores(1)
		var sq, diff float64
		for i := range a {
			if math.IsNaN(float64(a[i])) || math.IsInf(float64(a[i]), 0) {
				t.Fatalf("%s: logit %d is %g", m.Name, i, a[i])
			}
			sq += float64(a[i]) * float64(a[i])
			diff += math.Abs(float64(a[i] - b[i]))
		}
		rms := math.Sqrt(sq / float64(len(a)))
		if rms < 1e-3 || rms > 1e3 {
			t.Errorf("%s: logits have root mean square %g; want between 1e-3 and 1e3", m.Name, rms)
		}
		if diff == 0 {
			t.Errorf("%s: two different images gave the same logits", m.Name)
		}
		t.Logf("%s: %d parameters, logits rms %.3g", m.Name, m.Total.Params, rms)
	}
}
