package infer

import (
	"context"
	"slices"

	"fovea/modelio"
)

// ObserveShapes runs m once on a blank image with every layer whose output
// shape static inference could not resolve captured, and returns the model
// with the shapes the runtime produced (m.Observe: their ShapeSource
// becomes "observed") and how many layers it observed. When no shape was
// unknown it runs nothing and returns m and 0. opt.Dims must be set when
// the image dimensions are symbolic; opt.Capture is ignored. The observed
// shapes are for one image (or the fixed batch), batch first. m itself
// does not change.
func ObserveShapes(ctx context.Context, m *modelio.Model, opt Options) (*modelio.Model, int, error) {
	var names []string
	for _, l := range m.Layers {
		if l.ShapeSource == modelio.SourceUnknown && l.Output != "" && !slices.Contains(names, l.Output) {
			names = append(names, l.Output)
		}
	}
	if len(names) == 0 {
		return m, 0, nil
	}
	opt.Capture = names
	opt.Batch = 1
	s, err := NewSession(m, opt)
	if err != nil {
		return nil, 0, err
	}
	defer s.Close()
	if s.imageErr != nil {
		return nil, 0, s.imageErr
	}
	s.mu.Lock()
	c := max(s.fixed, 1)
	raw, err := s.runAlloc(ctx, make([]float32, c*s.imageLen), c)
	s.mu.Unlock()
	if err != nil {
		return nil, 0, err
	}
	defer destroy(raw)
	shapes := map[string][]int64{}
	for name, j := range s.capIndex {
		// Any element type: only the shape is wanted here.
		shapes[name] = slices.Clone([]int64(raw[j].GetShape()))
	}
	return m.Observe(shapes), len(shapes), nil
}
