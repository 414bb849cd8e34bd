package prep

import (
	"encoding/json"
	"image/color"
	"math"
	"strings"
	"testing"

	"fovea/modelio"
)

func TestDefaultIsValid(t *testing.T) {
	if err := Default().Validate(); err != nil {
		t.Fatal(err)
	}
	for _, p := range Presets() {
		if err := p.Apply(Default()).Validate(); err != nil {
			t.Errorf("preset %s: %v", p.Name, err)
		}
	}
}

// Validate names every problem and what is allowed, in one line.
func TestValidateMessages(t *testing.T) {
	nan := float32(math.NaN())
	cases := []struct {
		mod   func(*Config)
		words []string
	}{
		{func(c *Config) { c.Width = 0 }, []string{"input size 0x224", "1..4096"}},
		{func(c *Config) { c.Height = 100000 }, []string{"224x100000"}},
		{func(c *Config) { c.Channels = 4 }, []string{"4 channels", "3 (colour) or 1 (luminance)"}},
		{func(c *Config) { c.Resize = "fit" }, []string{`resize "fit"`, `"stretch", "crop" or "crop:S"`}},
		{func(c *Config) { c.Resize = "crop:200" }, []string{`resize "crop:200"`, `at least the input's longer side (224)`}},
		{func(c *Config) { c.Resize = "crop:x" }, []string{`resize "crop:x"`, `at least the input's longer side`}},
		{func(c *Config) { c.Range = "0-100" }, []string{`range "0-100"`, `"0-1", "0-255" or "-1-1"`}},
		{func(c *Config) { c.Layout = "chw" }, []string{`layout "chw"`}},
		{func(c *Config) { c.Std[1] = 0 }, []string{"std[1] is 0", "positive"}},
		{func(c *Config) { c.Mean[2] = nan }, []string{"mean[2] is NaN"}},
		{func(c *Config) { c.Range, c.Layout = "x", "y" }, []string{`range "x"`, "; ", `layout "y"`}},
	}
	for _, tc := range cases {
		c := Default()
		tc.mod(&c)
		err := c.Validate()
		if err == nil {
			t.Errorf("%+v: valid", c)
			continue
		}
		msg := err.Error()
		if !strings.HasPrefix(msg, "prep: bad settings: ") || strings.Contains(msg, "\n") {
			t.Errorf("message %q: want one line starting with prep: bad settings:", msg)
		}
		for _, w := range tc.words {
			if !strings.Contains(msg, w) {
				t.Errorf("message %q lacks %q", msg, w)
			}
		}
	}
	// A one-channel config only needs the first std.
	c := Default()
	c.Channels, c.Std = 1, [3]float32{0.5, 0, 0}
	if err := c.Validate(); err != nil {
		t.Errorf("gray with std[1]=0: %v", err)
	}
}

func TestString(t *testing.T) {
	c := Default()
	if got, want := c.String(), "224x224 RGB, stretch, range 0-1, NCHW [unit]"; got != want {
		t.Errorf("default: %q, want %q", got, want)
	}
	c = mustSet(t, Default(), "preset", "imagenet", "resize", "crop")
	if got, want := c.String(), "224x224 RGB, crop, range 0-1, mean 0.485,0.456,0.406, std 0.229,0.224,0.225, NCHW [imagenet]"; got != want {
		t.Errorf("imagenet: %q, want %q", got, want)
	}
	c = mustSet(t, Default(), "preset", "bgr-mean", "size", "64x32", "layout", "nhwc", "background", "#000")
	if got, want := c.String(), "64x32 BGR, stretch, range 0-255, mean 103.939,116.779,123.68, NHWC, background #000000 [bgr-mean]"; got != want {
		t.Errorf("bgr-mean: %q, want %q", got, want)
	}
	c = mustSet(t, Default(), "channels", "gray", "mean", "0.5", "std", "0.25")
	if got, want := c.String(), "224x224 gray, stretch, range 0-1, mean 0.5, std 0.25, NCHW"; got != want {
		t.Errorf("gray custom: %q, want %q", got, want)
	}
}

func mustSet(t *testing.T, c Config, kv ...string) Config {
	t.Helper()
	for i := 0; i < len(kv); i += 2 {
		if err := c.Set(kv[i], kv[i+1]); err != nil {
			t.Fatal(err)
		}
	}
	return c
}

func TestPresetRecognised(t *testing.T) {
	for _, p := range Presets() {
		if got := p.Apply(Default()).Preset(); got != p.Name {
			t.Errorf("preset %s recognised as %q", p.Name, got)
		}
	}
	c := Default()
	c.Mean[0] = 0.1
	if got := c.Preset(); got != "" {
		t.Errorf("custom recognised as %q", got)
	}
	if _, ok := PresetNamed("nope"); ok {
		t.Error("unknown preset found")
	}
}

func TestParseHelpers(t *testing.T) {
	sizes := []struct {
		in   string
		w, h int
		ok   bool
	}{
		{"64x64", 64, 64, true}, {"320X240", 320, 240, true}, {"32×16", 32, 16, true}, {" 7 ", 7, 7, true},
		{"64x", 0, 0, false}, {"x64", 0, 0, false}, {"0x5", 0, 0, false}, {"5000x5", 0, 0, false},
		{"axb", 0, 0, false}, {"1x2x3", 0, 0, false}, {"", 0, 0, false}, {"-3x4", 0, 0, false},
	}
	for _, s := range sizes {
		w, h, err := ParseSize(s.in)
		if (err == nil) != s.ok || w != s.w || h != s.h {
			t.Errorf("ParseSize(%q) = %d, %d, %v", s.in, w, h, err)
		}
		if err != nil && !strings.Contains(err.Error(), "prep: size") {
			t.Errorf("ParseSize(%q) message %q", s.in, err)
		}
	}
	triples := []struct {
		in   string
		want [3]float32
		ok   bool
	}{
		{"0.485,0.456,0.406", [3]float32{0.485, 0.456, 0.406}, true},
		{" 1 , 2 ,3", [3]float32{1, 2, 3}, true},
		{"0.5", [3]float32{0.5, 0.5, 0.5}, true},
		{"1,2", [3]float32{}, false}, {"1,2,x", [3]float32{}, false}, {"NaN", [3]float32{}, false},
		{"1,Inf,2", [3]float32{}, false}, {"", [3]float32{}, false},
	}
	for _, tc := range triples {
		got, err := ParseTriple(tc.in)
		if (err == nil) != tc.ok || got != tc.want {
			t.Errorf("ParseTriple(%q) = %v, %v", tc.in, got, err)
		}
	}
	for in, want := range map[string]string{"0-1": "0-1", "0..1": "0-1", "0-255": "0-255", "0..255": "0-255", "-1-1": "-1-1", "-1..1": "-1-1", " 0-1 ": "0-1"} {
		if got, err := ParseRange(in); err != nil || got != want {
			t.Errorf("ParseRange(%q) = %q, %v", in, got, err)
		}
	}
	if _, err := ParseRange("0-100"); err == nil || !strings.Contains(err.Error(), `range "0-100"`) {
		t.Errorf("ParseRange(0-100): %v", err)
	}
	if l, err := ParseLayout("NHWC"); err != nil || l != modelio.LayoutNHWC {
		t.Errorf("ParseLayout(NHWC) = %q, %v", l, err)
	}
	if _, err := ParseLayout("hwc"); err == nil {
		t.Error("ParseLayout(hwc) accepted")
	}
	if r, err := ParseResize("Crop"); err != nil || r != ResizeCrop {
		t.Errorf("ParseResize(Crop) = %q, %v", r, err)
	}
	if r, err := ParseResize(" Crop:0256 "); err != nil || r != "crop:256" {
		t.Errorf("ParseResize(Crop:0256) = %q, %v, want crop:256", r, err)
	}
	for _, bad := range []string{"crop:", "crop:0", "crop:-5", "crop:4097", "crop:2.5", "crop256"} {
		if r, err := ParseResize(bad); err == nil {
			t.Errorf("ParseResize(%q) = %q, want an error", bad, r)
		}
	}
	if _, err := ParseResize("fill"); err == nil {
		t.Error("ParseResize(fill) accepted")
	}
	for in, want := range map[string]color.NRGBA{"#ff8000": {255, 128, 0, 255}, "#F80": {255, 136, 0, 255}, "white": white, "Black": black, "102030": {16, 32, 48, 255}} {
		if got, err := ParseColor(in); err != nil || got != want {
			t.Errorf("ParseColor(%q) = %v, %v", in, got, err)
		}
	}
	for _, in := range []string{"#ff80", "red", "#gggggg", "#ff800000", ""} {
		if _, err := ParseColor(in); err == nil {
			t.Errorf("ParseColor(%q) accepted", in)
		}
	}
}

// Set changes one field, refuses bad values without changing anything, and knows its keys.
func TestSet(t *testing.T) {
	c := Default()
	before := c
	for _, kv := range [][2]string{{"size", "0x3"}, {"mean", "1,2"}, {"std", "1,0,1"}, {"std", "-1"}, {"range", "1-2"},
		{"layout", "x"}, {"resize", "x"}, {"channels", "4"}, {"order", "gbr"}, {"background", "x"}, {"preset", "x"}, {"colour", "x"}} {
		if err := c.Set(kv[0], kv[1]); err == nil {
			t.Errorf("Set(%q, %q) accepted", kv[0], kv[1])
		} else if !strings.HasPrefix(err.Error(), "prep: ") {
			t.Errorf("Set(%q, %q): %q lacks prefix", kv[0], kv[1], err)
		}
		if c != before {
			t.Fatalf("Set(%q, %q) changed the config after refusing", kv[0], kv[1])
		}
	}
	if err := c.Set("preset", "nope"); err == nil || !strings.Contains(err.Error(), "unit, byte, signed, imagenet, bgr-mean") {
		t.Errorf("unknown preset message: %v", err)
	}
	c = mustSet(t, c, "Size", "32x16", "channels", "bgr", "STD", "2", "mean", "1,2,3")
	if c.Width != 32 || c.Height != 16 || !c.BGR || c.Std != [3]float32{2, 2, 2} || c.Mean != [3]float32{1, 2, 3} {
		t.Errorf("after Set: %+v", c)
	}
	for _, k := range Keys {
		if err := c.Set(k, "definitely wrong"); err != nil && strings.Contains(err.Error(), "unknown setting") {
			t.Errorf("key %q listed in Keys but unknown to Set", k)
		}
	}
}

// The JSON form round-trips and reads like the documentation says.
func TestConfigJSON(t *testing.T) {
	c := mustSet(t, Default(), "preset", "bgr-mean", "size", "64x48", "layout", "nhwc", "background", "#102030", "resize", "crop")
	data, err := json.Marshal(c)
	if err != nil {
		t.Fatal(err)
	}
	want := `{"width":64,"height":48,"channels":3,"order":"bgr","resize":"crop","range":"0-255","mean":[103.939,116.779,123.68],"std":[1,1,1],"layout":"nhwc","background":"#102030"}`
	if string(data) != want {
		t.Errorf("JSON\n%s\nwant\n%s", data, want)
	}
	var back Config
	if err := json.Unmarshal(data, &back); err != nil || back != c {
		t.Errorf("round trip: %+v, %v", back, err)
	}
	// Absent fields keep the defaults; a single number means all three channels.
	if err := json.Unmarshal([]byte(`{"range":"-1-1","std":[0.5]}`), &back); err != nil {
		t.Fatal(err)
	}
	want2 := Default()
	want2.Range, want2.Std = RangeSigned, [3]float32{0.5, 0.5, 0.5}
	if back != want2 {
		t.Errorf("partial: %+v", back)
	}
	for _, bad := range []string{`{"mean":[1,2]}`, `{"order":"grb"}`, `{"background":"pink"}`, `{"width":"x"}`, `[]`} {
		if err := json.Unmarshal([]byte(bad), &back); err == nil {
			t.Errorf("%s accepted", bad)
		}
	}
}

// GuessFrom: the model's declared input wins for size, channels and layout; metadata
// gives the rest; symbolic sizes follow the documented defaults; notes say so.
func TestGuessFrom(t *testing.T) {
	meta := map[string]string{MetadataKey: `{"layout":"nchw","range":"0-1","mean":[0.485,0.456,0.406],"std":[0.229,0.224,0.225],"resize":"stretch","channels":"rgb"}`}
	c, notes := GuessFrom(&Input{Layout: "nchw", Channels: 3, Height: 64, Width: 64}, meta)
	want := mustSet(t, Default(), "preset", "imagenet", "size", "64x64")
	if c != want || len(notes) != 0 {
		t.Errorf("full metadata: %v, notes %q", c, notes)
	}

	c, notes = GuessFrom(&Input{Layout: "nhwc", Channels: 1, Height: 28, Width: 28}, nil)
	want = mustSet(t, Default(), "size", "28x28", "layout", "nhwc", "channels", "1")
	if c != want || len(notes) != 1 || !strings.Contains(notes[0], "no \"preprocess\" metadata") {
		t.Errorf("no metadata: %v, notes %q", c, notes)
	}

	// 224×224: the usual ImageNet classifier input (common practice); with
	// one side known, a square input is assumed (our choice).
	c, notes = GuessFrom(&Input{Layout: "nchw", Channels: 3}, nil)
	if c.Width != 224 || c.Height != 224 || !hasNote(notes, "input size symbolic: assumed 224x224") {
		t.Errorf("symbolic: %v %q", c, notes)
	}
	c, notes = GuessFrom(&Input{Layout: "nchw", Channels: 3, Height: 96}, nil)
	if c.Width != 96 || c.Height != 96 || !hasNote(notes, "width symbolic: assumed 96") {
		t.Errorf("half symbolic: %v %q", c, notes)
	}
	c, _ = GuessFrom(&Input{}, map[string]string{MetadataKey: `{"size":"100x50","channels":"gray","layout":"nhwc"}`})
	if c.Width != 100 || c.Height != 50 || c.Channels != 1 || c.Layout != modelio.LayoutNHWC {
		t.Errorf("metadata fills symbolic: %v", c)
	}

	// Disagreement and rubbish: the model wins, each problem is a note, nothing fails.
	c, notes = GuessFrom(&Input{Layout: "nchw", Channels: 3, Height: 32, Width: 32},
		map[string]string{MetadataKey: `{"layout":"nhwc","range":"0-100","mean":"a","colour":"x","preset":"bgr-mean","std":[1,2]}`})
	if c.Layout != modelio.LayoutNCHW || c.Range != RangeByte || !c.BGR || c.Mean != [3]float32{103.939, 116.779, 123.68} {
		t.Errorf("rubbish metadata: %v", c)
	}
	for _, w := range []string{"using nchw", `range "0-100"`, `key "colour" not understood`, "mean", "std"} {
		if !hasNote(notes, w) {
			t.Errorf("no note with %q in %q", w, notes)
		}
	}
	_, notes = GuessFrom(&Input{Channels: 3, Height: 8, Width: 8}, map[string]string{MetadataKey: "not json"})
	if !hasNote(notes, "not a JSON object") {
		t.Errorf("not JSON: %q", notes)
	}
	c, notes = GuessFrom(nil, nil)
	if c != Default() || !hasNote(notes, "no image input") {
		t.Errorf("no input: %v %q", c, notes)
	}
	// A model wanting 4 channels: kept (so the mismatch is visible) with a note, and
	// Validate refuses it.
	c, notes = GuessFrom(&Input{Layout: "nchw", Channels: 4, Height: 8, Width: 8}, nil)
	if c.Channels != 4 || c.Validate() == nil || !hasNote(notes, "4 channels") {
		t.Errorf("4 channels: %v %q", c, notes)
	}
}

func hasNote(notes []string, w string) bool {
	for _, n := range notes {
		if strings.Contains(n, w) {
			return true
		}
	}
	return false
}
