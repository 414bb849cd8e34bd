package modelio

import (
	"os"
	"path/filepath"
	"runtime"
	"testing"
	"unsafe"

	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/runtime/protoiface"

	"fovea/modelio/onnxbuild"
	"fovea/modelio/onnxpb"
)

// TestAliasedDecodeMatchesProto compares the field-splitting decoder with
// proto.Unmarshal, the slow obviously-correct reference, on every model of
// the ONNX conformance data and on built models with unknown fields,
// repeated graph fields and Constant nodes.
func TestAliasedDecodeMatchesProto(t *testing.T) {
	needConformance(t)
	var files []string
	for _, suite := range []string{"node", "pytorch-converted", "pytorch-operator", "simple"} {
		m, _ := filepath.Glob(filepath.Join(conformanceDir, suite, "*", "model.onnx"))
		files = append(files, m...)
	}
	if len(files) < 500 {
		t.Fatalf("only %d conformance models found", len(files))
	}
	var blobs [][]byte
	for _, f := range files {
		data, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		blobs = append(blobs, data)
	}
	tiny := tinyModel(t)
	blobs = append(blobs, tiny)
	// Unknown fields at every level (field 99, varint and bytes), and the
	// graph split into two occurrences, which protobuf merges.
	unknown := protowire.AppendTag(nil, 99, protowire.VarintType)
	unknown = protowire.AppendVarint(unknown, 7)
	unknown = protowire.AppendTag(unknown, 98, protowire.BytesType)
	unknown = protowire.AppendBytes(unknown, []byte("future"))
	blobs = append(blobs, append(append([]byte{}, tiny...), unknown...))
	extraGraph := protowire.AppendTag(nil, fieldModelGraph, protowire.BytesType)
	initField := protowire.AppendTag(nil, fieldGraphInitializer, protowire.BytesType)
	tensor := mustMarshal(t, onnxbuild.FloatTensor("extra", []int64{2}, []float32{1, 2}))
	tensor = append(tensor, unknown...)
	initField = protowire.AppendBytes(initField, tensor)
	extraGraph = protowire.AppendBytes(extraGraph, initField)
	blobs = append(blobs, append(append([]byte{}, tiny...), extraGraph...))

	for i, data := range blobs {
		var want, got onnxpb.ModelProto
		errWant := proto.Unmarshal(data, &want)
		errGot := unmarshalModel(data, &got)
		if (errWant == nil) != (errGot == nil) {
			t.Fatalf("blob %d: proto.Unmarshal error %v, unmarshalModel error %v", i, errWant, errGot)
		}
		if errWant == nil && !proto.Equal(&want, &got) {
			t.Fatalf("blob %d (%d bytes): decoded models differ", i, len(data))
		}
	}
}

func mustMarshal(t testing.TB, m proto.Message) []byte {
	t.Helper()
	b, err := proto.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// tinyModel is a small valid classifier with weights.
func tinyModel(t testing.TB) []byte {
	b := onnxbuild.New(13, onnxbuild.Random)
	x := b.Input("image", onnxbuild.Float, "N", 3, 8, 8)
	x = b.Relu(b.Conv(x, 3, 4, 3, 1, 1))
	x = b.MaxPool(x, 2, 2, 0)
	b.Output(b.Softmax(b.Gemm(b.Flatten(x), 4*4*4, 3)))
	b.Meta("labels", "bolt\nnut\nwasher\n")
	data, err := b.Bytes()
	if err != nil {
		t.Fatal(err)
	}
	return data
}

func within(inner, outer []byte) bool {
	if len(inner) == 0 {
		return true
	}
	lo := uintptr(unsafe.Pointer(unsafe.SliceData(outer)))
	p := uintptr(unsafe.Pointer(unsafe.SliceData(inner)))
	return p >= lo && p+uintptr(len(inner)) <= lo+uintptr(len(outer))
}

// TestRawDataAliasesBuffer: initializer raw_data points into the decoded
// buffer instead of being a copy.
func TestRawDataAliasesBuffer(t *testing.T) {
	data := tinyModel(t)
	m, err := Decode(data, "tiny.onnx")
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	for _, init := range m.pb.GetGraph().GetInitializer() {
		if !within(init.GetRawData(), data) {
			t.Errorf("raw_data of %q is a copy", init.GetName())
		}
		n++
	}
	if n < 4 {
		t.Fatalf("only %d initializers", n)
	}
}

// TestProtobufAliasFlagCopies records why decode.go splits fields itself:
// google.golang.org/protobuf v1.36.12 copies bytes fields even with
// protoiface.UnmarshalAliasBuffer. If this test fails after an upgrade, the
// library aliases now and unmarshalModel can become one UnmarshalState call.
func TestProtobufAliasFlagCopies(t *testing.T) {
	data := tinyModel(t)
	var m onnxpb.ModelProto
	_, err := proto.UnmarshalOptions{}.UnmarshalState(protoiface.UnmarshalInput{
		Message: m.ProtoReflect(), Buf: data, Flags: protoiface.UnmarshalAliasBuffer})
	if err != nil {
		t.Fatal(err)
	}
	for _, init := range m.GetGraph().GetInitializer() {
		if len(init.GetRawData()) > 0 && within(init.GetRawData(), data) {
			t.Fatalf("protobuf now aliases raw_data of %q: simplify unmarshalModel", init.GetName())
		}
	}
}

// bigModel writes a model with about size bytes of float32 weights, one
// tensor holding 3/4 of them (as VGG-16's first fully connected layer
// holds 3/4 of its weights), and returns its path.
func bigModel(t testing.TB, size int) string {
	b := onnxbuild.New(13, onnxbuild.Zeros)
	floats := size / 4
	big := floats * 3 / 4
	side := 64
	x := b.Input("image", onnxbuild.Float, 1, 3, side, side)
	x = b.Conv(x, 3, 16, 3, 1, 1)
	inF := 16 * side * side
	outF := big / inF
	x = b.Gemm(b.Flatten(x), inF, outF)
	rest := (floats - big) / outF
	x = b.Gemm(x, outF, rest)
	b.Output(x)
	path := filepath.Join(t.TempDir(), "big.onnx")
	if err := b.Write(path); err != nil {
		t.Fatal(err)
	}
	return path
}

// allocDuring returns the bytes allocated on the heap while f runs
// (runtime.MemStats.TotalAlloc), an upper bound of the peak heap growth.
func allocDuring(f func()) uint64 {
	runtime.GC()
	var a, b runtime.MemStats
	runtime.ReadMemStats(&a)
	f()
	runtime.ReadMemStats(&b)
	return b.TotalAlloc - a.TotalAlloc
}

// TestOpenMemory: opening a model allocates at most 1.5× its file size in
// total (peak ≤ 1.5× file size; total allocation bounds the
// peak), while the plain read-then-unmarshal way needs about 2×, which
// shows the measurement can tell them apart.
func TestOpenMemory(t *testing.T) {
	path := bigModel(t, 48<<20)
	st, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	size := float64(st.Size())
	var m *Model
	got := allocDuring(func() {
		m, err = Open(path)
	})
	if err != nil {
		t.Fatal(err)
	}
	runtime.KeepAlive(m)
	naive := allocDuring(func() {
		data, _ := os.ReadFile(path)
		var pb onnxpb.ModelProto
		_ = proto.Unmarshal(data, &pb)
		runtime.KeepAlive(&pb)
	})
	t.Logf("file %.1f MB: Open allocated %.2f× the file size, ReadFile+proto.Unmarshal %.2f×", size/1e6, float64(got)/size, float64(naive)/size)
	if float64(got) > 1.5*size {
		t.Errorf("Open allocated %d bytes for a %d-byte file (%.2f×), limit 1.5×", got, int64(size), float64(got)/size)
	}
	if float64(naive) < 1.8*size {
		t.Errorf("the naive decoding allocated only %.2f×; the measurement cannot tell the two apart", float64(naive)/size)
	}
}

// BenchmarkOpen reports Open's allocation as a ratio of the file size.
func BenchmarkOpen(b *testing.B) {
	path := bigModel(b, 32<<20)
	st, _ := os.Stat(path)
	b.ReportAllocs()
	var total uint64
	for b.Loop() {
		total += allocDuring(func() {
			if _, err := Open(path); err != nil {
				b.Fatal(err)
			}
		})
	}
	b.ReportMetric(float64(total)/float64(b.N)/float64(st.Size()), "alloc/filesize")
}
