package modelio

import (
	"encoding/binary"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"fovea/modelio/onnxpb"
)

// elemInfo describes an ONNX element type (TensorProto.DataType).
type elemInfo struct {
	name  string
	bits  int  // bits per element in raw_data; 0 = variable (string)
	float bool // a floating-point type
}

var elemTypes = map[int32]elemInfo{
	1:  {"float32", 32, true},
	2:  {"uint8", 8, false},
	3:  {"int8", 8, false},
	4:  {"uint16", 16, false},
	5:  {"int16", 16, false},
	6:  {"int32", 32, false},
	7:  {"int64", 64, false},
	8:  {"string", 0, false},
	9:  {"bool", 8, false},
	10: {"float16", 16, true},
	11: {"float64", 64, true},
	12: {"uint32", 32, false},
	13: {"uint64", 64, false},
	14: {"complex64", 64, false},
	15: {"complex128", 128, false},
	16: {"bfloat16", 16, true},
	17: {"float8e4m3fn", 8, true},
	18: {"float8e4m3fnuz", 8, true},
	19: {"float8e5m2", 8, true},
	20: {"float8e5m2fnuz", 8, true},
	21: {"uint4", 4, false},
	22: {"int4", 4, false},
	23: {"float4e2m1", 4, true},
}

const (
	dtFloat    = 1
	dtUint8    = 2
	dtInt8     = 3
	dtUint16   = 4
	dtInt16    = 5
	dtInt32    = 6
	dtInt64    = 7
	dtBool     = 9
	dtFloat16  = 10
	dtDouble   = 11
	dtUint32   = 12
	dtUint64   = 13
	dtBfloat16 = 16
)

// ElemTypeName returns the ONNX element type's name ("float32", "int64", ...)
// or "type N" for numbers this package does not know.
func ElemTypeName(t int32) string {
	if e, ok := elemTypes[t]; ok {
		return e.name
	}
	if t == 0 {
		return "undefined"
	}
	return "type " + strconv.Itoa(int(t))
}

// MaxTensorElements bounds the element count of any tensor this package
// converts to float32 (4 GiB of float32).
const MaxTensorElements = 1 << 30

// elemCount multiplies dims, refusing negative dims and products above limit
// (checked at every step, so it cannot overflow).
func elemCount(dims []int64, limit int64) (int64, error) {
	n := int64(1)
	for i, d := range dims {
		if d < 0 {
			return 0, fmt.Errorf("dimension %d is %d", i, d)
		}
		if d == 0 {
			return 0, nil
		}
	}
	for _, d := range dims {
		if n > limit/d {
			return 0, fmt.Errorf("dims %s claim more than %d elements", dimsString(dims), limit)
		}
		n *= d
	}
	return n, nil
}

func dimsString(dims []int64) string {
	if len(dims) == 0 {
		return "[] (scalar)"
	}
	parts := make([]string, len(dims))
	for i, d := range dims {
		parts[i] = strconv.FormatInt(d, 10)
	}
	return "[" + strings.Join(parts, " ") + "]"
}

// rawBytes is the byte count of n elements of type dt in raw_data.
func rawBytes(dt int32, n int64) (int64, bool) {
	e, ok := elemTypes[dt]
	if !ok || e.bits == 0 {
		return 0, false
	}
	return (n*int64(e.bits) + 7) / 8, true
}

// typedLen is the number of values in the typed field that holds type dt
// (onnx.proto: which field stores which type), and whether dt has one.
func typedLen(t *onnxpb.TensorProto) (int, bool) {
	switch t.GetDataType() {
	case dtFloat, 14:
		return len(t.GetFloatData()), true
	case dtInt32, dtInt16, dtInt8, dtUint16, dtUint8, dtBool, dtFloat16, dtBfloat16, 17, 18, 19, 20, 21, 22, 23:
		return len(t.GetInt32Data()), true
	case dtInt64:
		return len(t.GetInt64Data()), true
	case dtDouble, 15:
		return len(t.GetDoubleData()), true
	case dtUint32, dtUint64:
		return len(t.GetUint64Data()), true
	case 8:
		return len(t.GetStringData()), true
	}
	return 0, false
}

// typedWant is the number of typed-field values n elements need (complex
// numbers take two, 4-bit types are packed two per int32 value).
func typedWant(dt int32, n int64) int64 {
	switch dt {
	case 14, 15:
		return 2 * n
	case 21, 22, 23:
		return (n + 1) / 2
	}
	return n
}

// extRef is a checked external-data reference.
type extRef struct {
	path           string // absolute path inside the model folder
	offset, length int64
}

// checkTensor verifies that the data of t is present in the amount its dims
// claim, without reading external data. It returns the element count.
func (m *Model) checkTensor(what string, t *onnxpb.TensorProto) (int64, error) {
	n, err := elemCount(t.GetDims(), math.MaxInt64/256) // so that n × 128 bits cannot overflow
	if err != nil {
		return 0, m.errf(KindInvalid, "%s: %v", what, err)
	}
	if t.GetSegment() != nil {
		return 0, m.errf(KindUnsupported, "%s: segmented tensors are not supported", what)
	}
	dt := t.GetDataType()
	if _, ok := elemTypes[dt]; !ok {
		return 0, m.errf(KindUnsupported, "%s: element type %d is not known", what, dt)
	}
	if t.GetDataLocation() == onnxpb.TensorProto_EXTERNAL {
		ref, err := m.external(what, t)
		if err != nil {
			return 0, err
		}
		want, ok := rawBytes(dt, n)
		if !ok {
			return 0, m.errf(KindUnsupported, "%s: %s tensors in external data are not supported", what, ElemTypeName(dt))
		}
		if ref.length != want {
			return 0, m.errf(KindExternal, "%s: external data has %d bytes, dims %s of %s need %d", what, ref.length, dimsString(t.GetDims()), ElemTypeName(dt), want)
		}
		return n, nil
	}
	if raw := t.GetRawData(); len(raw) > 0 {
		want, ok := rawBytes(dt, n)
		if !ok {
			return 0, m.errf(KindInvalid, "%s: %s tensors cannot use raw_data", what, ElemTypeName(dt))
		}
		if int64(len(raw)) != want {
			return 0, m.errf(KindInvalid, "%s: raw_data has %d bytes, dims %s of %s need %d", what, len(raw), dimsString(t.GetDims()), ElemTypeName(dt), want)
		}
		return n, nil
	}
	got, _ := typedLen(t)
	if want := typedWant(dt, n); int64(got) != want {
		return 0, m.errf(KindInvalid, "%s: holds %d values, dims %s of %s need %d", what, got, dimsString(t.GetDims()), ElemTypeName(dt), want)
	}
	return n, nil
}

// external resolves and checks the external-data reference of t: the
// location must be a relative path inside the model's folder (after
// following symlinks), name a regular file, and offset+length must lie
// within it.
func (m *Model) external(what string, t *onnxpb.TensorProto) (*extRef, error) {
	var loc string
	var offset, length int64 = 0, -1
	for _, kv := range t.GetExternalData() {
		switch kv.GetKey() {
		case "location":
			loc = kv.GetValue()
		case "offset", "length":
			v, err := strconv.ParseInt(kv.GetValue(), 10, 64)
			if err != nil || v < 0 {
				return nil, m.errf(KindExternal, "%s: external data %s %q is not a non-negative integer", what, kv.GetKey(), kv.GetValue())
			}
			if kv.GetKey() == "offset" {
				offset = v
			} else {
				length = v
			}
		}
	}
	if loc == "" {
		return nil, m.errf(KindExternal, "%s: external data without a location", what)
	}
	if m.dir == "" {
		return nil, m.errf(KindExternal, "%s: weights are in external file %q, but the model was not opened from a folder", what, loc)
	}
	if strings.ContainsRune(loc, 0) || filepath.IsAbs(loc) || strings.HasPrefix(loc, "/") || strings.HasPrefix(loc, `\`) || filepath.VolumeName(loc) != "" {
		return nil, m.errf(KindExternal, "%s: external data location %q is an absolute path; only files inside the model's folder are read", what, loc)
	}
	clean := filepath.Clean(filepath.FromSlash(loc))
	for _, part := range strings.Split(filepath.ToSlash(clean), "/") {
		if part == ".." {
			return nil, m.errf(KindExternal, "%s: external data location %q leaves the model's folder", what, loc)
		}
	}
	realDir, err := filepath.EvalSymlinks(m.dir)
	if err != nil {
		return nil, wrapErr(m.file, KindExternal, unwrapPath(err), "%s: cannot resolve the model's folder", what)
	}
	full, err := filepath.EvalSymlinks(filepath.Join(m.dir, clean))
	if err != nil {
		return nil, wrapErr(m.file, KindExternal, unwrapPath(err), "%s: external data file %q", what, loc)
	}
	rel, err := filepath.Rel(realDir, full)
	if err != nil || rel == ".." || strings.HasPrefix(rel, ".."+string(filepath.Separator)) || filepath.IsAbs(rel) {
		return nil, m.errf(KindExternal, "%s: external data file %q leads outside the model's folder", what, loc)
	}
	st, err := os.Stat(full)
	if err != nil {
		return nil, wrapErr(m.file, KindExternal, unwrapPath(err), "%s: external data file %q", what, loc)
	}
	if !st.Mode().IsRegular() {
		return nil, m.errf(KindExternal, "%s: external data %q is not a regular file", what, loc)
	}
	size := st.Size()
	if offset > size {
		return nil, m.errf(KindExternal, "%s: external data offset %d is past the end of %q (%d bytes)", what, offset, loc, size)
	}
	if length < 0 {
		length = size - offset
	}
	if length > size-offset {
		return nil, m.errf(KindExternal, "%s: external data range %d+%d is past the end of %q (%d bytes)", what, offset, length, loc, size)
	}
	return &extRef{path: full, offset: offset, length: length}, nil
}

// tensorBytes returns the raw little-endian bytes of t (raw_data or external
// data), or nil when t uses the typed fields.
func (m *Model) tensorBytes(what string, t *onnxpb.TensorProto, want int64) ([]byte, error) {
	if t.GetDataLocation() == onnxpb.TensorProto_EXTERNAL {
		ref, err := m.external(what, t)
		if err != nil {
			return nil, err
		}
		if ref.length != want {
			return nil, m.errf(KindExternal, "%s: external data has %d bytes, need %d", what, ref.length, want)
		}
		f, err := os.Open(ref.path)
		if err != nil {
			return nil, wrapErr(m.file, KindExternal, unwrapPath(err), "%s: external data", what)
		}
		defer f.Close()
		b := make([]byte, want)
		if _, err := f.ReadAt(b, ref.offset); err != nil {
			return nil, wrapErr(m.file, KindExternal, err, "%s: reading %d bytes at %d of external data", what, want, ref.offset)
		}
		return b, nil
	}
	if raw := t.GetRawData(); len(raw) > 0 {
		if int64(len(raw)) != want {
			return nil, m.errf(KindInvalid, "%s: raw_data has %d bytes, need %d", what, len(raw), want)
		}
		return raw, nil
	}
	return nil, nil
}

// floats converts tensor t to float32. what names it in errors. Types that
// have no sensible float value (string, complex, bool is accepted as 0/1)
// give KindUnsupported.
func (m *Model) floats(what string, t *onnxpb.TensorProto) ([]float32, error) {
	n, err := m.checkTensor(what, t)
	if err != nil {
		return nil, err
	}
	if n > MaxTensorElements {
		return nil, m.errf(KindLimit, "%s: %d elements exceed the limit of %d", what, n, MaxTensorElements)
	}
	dt := t.GetDataType()
	switch dt {
	case dtFloat, dtFloat16, dtBfloat16, dtDouble, dtInt8, dtInt16, dtInt32, dtInt64, dtUint8, dtUint16, dtUint32, dtUint64, dtBool:
	default:
		return nil, m.errf(KindUnsupported, "%s: %s values cannot be shown as float32", what, ElemTypeName(dt))
	}
	want, _ := rawBytes(dt, n)
	raw, err := m.tensorBytes(what, t, want)
	if err != nil {
		return nil, err
	}
	out := make([]float32, n)
	if raw != nil {
		decodeRaw(dt, raw, out)
		return out, nil
	}
	switch dt {
	case dtFloat:
		copy(out, t.GetFloatData())
	case dtDouble:
		for i, v := range t.GetDoubleData() {
			out[i] = float32(v)
		}
	case dtInt64:
		for i, v := range t.GetInt64Data() {
			out[i] = float32(v)
		}
	case dtUint32, dtUint64:
		for i, v := range t.GetUint64Data() {
			out[i] = float32(v)
		}
	case dtFloat16:
		for i, v := range t.GetInt32Data() {
			out[i] = halfToFloat(uint16(v))
		}
	case dtBfloat16:
		for i, v := range t.GetInt32Data() {
			out[i] = math.Float32frombits(uint32(uint16(v)) << 16)
		}
	default: // the integer types stored in int32_data
		for i, v := range t.GetInt32Data() {
			out[i] = float32(v)
		}
	}
	return out, nil
}

// decodeRaw converts little-endian raw_data (onnx.proto: "stored in
// little-endian order") of type dt into out.
func decodeRaw(dt int32, raw []byte, out []float32) {
	le := binary.LittleEndian
	for i := range out {
		switch dt {
		case dtFloat:
			out[i] = math.Float32frombits(le.Uint32(raw[4*i:]))
		case dtDouble:
			out[i] = float32(math.Float64frombits(le.Uint64(raw[8*i:])))
		case dtFloat16:
			out[i] = halfToFloat(le.Uint16(raw[2*i:]))
		case dtBfloat16:
			out[i] = math.Float32frombits(uint32(le.Uint16(raw[2*i:])) << 16)
		case dtInt8:
			out[i] = float32(int8(raw[i]))
		case dtUint8, dtBool:
			out[i] = float32(raw[i])
		case dtInt16:
			out[i] = float32(int16(le.Uint16(raw[2*i:])))
		case dtUint16:
			out[i] = float32(le.Uint16(raw[2*i:]))
		case dtInt32:
			out[i] = float32(int32(le.Uint32(raw[4*i:])))
		case dtUint32:
			out[i] = float32(le.Uint32(raw[4*i:]))
		case dtInt64:
			out[i] = float32(int64(le.Uint64(raw[8*i:])))
		case dtUint64:
			out[i] = float32(le.Uint64(raw[8*i:]))
		}
	}
}

// halfToFloat converts IEEE 754 binary16 bits to float32.
func halfToFloat(h uint16) float32 {
	sign := uint32(h>>15) << 31
	exp := uint32(h>>10) & 0x1f
	frac := uint32(h) & 0x3ff
	switch {
	case exp == 0 && frac == 0:
		return math.Float32frombits(sign)
	case exp == 0: // subnormal: frac·2^-24
		v := float32(frac) / (1 << 24)
		if sign != 0 {
			v = -v
		}
		return v
	case exp == 0x1f:
		return math.Float32frombits(sign | 0x7f800000 | frac<<13)
	}
	return math.Float32frombits(sign | (exp+112)<<23 | frac<<13)
}

// smallInts reads a small integer tensor (shapes, axes, pads) as int64s.
// It returns ok=false when t is not an integer tensor of at most limit
// elements with its data present.
func (m *Model) smallInts(t *onnxpb.TensorProto, limit int64) ([]int64, bool) {
	n, err := m.checkTensor("", t)
	if err != nil || n > limit {
		return nil, false
	}
	dt := t.GetDataType()
	if t.GetDataLocation() == onnxpb.TensorProto_EXTERNAL {
		return nil, false
	}
	out := make([]int64, n)
	raw := t.GetRawData()
	le := binary.LittleEndian
	switch dt {
	case dtInt64:
		if len(raw) > 0 {
			for i := range out {
				out[i] = int64(le.Uint64(raw[8*i:]))
			}
		} else {
			copy(out, t.GetInt64Data())
		}
	case dtInt32:
		if len(raw) > 0 {
			for i := range out {
				out[i] = int64(int32(le.Uint32(raw[4*i:])))
			}
		} else {
			for i, v := range t.GetInt32Data() {
				out[i] = int64(v)
			}
		}
	default:
		return nil, false
	}
	return out, true
}

// smallFloats reads a small float tensor (Resize scales) as float64s.
func (m *Model) smallFloats(t *onnxpb.TensorProto, limit int64) ([]float64, bool) {
	n, err := m.checkTensor("", t)
	if err != nil || n > limit || t.GetDataLocation() == onnxpb.TensorProto_EXTERNAL {
		return nil, false
	}
	switch t.GetDataType() {
	case dtFloat, dtDouble, dtFloat16, dtBfloat16:
	default:
		return nil, false
	}
	f, err := m.floats("", t)
	if err != nil {
		return nil, false
	}
	out := make([]float64, len(f))
	for i, v := range f {
		out[i] = float64(v)
	}
	return out, true
}
