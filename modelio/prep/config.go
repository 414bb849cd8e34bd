package prep

import (
	"errors"
	"fmt"
	"image/color"
	"math"
	"strconv"
	"strings"

	"fovea/modelio"
)

// Config says how an image becomes a model input. The zero value is not usable (its
// size and Std are 0): start from [Guess], [Default] or a literal, and check it with
// [Config.Validate] before use.
type Config struct {
	Width, Height int            // input size in pixels
	Channels      int            // 3 (colour) or 1 (luminance, ITU-R BT.601)
	Resize        string         // "stretch": whole picture to Width×Height; "crop": shorter side to size, centre cut; "crop:S": shorter side to S, centre cut
	Range         string         // value range before mean/std: "0-1", "0-255" or "-1-1"
	Mean, Std     [3]float32     // per tensor channel (so in B,G,R order when BGR), applied as (v - Mean)/Std
	BGR           bool           // channel order blue, green, red instead of red, green, blue
	Layout        modelio.Layout // modelio.LayoutNCHW or modelio.LayoutNHWC
	Background    color.NRGBA    // colour behind transparent pixels; its alpha is ignored
}

// Names accepted for the string fields of Config.
const (
	ResizeStretch = "stretch"
	ResizeCrop    = "crop"
	// ResizeCropPrefix starts "crop:S": the shorter side scaled to S pixels,
	// then Width×Height cut from the centre (S = 256 for a 224 input is the
	// common evaluation pipeline); see [CropSide].
	ResizeCropPrefix = "crop:"
	RangeUnit        = "0-1"
	RangeByte        = "0-255"
	RangeSigned      = "-1-1"
)

// MaxSide is the largest Width or Height a Config may ask for. Real classifiers take a
// few hundred pixels; a declared input of 100000×100000 is a broken or hostile model.
const MaxSide = 4096

// DefaultSize is the side used for a model input whose height and width are symbolic:
// 224, the size most ImageNet-trained classifiers use (common practice).
const DefaultSize = 224

// Default is the documented fallback: 224×224 RGB, stretch, range 0–1, no normalisation,
// NCHW, white background. It is what [Guess] returns when the model says nothing.
func Default() Config {
	return Config{
		Width: DefaultSize, Height: DefaultSize, Channels: 3,
		Resize: ResizeStretch, Range: RangeUnit,
		Std:        [3]float32{1, 1, 1},
		Layout:     modelio.LayoutNCHW,
		Background: color.NRGBA{255, 255, 255, 255},
	}
}

// Validate reports every problem of c in one error that says what is allowed, e.g.
// `prep: bad settings: range "0-100": use "0-1", "0-255" or "-1-1"`; nil when c is usable.
func (c Config) Validate() error {
	var problems []string
	bad := func(format string, a ...any) { problems = append(problems, fmt.Sprintf(format, a...)) }
	if c.Width < 1 || c.Height < 1 || c.Width > MaxSide || c.Height > MaxSide {
		bad("input size %dx%d: each side must be 1..%d pixels", c.Width, c.Height, MaxSide)
	}
	if c.Channels != 1 && c.Channels != 3 {
		bad("%d channels: only 3 (colour) or 1 (luminance) are supported", c.Channels)
	}
	if s, ok := cropSide(c.Resize); ok {
		if s < max(c.Width, c.Height) || s > MaxSide {
			bad("resize %q: S must be at least the input's longer side (%d) and at most %d", c.Resize, max(c.Width, c.Height), MaxSide)
		}
	} else if c.Resize != ResizeStretch && c.Resize != ResizeCrop {
		bad("resize %q: use %q, %q or %q", c.Resize, ResizeStretch, ResizeCrop, ResizeCropPrefix+"S")
	}
	if c.Range != RangeUnit && c.Range != RangeByte && c.Range != RangeSigned {
		bad("range %q: use %q, %q or %q", c.Range, RangeUnit, RangeByte, RangeSigned)
	}
	if c.Layout != modelio.LayoutNCHW && c.Layout != modelio.LayoutNHWC {
		bad("layout %q: use %q or %q", c.Layout, modelio.LayoutNCHW, modelio.LayoutNHWC)
	}
	for i := range c.Channels {
		if i >= 3 {
			break
		}
		m, s := float64(c.Mean[i]), float64(c.Std[i])
		if math.IsNaN(m) || math.IsInf(m, 0) {
			bad("mean[%d] is %v: must be a finite number", i, m)
		}
		if math.IsNaN(s) || math.IsInf(s, 0) || s <= 0 {
			bad("std[%d] is %v: must be a positive finite number (1 means no scaling)", i, s)
		}
	}
	if len(problems) == 0 {
		return nil
	}
	return errors.New("prep: bad settings: " + strings.Join(problems, "; "))
}

// String states the settings in force in one line, for the window, the command line and
// the report, e.g.
//
//	224x224 RGB, crop, range 0-1, mean 0.485,0.456,0.406, std 0.229,0.224,0.225, NCHW [imagenet]
//
// The background is mentioned only when it is not white; the preset name, in brackets,
// only when the value settings match one.
func (c Config) String() string {
	var b strings.Builder
	order := "RGB"
	switch {
	case c.Channels == 1:
		order = "gray"
	case c.BGR:
		order = "BGR"
	}
	fmt.Fprintf(&b, "%dx%d %s, %s, range %s", c.Width, c.Height, order, c.Resize, c.Range)
	n := min(max(c.Channels, 1), 3)
	if c.Mean != [3]float32{} {
		fmt.Fprintf(&b, ", mean %s", triple(c.Mean, n))
	}
	if c.Std != [3]float32{1, 1, 1} {
		fmt.Fprintf(&b, ", std %s", triple(c.Std, n))
	}
	fmt.Fprintf(&b, ", %s", strings.ToUpper(string(c.Layout)))
	if bg := c.Background; bg.R != 255 || bg.G != 255 || bg.B != 255 {
		fmt.Fprintf(&b, ", background #%02x%02x%02x", bg.R, bg.G, bg.B)
	}
	if p := c.Preset(); p != "" {
		fmt.Fprintf(&b, " [%s]", p)
	}
	return b.String()
}

// triple formats the first n values of v as "a,b,c" with the shortest exact form.
func triple(v [3]float32, n int) string {
	s := make([]string, n)
	for i := range n {
		s[i] = fmt.Sprint(v[i])
	}
	return strings.Join(s, ",")
}

// Shape is the tensor shape of n images under c, in c.Layout: [n C H W] or [n H W C].
func (c Config) Shape(n int) []int64 {
	if c.Layout == modelio.LayoutNHWC {
		return []int64{int64(n), int64(c.Height), int64(c.Width), int64(c.Channels)}
	}
	return []int64{int64(n), int64(c.Channels), int64(c.Height), int64(c.Width)}
}

// Len is the number of values of one image's tensor: Channels×Height×Width.
func (c Config) Len() int { return c.Channels * c.Height * c.Width }

// CropSide returns S of a "crop:S" resize setting, and 0 for any other value
// (including a malformed one, which [Config.Validate] reports).
func CropSide(resize string) int {
	s, _ := cropSide(resize)
	return s
}

// cropSide reads "crop:S"; ok says resize has the prefix (S may still be out
// of range, or 0 when it is not a number).
func cropSide(resize string) (s int, ok bool) {
	rest, ok := strings.CutPrefix(resize, ResizeCropPrefix)
	if !ok {
		return 0, false
	}
	n, err := strconv.Atoi(rest)
	if err != nil || n < 1 {
		return 0, true
	}
	return n, true
}
