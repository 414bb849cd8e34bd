package modelio

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime/debug"

	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	"fovea/modelio/onnxpb"
)

// MaxFileSize is the largest model file Open reads: protobuf messages are
// limited to 2 GiB, and larger ONNX models keep their weights in external
// data files.
const MaxFileSize = 2<<30 - 1

// Open reads the ONNX model at path and describes it. External tensor data
// is read only from files inside the model's folder, and only when weights
// are asked for; Open checks that every external reference stays inside the
// folder and within its file.
func Open(path string) (*Model, error) {
	name := filepath.Base(path)
	f, err := os.Open(path)
	if err != nil {
		return nil, wrapErr(name, KindRead, unwrapPath(err), "cannot open")
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return nil, wrapErr(name, KindRead, unwrapPath(err), "cannot stat")
	}
	if st.IsDir() {
		return nil, newErr(name, KindRead, "is a folder, not a model file")
	}
	if !st.Mode().IsRegular() {
		return nil, newErr(name, KindRead, "is not a regular file")
	}
	size := st.Size()
	if size > MaxFileSize {
		return nil, newErr(name, KindLimit, "file has %d bytes; models above 2 GiB must keep their weights in external data files", size)
	}
	buf := make([]byte, size)
	if _, err := io.ReadFull(f, buf); err != nil {
		return nil, wrapErr(name, KindRead, err, "reading %d bytes", size)
	}
	dir, err := filepath.Abs(filepath.Dir(path))
	if err != nil {
		return nil, wrapErr(name, KindRead, err, "cannot resolve folder")
	}
	m, err := decode(buf, name, dir)
	if err != nil {
		return nil, err
	}
	m.Path = path
	return m, nil
}

func unwrapPath(err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}

// Decode describes the ONNX model in data; name is used in messages and as
// Model.Name. The model keeps references into data (the weights are not
// copied), so the caller must not modify data afterwards. A model decoded
// from memory has no folder: weights in external data cannot be read.
func Decode(data []byte, name string) (*Model, error) {
	return decode(data, name, "")
}

func decode(data []byte, name, dir string) (m *Model, err error) {
	// Last resort only: every condition of the input is checked explicitly
	// below; this turns a bug of ours into an error instead of a crash of the
	// program that opened a user's file.
	defer func() {
		if r := recover(); r != nil {
			m = nil
			err = &Error{File: name, Kind: KindInvalid, Msg: fmt.Sprintf("internal error while reading the model (please report): %v", r),
				Err: fmt.Errorf("%s", debug.Stack())}
		}
	}()
	if len(data) > MaxFileSize {
		return nil, newErr(name, KindLimit, "model has %d bytes; models above 2 GiB must keep their weights in external data files", len(data))
	}
	if len(data) == 0 {
		return nil, newErr(name, KindNotONNX, "file is empty")
	}
	pb := &onnxpb.ModelProto{}
	if err := unmarshalModel(data, pb); err != nil {
		return nil, notONNX(name, data, err)
	}
	if pb.Graph == nil {
		return nil, notONNXMsg(name, data, "no graph in the file")
	}
	if pb.IrVersion <= 0 {
		return nil, notONNXMsg(name, data, "no IR version in the file")
	}
	m = &Model{Name: name, file: name, dir: dir, buf: data, pb: pb, flags: &flagMemo{byNode: map[string]nodeFlags{}}}
	if err := m.build(); err != nil {
		return nil, err
	}
	return m, nil
}

func notONNX(name string, data []byte, err error) error {
	return wrapErr(name, KindNotONNX, err, "not an ONNX model%s: protobuf decoding failed", sniff(data))
}

func notONNXMsg(name string, data []byte, msg string) error {
	return newErr(name, KindNotONNX, "not an ONNX model%s: %s", sniff(data), msg)
}

// sniff names a few file kinds people open by mistake.
func sniff(data []byte) string {
	switch {
	case bytes.HasPrefix(data, []byte("PK\x03\x04")):
		return " (it is a zip archive, perhaps a PyTorch checkpoint: export it with torch.onnx.export)"
	case bytes.HasPrefix(data, []byte("\x89HDF")):
		return " (it is an HDF5 file, perhaps Keras weights)"
	case bytes.HasPrefix(data, []byte("\x89PNG")), bytes.HasPrefix(data, []byte("\xff\xd8\xff")):
		return " (it is an image)"
	case bytes.HasPrefix(data, []byte("ir_version")):
		return " (it is the text format; convert it to the binary format)"
	}
	return ""
}

// Field numbers from onnx.proto (ModelProto.graph, GraphProto.initializer,
// TensorProto.raw_data).
const (
	fieldModelGraph       = 7
	fieldGraphInitializer = 5
	fieldTensorRawData    = 9
)

var mergeOpts = proto.UnmarshalOptions{Merge: true}

// unmarshalModel decodes data into m like proto.Unmarshal, except that the
// raw_data of the main graph's initializers aliases data instead of being
// copied. Protobuf's wire format defines a message as the concatenation of
// its fields, and parsing a concatenation merges (last value wins for
// singular fields, repeated fields append), so decoding runs of fields one
// after another with Merge gives the same message as decoding the whole
// buffer; decode_test.go checks that against proto.Unmarshal. protowire only
// finds where each field ends; every value is decoded by the generated code.
func unmarshalModel(data []byte, m *onnxpb.ModelProto) error {
	return splitFields(data, m, fieldModelGraph, func(val []byte) error {
		if m.Graph == nil {
			m.Graph = &onnxpb.GraphProto{}
		}
		return unmarshalGraph(val, m.Graph)
	})
}

func unmarshalGraph(data []byte, g *onnxpb.GraphProto) error {
	return splitFields(data, g, fieldGraphInitializer, func(val []byte) error {
		t := &onnxpb.TensorProto{}
		g.Initializer = append(g.Initializer, t)
		return unmarshalTensor(val, t)
	})
}

func unmarshalTensor(data []byte, t *onnxpb.TensorProto) error {
	return splitFields(data, t, fieldTensorRawData, func(val []byte) error {
		t.RawData = val[:len(val):len(val)]
		return nil
	})
}

// splitFields walks the top-level fields of the encoded message data. Each
// length-delimited field numbered special is passed to handle; runs of the
// other fields are decoded into msg by one proto.Unmarshal call each.
func splitFields(data []byte, msg proto.Message, special protowire.Number, handle func([]byte) error) error {
	runStart := 0
	pos := 0
	for pos < len(data) {
		num, typ, n := protowire.ConsumeTag(data[pos:])
		if n < 0 {
			return protowire.ParseError(n)
		}
		m := protowire.ConsumeFieldValue(num, typ, data[pos+n:])
		if m < 0 {
			return protowire.ParseError(m)
		}
		if num == special && typ == protowire.BytesType {
			val, k := protowire.ConsumeBytes(data[pos+n:])
			if k < 0 {
				return protowire.ParseError(k)
			}
			if pos > runStart {
				if err := mergeOpts.Unmarshal(data[runStart:pos], msg); err != nil {
					return err
				}
			}
			if err := handle(val); err != nil {
				return err
			}
			runStart = pos + n + m
		}
		pos += n + m
	}
	if len(data) > runStart {
		return mergeOpts.Unmarshal(data[runStart:], msg)
	}
	return nil
}

// Bytes returns the bytes the model was decoded from (the file's content for
// Open). The runtime can hand them to a session when no extra outputs are
// needed. They must not be modified.
func (m *Model) Bytes() []byte { return m.buf }

// Dir returns the absolute folder of the model file, "" for Decode.
func (m *Model) Dir() string { return m.dir }

// HasExternalData reports whether some initializer keeps its data in an
// external file (which a runtime must then find beside the model).
func (m *Model) HasExternalData() bool {
	for _, t := range m.pb.GetGraph().GetInitializer() {
		if t.GetDataLocation() == onnxpb.TensorProto_EXTERNAL {
			return true
		}
	}
	return false
}

func (m *Model) errf(k Kind, format string, args ...any) *Error {
	return newErr(m.file, k, format, args...)
}

func quote(s string) string { return fmt.Sprintf("%q", s) }
