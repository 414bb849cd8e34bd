package modelio

import (
	"errors"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"google.golang.org/protobuf/encoding/protowire"

	"fovea/modelio/onnxbuild"
	"fovea/modelio/onnxpb"
)

// heapBound is the most any hostile input may make Open allocate, beyond
// a few times its own size (no allocation in proportion to a size
// the file merely claims).
const heapBound = 32 << 20

type hostile struct {
	name  string
	file  func(t *testing.T, dir string) string // writes the model, returns its path
	want  error                                 // nil: must open
	msg   string                                // substring of the error (or of a Note when want is nil)
	check func(t *testing.T, m *Model)          // extra checks on success
	// perByte: heap allowed per byte of the file beyond heapBound (default
	// 8). Graphs of many tiny nodes legitimately need more per byte: the
	// layer table holds a row per node.
	perByte int64
}

func writeModel(t *testing.T, dir, name string, b *onnxbuild.Builder) string {
	t.Helper()
	p := filepath.Join(dir, name)
	if err := b.Write(p); err != nil {
		t.Fatal(err)
	}
	return p
}

func writeBytes(t *testing.T, dir, name string, data []byte) string {
	t.Helper()
	p := filepath.Join(dir, name)
	if err := os.WriteFile(p, data, 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// small is a builder with one conv layer on a 1×3×8×8 image.
func small(w onnxbuild.Weights) *onnxbuild.Builder {
	b := onnxbuild.New(13, w)
	x := b.Input("image", onnxbuild.Float, 1, 3, 8, 8)
	b.Output(b.Relu(b.Conv(x, 3, 4, 3, 1, 1)))
	return b
}

func chain(n int) *onnxbuild.Builder {
	b := onnxbuild.New(13, onnxbuild.Zeros)
	x := b.Input("image", onnxbuild.Float, 1, 3, 8, 8)
	x = b.Conv(x, 3, 4, 3, 1, 1)
	for range n {
		x = b.Relu(x)
	}
	b.Output(x)
	return b
}

func hostileCases() []hostile {
	tiny := func(t *testing.T) []byte { return tinyModel(t) }
	return []hostile{
		{name: "empty file", want: ErrNotONNX, msg: "file is empty",
			file: func(t *testing.T, d string) string { return writeBytes(t, d, "m.onnx", nil) }},
		{name: "missing file", want: ErrRead, msg: "cannot open: no such file",
			file: func(t *testing.T, d string) string { return filepath.Join(d, "m.onnx") }},
		{name: "folder", want: ErrRead, msg: "is a folder",
			file: func(t *testing.T, d string) string {
				p := filepath.Join(d, "m.onnx")
				os.Mkdir(p, 0o755)
				return p
			}},
		{name: "zip archive", want: ErrNotONNX, msg: "zip archive",
			file: func(t *testing.T, d string) string {
				return writeBytes(t, d, "m.onnx", []byte("PK\x03\x04\x14\x00\x00\x00\x08\x00junkjunkjunk"))
			}},
		{name: "text", want: ErrNotONNX, msg: "not an ONNX model",
			file: func(t *testing.T, d string) string {
				return writeBytes(t, d, "m.onnx", []byte("hello, this is not a model\n"))
			}},
		{name: "truncated in raw_data", want: ErrNotONNX, msg: "protobuf decoding failed",
			file: func(t *testing.T, d string) string {
				data := tiny(t)
				return writeBytes(t, d, "m.onnx", data[:len(data)-40])
			}},
		{name: "no graph", want: ErrNotONNX, msg: "no graph",
			file: func(t *testing.T, d string) string {
				return writeBytes(t, d, "m.onnx", mustMarshal(t, &onnxpb.ModelProto{IrVersion: 8}))
			}},
		{name: "empty graph", want: ErrInvalid, msg: "the graph has no nodes",
			file: func(t *testing.T, d string) string {
				return writeBytes(t, d, "m.onnx", mustMarshal(t, &onnxpb.ModelProto{IrVersion: 8, Graph: &onnxpb.GraphProto{}}))
			}},
		{name: "raw_data length mismatch", want: ErrInvalid, msg: `initializer "w": raw_data has 12 bytes, dims [2 2] of float32 need 16`,
			file: func(t *testing.T, d string) string {
				b := small(onnxbuild.Zeros)
				b.InitTensor(&onnxpb.TensorProto{Name: "w", DataType: dtFloat, Dims: []int64{2, 2}, RawData: make([]byte, 12)})
				return writeModel(t, d, "m.onnx", b)
			}},
		{name: "10^12 elements claimed", want: ErrInvalid, msg: "need 4000000000000",
			file: func(t *testing.T, d string) string {
				b := small(onnxbuild.Zeros)
				b.InitTensor(&onnxpb.TensorProto{Name: "w", DataType: dtFloat, Dims: []int64{1000000, 1000000}, RawData: make([]byte, 16)})
				return writeModel(t, d, "m.onnx", b)
			}},
		{name: "10^12 elements in typed field", want: ErrInvalid, msg: "holds 0 values",
			file: func(t *testing.T, d string) string {
				b := small(onnxbuild.Zeros)
				b.InitTensor(&onnxpb.TensorProto{Name: "w", DataType: dtFloat, Dims: []int64{1000000, 1000000}})
				return writeModel(t, d, "m.onnx", b)
			}},
		{name: "dims overflowing int64", want: ErrInvalid, msg: "claim more than",
			file: func(t *testing.T, d string) string {
				b := small(onnxbuild.Zeros)
				b.InitTensor(&onnxpb.TensorProto{Name: "w", DataType: dtFloat, Dims: []int64{1 << 40, 1 << 40, 1 << 40}})
				return writeModel(t, d, "m.onnx", b)
			}},
		{name: "negative initializer dim", want: ErrInvalid, msg: "dimension 1 is -3",
			file: func(t *testing.T, d string) string {
				b := small(onnxbuild.Zeros)
				b.InitTensor(&onnxpb.TensorProto{Name: "w", DataType: dtFloat, Dims: []int64{2, -3}})
				return writeModel(t, d, "m.onnx", b)
			}},
		{name: "negative input dim", want: nil, msg: `input "image" declares dimension 2 as -8; read as unknown`,
			file: func(t *testing.T, d string) string {
				b := small(onnxbuild.Zeros)
				b.Graph.Input[0].Type.GetTensorType().Shape.Dim[2].Value = &onnxpb.TensorShapeProto_Dimension_DimValue{DimValue: -8}
				return writeModel(t, d, "m.onnx", b)
			}},
		{name: "giant input dims", want: nil, msg: "",
			file: func(t *testing.T, d string) string {
				b := onnxbuild.New(13, onnxbuild.Zeros)
				x := b.Input("image", onnxbuild.Float, 1, 3, int64(1)<<50, int64(1)<<50)
				b.Output(b.Relu(b.Conv(x, 3, 4, 3, 1, 1)))
				return writeModel(t, d, "m.onnx", b)
			},
			check: func(t *testing.T, m *Model) {
				if err := m.CheckRunnable(); !errors.Is(err, ErrLimit) {
					t.Errorf("CheckRunnable: %v", err)
				}
			}},
		{name: "cycle", want: ErrInvalid, msg: "the graph has a cycle",
			file: func(t *testing.T, d string) string {
				b := onnxbuild.New(13, onnxbuild.Zeros)
				b.Input("image", onnxbuild.Float, 1, 3, 8, 8)
				b.Node("Add", []string{"image", "b"}, []string{"a"})
				b.Node("Relu", []string{"a"}, []string{"b"})
				b.Output("b")
				return writeModel(t, d, "m.onnx", b)
			}},
		{name: "self loop", want: ErrInvalid, msg: "cycle",
			file: func(t *testing.T, d string) string {
				b := onnxbuild.New(13, onnxbuild.Zeros)
				b.Input("image", onnxbuild.Float, 1, 3, 8, 8)
				b.Node("Add", []string{"image", "a"}, []string{"a"})
				b.Output("a")
				return writeModel(t, d, "m.onnx", b)
			}},
		{name: "input nobody produces", want: ErrInvalid, msg: `reads "ghost", which no node, input or initializer provides`,
			file: func(t *testing.T, d string) string {
				b := small(onnxbuild.Zeros)
				b.Node("Add", []string{"relu1", "ghost"}, []string{"out2"})
				return writeModel(t, d, "m.onnx", b)
			}},
		{name: "output nobody computes", want: ErrInvalid, msg: `graph output "phantom"`,
			file: func(t *testing.T, d string) string {
				b := small(onnxbuild.Zeros)
				b.Output("phantom")
				return writeModel(t, d, "m.onnx", b)
			}},
		{name: "two producers", want: ErrInvalid, msg: "produced by two nodes",
			file: func(t *testing.T, d string) string {
				b := small(onnxbuild.Zeros)
				b.Node("Relu", []string{"image"}, []string{"relu1"})
				return writeModel(t, d, "m.onnx", b)
			}},
		{name: "no convolution", want: nil,
			file: func(t *testing.T, d string) string {
				b := onnxbuild.New(13, onnxbuild.Zeros)
				x := b.Input("features", onnxbuild.Float, "N", 16)
				b.Output(b.Softmax(b.Gemm(x, 16, 4)))
				return writeModel(t, d, "m.onnx", b)
			},
			check: func(t *testing.T, m *Model) {
				if _, err := m.Kernels(""); !errors.Is(err, ErrNotFound) || !strings.Contains(err.Error(), "no input looks like an image") {
					t.Errorf("Kernels: %v", err)
				}
				if len(m.Layers) != 2 || m.Layers[0].WHD() != "1×1×4" {
					t.Errorf("layers %+v", m.Layers)
				}
			}},
		{name: "two image inputs", want: nil, msg: `2 inputs look like images; "right" is taken`,
			file: func(t *testing.T, d string) string {
				b := onnxbuild.New(13, onnxbuild.Zeros)
				l := b.Input("left", onnxbuild.Float, 1, 3, 8, 8)
				r := b.Input("right", onnxbuild.Float, 1, 3, 8, 8)
				b.Output(b.Add(b.Relu(l), b.Conv(r, 3, 3, 1, 1, 0)))
				return writeModel(t, d, "m.onnx", b)
			}},
		{name: "integer inputs", want: nil,
			file: func(t *testing.T, d string) string {
				b := onnxbuild.New(13, onnxbuild.Zeros)
				ids := b.Input("tokens", onnxbuild.Int64, "N", 12)
				b.Init("table", []int64{100, 8}, make([]float32, 800))
				b.Output(b.Op("Gather", []string{"table", ids}))
				return writeModel(t, d, "m.onnx", b)
			},
			check: func(t *testing.T, m *Model) {
				if m.Image != nil || len(m.Layers) != 1 || m.Layers[0].Shape.String() != "N×12×8" {
					t.Errorf("image %+v layers %+v", m.Image, m.Layers)
				}
			}},
		{name: "10,000-node chain", want: nil,
			file: func(t *testing.T, d string) string { return writeModel(t, d, "m.onnx", chain(10000)) },
			check: func(t *testing.T, m *Model) {
				if len(m.Layers) != 10001 || m.Layers[10000].RF != 3 {
					t.Errorf("%d layers", len(m.Layers))
				}
			}},
		{name: "100,000-node chain (a quadratic pass would not finish)", want: nil, perByte: 24,
			file: func(t *testing.T, d string) string { return writeModel(t, d, "m.onnx", chain(100000)) }},
		{name: "unicode, space and slash names", want: nil,
			file: func(t *testing.T, d string) string {
				b := onnxbuild.New(13, onnxbuild.Zeros)
				x := b.Input("входное изображение", onnxbuild.Float, 1, 3, 8, 8)
				b.Init("веса/conv 1 ☃", []int64{2, 3, 3, 3}, make([]float32, 54))
				b.Node("Conv", []string{x, "веса/conv 1 ☃"}, []string{"features/block 1/σ"})
				b.Output("features/block 1/σ")
				return writeModel(t, d, "m.onnx", b)
			},
			check: func(t *testing.T, m *Model) {
				k, err := m.Kernels("features/block 1/σ")
				if err != nil || k.M != 2 {
					t.Errorf("Kernels: %v", err)
				}
				if m.Layers[0].WHD() != "6×6×2" {
					t.Errorf("layer %+v", m.Layers[0])
				}
			}},
		{name: "old opset 7", want: nil,
			file: func(t *testing.T, d string) string {
				b := onnxbuild.New(7, onnxbuild.Zeros)
				x := b.Input("image", onnxbuild.Float, 1, 3, 8, 8)
				x = b.Conv(x, 3, 4, 3, 1, 1)
				x = b.Op("Unsqueeze", []string{b.Op("Squeeze", []string{b.GlobalAveragePool(x)}, onnxbuild.Ints("axes", 2, 3))}, onnxbuild.Ints("axes", 2))
				b.Output(x)
				return writeModel(t, d, "m.onnx", b)
			},
			check: func(t *testing.T, m *Model) {
				if got := m.Layers[len(m.Layers)-1].Shape.String(); got != "1×4×1" || m.Opsets[""] != 7 {
					t.Errorf("last shape %s opset %d", got, m.Opsets[""])
				}
			}},
		{name: "new opset 21", want: nil,
			file: func(t *testing.T, d string) string {
				b := onnxbuild.New(21, onnxbuild.Zeros)
				x := b.Input("image", onnxbuild.Float, 1, 3, 8, 8)
				x = b.GlobalAveragePool(b.Conv(x, 3, 4, 3, 1, 1))
				x = b.Op("Squeeze", []string{x, b.Ints64("axes", 2, 3)})
				b.Output(x)
				return writeModel(t, d, "m.onnx", b)
			},
			check: func(t *testing.T, m *Model) {
				if got := m.Layers[len(m.Layers)-1].Shape.String(); got != "1×4" {
					t.Errorf("last shape %s", got)
				}
			}},
		{name: "unknown protobuf fields", want: nil,
			file: func(t *testing.T, d string) string {
				data := tiny(t)
				data = protowire.AppendTag(data, 1234, protowire.BytesType)
				data = protowire.AppendBytes(data, []byte("from a future ONNX"))
				return writeBytes(t, d, "m.onnx", data)
			}},
		{name: "arithmetic near the limits", want: nil,
			file: func(t *testing.T, d string) string {
				b := onnxbuild.New(13, onnxbuild.Zeros)
				x := b.Input("image", onnxbuild.Float, 1, 1, int64(1)<<39, int64(1)<<39)
				b.Init("w", []int64{1, 1, 1, 1}, []float32{1})
				b.Node("ConvTranspose", []string{x, "w"}, []string{"up"}, onnxbuild.Ints("strides", 1<<30, 1<<30))
				b.Node("Conv", []string{x, "w"}, []string{"c1"}, onnxbuild.Ints("strides", 1<<30, 1<<30), onnxbuild.Ints("dilations", 1<<30, 1<<30))
				b.Node("Conv", []string{"c1", "w"}, []string{"c2"}, onnxbuild.Ints("strides", 1<<30, 1<<30))
				b.Node("MaxPool", []string{"c2"}, []string{"p"}, onnxbuild.Ints("kernel_shape", 1<<30, 1<<30), onnxbuild.Ints("dilations", 1<<30, 1<<30), onnxbuild.Ints("pads", 1<<30, 1<<30, 1<<30, 1<<30))
				b.Output("up")
				b.Output("p")
				return writeModel(t, d, "m.onnx", b)
			},
			check: func(t *testing.T, m *Model) {
				if l := m.Layers[0]; l.Op != "ConvTranspose" || l.ShapeSource != SourceUnknown {
					t.Errorf("ConvTranspose beyond 2^40: %+v", l)
				}
				if err := m.CheckRunnable(); !errors.Is(err, ErrLimit) {
					t.Errorf("CheckRunnable: %v", err)
				}
			}},
		{name: "bad conv attributes", want: nil,
			file: func(t *testing.T, d string) string {
				b := onnxbuild.New(13, onnxbuild.Zeros)
				x := b.Input("image", onnxbuild.Float, 1, 3, 8, 8)
				b.Init("w", []int64{4, 3, 3, 3}, make([]float32, 108))
				b.Node("Conv", []string{x, "w"}, []string{"c"}, onnxbuild.Ints("strides", 0, 0), onnxbuild.Int("group", 0))
				b.Node("MaxPool", []string{"c"}, []string{"p"}, onnxbuild.Ints("kernel_shape", 1<<62, 2), onnxbuild.Ints("pads", -1<<62, 0, 1<<62, 0))
				b.Output("p")
				return writeModel(t, d, "m.onnx", b)
			},
			check: func(t *testing.T, m *Model) {
				if l := m.Layers[0]; l.ShapeSource != SourceUnknown || !strings.Contains(l.Note, "strides value 0 is out of range") {
					t.Errorf("layer %+v", l)
				}
			}},
	}
}

func externalCases() []hostile {
	w := floatBytes(make([]float32, 4)...)
	return []hostile{
		{name: "external data absolute path", want: ErrExternal, msg: "is an absolute path",
			file: func(t *testing.T, d string) string { return externalModel(t, d, "/etc/passwd", 0, 16, nil) }},
		{name: "external data ..", want: ErrExternal, msg: "leaves the model's folder",
			file: func(t *testing.T, d string) string {
				sub := filepath.Join(d, "m")
				os.Mkdir(sub, 0o755)
				writeBytes(t, d, "weights.bin", w)
				return externalModel(t, sub, "../weights.bin", 0, 16, nil)
			}},
		{name: "external data symlink escaping", want: ErrExternal, msg: "leads outside the model's folder",
			file: func(t *testing.T, d string) string {
				sub := filepath.Join(d, "m")
				os.Mkdir(sub, 0o755)
				writeBytes(t, d, "outside.bin", w)
				if err := os.Symlink(filepath.Join(d, "outside.bin"), filepath.Join(sub, "link.bin")); err != nil {
					t.Fatal(err)
				}
				return externalModel(t, sub, "link.bin", 0, 16, nil)
			}},
		{name: "external data past end of file", want: ErrExternal, msg: "past the end",
			file: func(t *testing.T, d string) string { return externalModel(t, d, "weights.bin", 8, 16, w) }},
		{name: "external data offset past end", want: ErrExternal, msg: "offset 100 is past the end",
			file: func(t *testing.T, d string) string { return externalModel(t, d, "weights.bin", 100, 16, w) }},
		{name: "external data length disagrees", want: ErrExternal, msg: "external data has 8 bytes",
			file: func(t *testing.T, d string) string { return externalModel(t, d, "weights.bin", 0, 8, w) }},
		{name: "external data file missing", want: ErrExternal, msg: "no such file",
			file: func(t *testing.T, d string) string { return externalModel(t, d, "gone.bin", 0, 16, nil) }},
		{name: "external data in a subfolder", want: nil,
			file: func(t *testing.T, d string) string {
				os.Mkdir(filepath.Join(d, "data"), 0o755)
				writeBytes(t, filepath.Join(d, "data"), "w.bin", w)
				return externalModel(t, d, "data/w.bin", 0, 16, nil)
			}},
	}
}

// TestHostileModels: every case gives an error of the expected class whose
// message names the file and the problem, or opens when valid; never a
// panic; never more heap than heapBound plus a few times the file size.
func TestHostileModels(t *testing.T) {
	for _, c := range append(hostileCases(), externalCases()...) {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			path := c.file(t, dir)
			size := int64(0)
			if st, err := os.Stat(path); err == nil {
				size = st.Size()
			}
			var m *Model
			var err error
			alloc := allocDuring(func() { m, err = Open(path) })
			perByte := c.perByte
			if perByte == 0 {
				perByte = 8
			}
			t.Logf("Open allocated %d bytes for a %d-byte file", alloc, size)
			if limit := uint64(heapBound + perByte*size); alloc > limit {
				t.Errorf("Open allocated %d bytes, bound %d", alloc, limit)
			}
			if c.want == nil {
				if err != nil {
					t.Fatalf("want success, got %v", err)
				}
				if c.msg != "" && !strings.Contains(strings.Join(m.Notes, "\n"), c.msg) {
					t.Errorf("notes %q lack %q", m.Notes, c.msg)
				}
				if c.check != nil {
					c.check(t, m)
				}
				exercise(m)
				return
			}
			if !errors.Is(err, c.want) {
				t.Fatalf("error %v, want %v", err, c.want)
			}
			var me *Error
			if !errors.As(err, &me) {
				t.Fatalf("error of type %T", err)
			}
			if !strings.HasPrefix(err.Error(), "modelio: m.onnx: ") && !strings.HasPrefix(err.Error(), "modelio: ext.onnx: ") {
				t.Errorf("error does not name the file: %v", err)
			}
			if !strings.Contains(err.Error(), c.msg) {
				t.Errorf("error %q lacks %q", err, c.msg)
			}
		})
	}
}

// exercise calls everything a caller may call on an opened model.
func exercise(m *Model) {
	_, _ = m.Kernels("")
	for _, l := range m.Layers {
		if l.Op == "Conv" {
			_, _ = m.Kernels(l.Name)
		}
	}
	_ = m.CheckRunnable()
	var names []string
	for i, l := range m.ActivationLayers() {
		if i < 4 {
			names = append(names, l.Output)
		}
	}
	_, _ = m.WithOutputs(names)
	shapes := map[string][]int64{}
	for _, l := range m.Layers {
		if l.ShapeSource == SourceUnknown {
			shapes[l.Output] = []int64{1, 2, 3, 4}
		}
	}
	_ = m.Observe(shapes)
}

// TestTruncationsAndBitFlips cuts a valid model at every byte and flips
// random bits: each result opens or gives an *Error naming the file, and
// nothing panics (Go's test runner reports a panic as a failure).
func TestTruncationsAndBitFlips(t *testing.T) {
	data := tinyModel(t)
	check := func(what string, b []byte) {
		m, err := Decode(b, "cut.onnx")
		if err != nil {
			var me *Error
			if !errors.As(err, &me) || !strings.HasPrefix(err.Error(), "modelio: cut.onnx: ") {
				t.Fatalf("%s: %v", what, err)
			}
			return
		}
		exercise(m)
	}
	for n := range len(data) {
		check("cut at "+itoa(n), data[:n])
	}
	rng := rand.New(rand.NewPCG(3, 4))
	for i := range 3000 {
		b := append([]byte(nil), data...)
		for range 1 + i%3 {
			k := rng.IntN(len(b) * 8)
			b[k/8] ^= 1 << (k % 8)
		}
		check("bit flip "+itoa(i), b)
	}
	for i := range 500 {
		b := make([]byte, 1+rng.IntN(400))
		for k := range b {
			b[k] = byte(rng.Uint32())
		}
		check("random bytes "+itoa(i), b)
	}
}

// BenchmarkDecodeChain reports how the cost per node grows from a
// 1,000-node to a 10,000-node chain, measured in the same run: a ratio
// near 1 means linear work, 10 would mean quadratic.
func BenchmarkDecodeChain(b *testing.B) {
	small, _ := chain(1000).Bytes()
	large, _ := chain(10000).Bytes()
	per := func(data []byte, nodes int) float64 {
		start := time.Now()
		if _, err := Decode(data, "chain.onnx"); err != nil {
			b.Fatal(err)
		}
		return float64(time.Since(start)) / float64(nodes)
	}
	var ratio float64
	for b.Loop() {
		s := per(small, 1000)
		ratio += per(large, 10000) / s
	}
	b.ReportMetric(ratio/float64(b.N), "per-node-cost-10k/1k")
}
