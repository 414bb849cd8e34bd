package prep

// Preset is a named set of value settings (range, mean, std, channel order) for a
// common training convention. It leaves size, layout, resize and background alone:
// those come from the model and the user.
type Preset struct {
	Name, About string
	Range       string
	Mean, Std   [3]float32
	BGR         bool
}

// presets are the conventions most classifiers are trained with (common practice).
// The ImageNet statistics are the per-channel mean and standard deviation of the
// ImageNet training set on the 0..1 scale, (0.485, 0.456, 0.406) and (0.229, 0.224, 0.225);
// the "bgr-mean" values (103.939, 116.779, 123.68) are the same means on the 0..255 scale
// in blue, green, red order, subtracted without scaling.
var presets = []Preset{
	{Name: "unit", About: "RGB, values 0..1, no normalisation",
		Range: RangeUnit, Std: [3]float32{1, 1, 1}},
	{Name: "byte", About: "RGB, raw values 0..255",
		Range: RangeByte, Std: [3]float32{1, 1, 1}},
	{Name: "signed", About: "RGB, values -1..1 (2p - 1)",
		Range: RangeSigned, Std: [3]float32{1, 1, 1}},
	{Name: "imagenet", About: "RGB, values 0..1, then ImageNet mean/std (0.485,0.456,0.406)/(0.229,0.224,0.225)",
		Range: RangeUnit, Mean: [3]float32{0.485, 0.456, 0.406}, Std: [3]float32{0.229, 0.224, 0.225}},
	{Name: "bgr-mean", About: "BGR, values 0..255 minus ImageNet means (103.939,116.779,123.68), no scaling",
		Range: RangeByte, Mean: [3]float32{103.939, 116.779, 123.68}, Std: [3]float32{1, 1, 1}, BGR: true},
}

// Presets lists the named presets, in a stable order.
func Presets() []Preset { return append([]Preset(nil), presets...) }

// PresetNamed finds a preset by name.
func PresetNamed(name string) (Preset, bool) {
	for _, p := range presets {
		if p.Name == name {
			return p, true
		}
	}
	return Preset{}, false
}

// Apply returns c with p's value settings.
func (p Preset) Apply(c Config) Config {
	c.Range, c.Mean, c.Std, c.BGR = p.Range, p.Mean, p.Std, p.BGR
	return c
}

// Preset names the preset whose value settings c has, or "" for custom settings.
// For a one-channel config only the first mean and std count.
func (c Config) Preset() string {
	for _, p := range presets {
		if c.Range != p.Range {
			continue
		}
		if c.Channels == 1 {
			if c.Mean[0] == p.Mean[0] && c.Std[0] == p.Std[0] {
				return p.Name
			}
			continue
		}
		if c.Mean == p.Mean && c.Std == p.Std && c.BGR == p.BGR {
			return p.Name
		}
	}
	return ""
}
