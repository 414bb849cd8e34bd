package infer

import (
	"context"
	"slices"

	"fovea/modelio"
)

// ActivationOutputs names every activation map of m: the output of each
// layer that hands a feature map on (m.MapLayers: the Relu after a Conv, not
// the Conv's own output; the pooling; the residual block's final Relu), in
// execution order. It is the value for Options.Capture when every map is
// wanted, and the cheap one: these tensors exist in a plain run anyway.
func ActivationOutputs(m *modelio.Model) []string {
	return outputs(m.MapLayers())
}

// LayerOutputs names the output of every layer m.ActivationLayers lists,
// including the inner stages ActivationOutputs leaves out (a Conv's output
// before its normalisation and activation). Capturing them costs the
// runtime's merged steps, and for some models a second run for exact
// outputs (Options.Capture); worth it for one image, not for a folder.
func LayerOutputs(m *modelio.Model) []string {
	return outputs(m.ActivationLayers())
}

func outputs(layers []modelio.Layer) []string {
	var names []string
	for _, l := range layers {
		if l.Output != "" && !slices.Contains(names, l.Output) {
			names = append(names, l.Output)
		}
	}
	return names
}

// ObserveShapes runs m once on a blank image with every layer whose output
// shape static inference could not resolve captured, and records the shapes
// the runtime produced with m.Observe (their ShapeSource becomes
// "observed"). It returns how many layers it observed; 0 when none was
// unknown (and then it runs nothing). opt.Dims must be set when the image
// dimensions are symbolic; opt.Capture is ignored. The observed shapes are
// for one image (or the fixed batch), batch first. m must not be in use by
// other goroutines meanwhile (Observe writes its layer table).
func ObserveShapes(ctx context.Context, m *modelio.Model, opt Options) (int, error) {
	var names []string
	for _, l := range m.Layers {
		if l.ShapeSource == modelio.SourceUnknown && l.Output != "" && !slices.Contains(names, l.Output) {
			names = append(names, l.Output)
		}
	}
	if len(names) == 0 {
		return 0, nil
	}
	opt.Capture = names
	opt.Batch = 1
	s, err := NewSession(m, opt)
	if err != nil {
		return 0, err
	}
	defer s.Close()
	if s.imageErr != nil {
		return 0, s.imageErr
	}
	s.mu.Lock()
	c := max(s.fixed, 1)
	raw, err := s.runAlloc(ctx, make([]float32, c*s.imageLen), c)
	s.mu.Unlock()
	if err != nil {
		return 0, err
	}
	defer destroy(raw)
	shapes := map[string][]int64{}
	for name, j := range s.capIndex {
		// Any element type: only the shape is wanted here.
		shapes[name] = slices.Clone([]int64(raw[j].GetShape()))
	}
	m.Observe(shapes)
	return len(shapes), nil
}
