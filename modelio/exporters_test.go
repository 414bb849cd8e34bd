package modelio

// Graph shapes other exporters write, checked at the modelio level (the
// command-line pipeline over the same shapes is in app/cli_exporters_test.go).

import (
	"encoding/binary"
	"errors"
	"testing"

	"fovea/modelio/onnxbuild"
	"fovea/modelio/onnxpb"
)

// halfTensor stores values that float16 holds exactly, as float16 raw data.
// Bits by hand from IEEE 754-2008 binary16 (from memory): 0.5 = 0x3800,
// -0.25 = 0xB400, 1 = 0x3C00, 0.125 = 0x3000, -2 = 0xC000.
func halfTensor(name string, dims []int64, bits []uint16) *onnxpb.TensorProto {
	raw := make([]byte, 2*len(bits))
	for i, b := range bits {
		binary.LittleEndian.PutUint16(raw[2*i:], b)
	}
	return &onnxpb.TensorProto{Name: name, Dims: dims, DataType: onnxbuild.Float16, RawData: raw}
}

// Models compressed to float16 keep their weights as float16 initializers
// and cast each to float before the Conv: the kernels are found through the
// Cast (to float) and read with their float16 values, and a Cast to a
// narrower type is not followed (its result would be rounded).
func TestKernelsThroughCast(t *testing.T) {
	for _, c := range []struct {
		name string
		to   int64
		ok   bool
	}{
		{"cast to float", 1, true},
		{"cast to double", 11, true},
		{"cast to float16", 10, false},
	} {
		t.Run(c.name, func(t *testing.T) {
			b := onnxbuild.New(13, onnxbuild.Random)
			x := b.Input("image", onnxbuild.Float, "N", 3, 8, 8)
			w := b.InitTensor(halfTensor("w_half", []int64{1, 3, 1, 1}, []uint16{0x3800, 0xB400, 0x3C00}))
			bias := b.InitTensor(halfTensor("b_half", []int64{1}, []uint16{0x3000}))
			cw := b.Op("Cast", []string{w}, onnxbuild.Int("to", c.to))
			cb := b.Op("Cast", []string{bias}, onnxbuild.Int("to", c.to))
			if c.to != 1 {
				// back to float for the Conv, as a converter chain may write it
				cw = b.Op("Cast", []string{cw}, onnxbuild.Int("to", 1))
				cb = b.Op("Cast", []string{cb}, onnxbuild.Int("to", 1))
			}
			y := b.Op("Conv", []string{x, cw, cb}, onnxbuild.Ints("kernel_shape", 1, 1))
			b.Output(y)
			m := build(t, b)
			k, err := m.Kernels("")
			if !c.ok {
				if err == nil || !errors.Is(err, ErrUnsupported) {
					t.Fatalf("Kernels through a Cast to float16: %v, want an unsupported error", err)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			want := []float32{0.5, -0.25, 1}
			for i, v := range want {
				if k.W[i] != v {
					t.Errorf("W[%d] = %g, want %g", i, k.W[i], v)
				}
			}
			if len(k.Bias) != 1 || k.Bias[0] != 0.125 {
				t.Errorf("bias %v, want [0.125]", k.Bias)
			}
			v, dims, err := m.Weights(cw)
			if err != nil || len(v) != 3 || v[1] != -0.25 || len(dims) != 4 {
				t.Errorf("Weights(%q) = %v %v %v", cw, v, dims, err)
			}
		})
	}
}
