package infer

import (
	"context"
	"fmt"
	"slices"

	ort "github.com/yalue/onnxruntime_go"

	"fovea/modelio"
)

// maxTensorElems bounds one tensor given to RunTensors (4 GiB at float32).
const maxTensorElems = 1 << 30

// RunTensors runs the model once on the given inputs, matched by name,
// without batching; it serves models with several inputs, which Run cannot
// feed. Every input of the model must be given, with Data as long as its
// Shape says and Shape agreeing with the model's declared rank and fixed
// dimensions. The Result's tensors keep the shapes the runtime gives (no
// image axis is added); N is the first input's first dimension (0 for a
// scalar).
func (s *Session) RunTensors(ctx context.Context, in []modelio.Tensor) (*Result, error) {
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.ort == nil {
		return nil, ErrClosed
	}
	byName := map[string]modelio.Tensor{}
	for _, t := range in {
		if _, dup := byName[t.Name]; dup {
			return nil, fmt.Errorf("infer: %s: input %q given twice", s.file, t.Name)
		}
		if !slices.ContainsFunc(s.feeds, func(v modelio.Value) bool { return v.Name == t.Name }) {
			return nil, fmt.Errorf("infer: %s: the model has no input %q", s.file, t.Name)
		}
		byName[t.Name] = t
	}
	vals := make([]ort.Value, len(s.feeds))
	defer destroy(vals)
	for i, v := range s.feeds {
		t, ok := byName[v.Name]
		if !ok {
			return nil, fmt.Errorf("infer: %s: input %q not given", s.file, v.Name)
		}
		if err := s.checkTensor(v, t); err != nil {
			return nil, err
		}
		var x ort.Value
		var err error
		if len(t.Shape) == 0 {
			x, err = ort.NewScalar(t.Data[0]) // onnxruntime_go's tensors need a dimension
		} else {
			x, err = ort.NewTensor(ort.Shape(slices.Clone(t.Shape)), t.Data)
		}
		if err != nil {
			return nil, fmt.Errorf("infer: %s: input %q: %w", s.file, v.Name, err)
		}
		vals[i] = x
	}
	outs := make([]ort.Value, len(s.names))
	defer destroy(outs)
	if err := s.exec(ctx, vals, outs); err != nil {
		return nil, err
	}
	res := &Result{Maps: make(map[string]modelio.Tensor, len(s.capIndex))}
	if len(in) > 0 && len(in[0].Shape) > 0 {
		res.N = int(in[0].Shape[0])
	}
	ts := make([]modelio.Tensor, len(outs))
	for j, v := range outs {
		t, ok := v.(*ort.Tensor[float32])
		if !ok {
			return nil, fmt.Errorf("infer: %s: %q is %s; only float32 tensors are returned", s.file, s.names[j], elemName(v))
		}
		// onnxruntime_go copied the runtime's buffer into this Go slice;
		// it stays valid after the value is destroyed.
		ts[j] = modelio.Tensor{Name: s.names[j], Shape: slices.Clone([]int64(t.GetShape())), Data: t.GetData()}
	}
	res.Outputs = ts[:s.nOut:s.nOut]
	for name, j := range s.capIndex {
		res.Maps[name] = ts[j]
	}
	res.Score = s.scoreIndex(res.Outputs)
	return res, nil
}

// checkTensor checks a tensor given for input v before the runtime sees it.
func (s *Session) checkTensor(v modelio.Value, t modelio.Tensor) error {
	n := int64(1)
	for _, d := range t.Shape {
		if d < 0 || d > maxTensorElems {
			return fmt.Errorf("infer: %s: input %q: shape %v", s.file, v.Name, t.Shape)
		}
		n *= d
		if n > maxTensorElems {
			return fmt.Errorf("infer: %s: input %q: shape %v is more than %d values", s.file, v.Name, t.Shape, maxTensorElems)
		}
	}
	if int64(len(t.Data)) != n {
		return fmt.Errorf("infer: %s: input %q: shape %v needs %d values, got %d", s.file, v.Name, t.Shape, n, len(t.Data))
	}
	if v.Shape == nil {
		return nil
	}
	if len(v.Shape) != len(t.Shape) {
		return fmt.Errorf("infer: %s: input %q: shape %v has rank %d; the model declares %s", s.file, v.Name, t.Shape, len(t.Shape), v.Shape)
	}
	for i, d := range v.Shape {
		if d.Known() && d.Size != t.Shape[i] {
			return fmt.Errorf("infer: %s: input %q: shape %v; the model declares %s", s.file, v.Name, t.Shape, v.Shape)
		}
	}
	return nil
}
