package refconv

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"

	"fovea/modelio/onnxpb"
)

// ErrUnsupported is returned by Eval for an operator or attribute this
// reference does not implement.
var ErrUnsupported = errors.New("refconv: not implemented here")

// FromProto converts a float32 TensorProto (raw_data or float_data, stored
// inside the file) into a Tensor.
func FromProto(p *onnxpb.TensorProto) (Tensor, error) {
	if p.GetDataType() != int32(onnxpb.TensorProto_FLOAT) {
		return Tensor{}, fmt.Errorf("%w: tensor %q has data type %d, only float32", ErrUnsupported, p.GetName(), p.GetDataType())
	}
	if p.GetDataLocation() == onnxpb.TensorProto_EXTERNAL {
		return Tensor{}, fmt.Errorf("%w: tensor %q keeps its data in an external file", ErrUnsupported, p.GetName())
	}
	n := 1
	for _, d := range p.GetDims() {
		if d < 0 || d > 1<<28 {
			return Tensor{}, fmt.Errorf("refconv: tensor %q has dimension %d", p.GetName(), d)
		}
		n *= int(d)
		if n > 1<<28 {
			return Tensor{}, fmt.Errorf("refconv: tensor %q is too large for a reference", p.GetName())
		}
	}
	t := Tensor{Shape: append([]int64{}, p.GetDims()...), Data: make([]float32, n)}
	switch raw := p.GetRawData(); {
	case raw != nil:
		if len(raw) != 4*n {
			return Tensor{}, fmt.Errorf("refconv: tensor %q: raw_data has %d bytes, dims need %d", p.GetName(), len(raw), 4*n)
		}
		for i := range t.Data {
			t.Data[i] = math.Float32frombits(binary.LittleEndian.Uint32(raw[4*i:]))
		}
	default:
		if len(p.GetFloatData()) != n {
			return Tensor{}, fmt.Errorf("refconv: tensor %q: float_data has %d values, dims need %d", p.GetName(), len(p.GetFloatData()), n)
		}
		copy(t.Data, p.GetFloatData())
	}
	return t, nil
}

func attrs(n *onnxpb.NodeProto) map[string]*onnxpb.AttributeProto {
	m := map[string]*onnxpb.AttributeProto{}
	for _, a := range n.GetAttribute() {
		m[a.GetName()] = a
	}
	return m
}

func window(a map[string]*onnxpb.AttributeProto, kernel []int64) Window {
	w := Window{Kernel: kernel}
	if v, ok := a["kernel_shape"]; ok {
		w.Kernel = v.GetInts()
	}
	if v, ok := a["pads"]; ok {
		w.Pads = v.GetInts()
	}
	if v, ok := a["strides"]; ok {
		w.Strides = v.GetInts()
	}
	if v, ok := a["dilations"]; ok {
		w.Dilations = v.GetInts()
	}
	if v, ok := a["auto_pad"]; ok {
		w.AutoPad = string(v.GetS())
	}
	if v, ok := a["ceil_mode"]; ok {
		w.CeilMode = v.GetI() != 0
	}
	return w
}

// Eval computes one node of a graph with this package's operators. opset is
// the model's ai.onnx opset (it decides Softmax's semantics and Flatten's
// default). Inputs are in the node's order; an absent optional input is a
// zero Tensor. It returns ErrUnsupported (wrapped) for anything else.
func Eval(n *onnxpb.NodeProto, opset int64, in []Tensor) ([]Tensor, error) {
	if n.GetDomain() != "" && n.GetDomain() != "ai.onnx" {
		return nil, fmt.Errorf("%w: domain %q", ErrUnsupported, n.GetDomain())
	}
	a := attrs(n)
	get := func(i int) Tensor {
		if i < len(in) {
			return in[i]
		}
		return Tensor{}
	}
	geti := func(name string, def int64) int64 {
		if v, ok := a[name]; ok {
			return v.GetI()
		}
		return def
	}
	getf := func(name string, def float32) float32 {
		if v, ok := a[name]; ok {
			return v.GetF()
		}
		return def
	}
	switch n.GetOpType() {
	case "Conv":
		x, w := get(0), get(1)
		return []Tensor{Conv(x, w, get(2), window(a, w.Shape[2:]), int(geti("group", 1)))}, nil
	case "MaxPool":
		if len(n.GetOutput()) > 1 && n.GetOutput()[1] != "" {
			return nil, fmt.Errorf("%w: MaxPool with Indices output", ErrUnsupported)
		}
		if geti("storage_order", 0) != 0 {
			return nil, fmt.Errorf("%w: MaxPool storage_order", ErrUnsupported)
		}
		return []Tensor{MaxPool(get(0), window(a, nil))}, nil
	case "AveragePool":
		return []Tensor{AveragePool(get(0), window(a, nil), geti("count_include_pad", 0) != 0)}, nil
	case "GlobalAveragePool":
		return []Tensor{GlobalAveragePool(get(0))}, nil
	case "Relu":
		return []Tensor{Relu(get(0))}, nil
	case "Gemm":
		return []Tensor{Gemm(get(0), get(1), get(2), getf("alpha", 1), getf("beta", 1), geti("transA", 0) != 0, geti("transB", 0) != 0)}, nil
	case "MatMul":
		return []Tensor{MatMul(get(0), get(1))}, nil
	case "Softmax":
		if opset >= 13 {
			return []Tensor{Softmax(get(0), int(geti("axis", -1)))}, nil
		}
		return []Tensor{SoftmaxCoerced(get(0), int(geti("axis", 1)))}, nil
	case "BatchNormalization":
		if geti("training_mode", 0) != 0 || len(n.GetOutput()) > 1 {
			return nil, fmt.Errorf("%w: BatchNormalization in training mode", ErrUnsupported)
		}
		return []Tensor{BatchNormalization(get(0), get(1), get(2), get(3), get(4), getf("epsilon", 1e-5))}, nil
	case "Flatten":
		return []Tensor{Flatten(get(0), int(geti("axis", 1)))}, nil
	}
	return nil, fmt.Errorf("%w: op %s", ErrUnsupported, n.GetOpType())
}
