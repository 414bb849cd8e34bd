package prep

import (
	"fmt"
	"image/color"
	"math"
	"strconv"
	"strings"

	"fovea/modelio"
)

// ParseSize reads "WIDTHxHEIGHT" ("224x224", also with "X" or "×") or a single number
// for a square. Each side must be 1..MaxSide.
func ParseSize(s string) (w, h int, err error) {
	t := strings.TrimSpace(s)
	parts := strings.FieldsFunc(t, func(r rune) bool { return r == 'x' || r == 'X' || r == '×' })
	if len(parts) == 1 && !strings.ContainsAny(t, "xX×") {
		parts = append(parts, parts[0])
	}
	if len(parts) != 2 {
		return 0, 0, fmt.Errorf("prep: size %q: want WIDTHxHEIGHT, e.g. 224x224", s)
	}
	var v [2]int
	for i, p := range parts {
		n, err := strconv.Atoi(strings.TrimSpace(p))
		if err != nil || n < 1 || n > MaxSide {
			return 0, 0, fmt.Errorf("prep: size %q: each side must be a whole number 1..%d", s, MaxSide)
		}
		v[i] = n
	}
	return v[0], v[1], nil
}

// ParseTriple reads three comma-separated numbers ("0.485,0.456,0.406"), or one number
// used for all three channels. Spaces are allowed; NaN and infinities are not.
func ParseTriple(s string) ([3]float32, error) {
	parts := strings.Split(s, ",")
	if len(parts) != 1 && len(parts) != 3 {
		return [3]float32{}, fmt.Errorf("prep: %q: want one number or three separated by commas, e.g. 0.485,0.456,0.406", s)
	}
	var v [3]float32
	for i, p := range parts {
		f, err := strconv.ParseFloat(strings.TrimSpace(p), 32)
		if err != nil || math.IsNaN(f) || math.IsInf(f, 0) {
			return [3]float32{}, fmt.Errorf("prep: %q: %q is not a finite number", s, strings.TrimSpace(p))
		}
		v[i] = float32(f)
	}
	if len(parts) == 1 {
		v[1], v[2] = v[0], v[0]
	}
	return v, nil
}

// ParseRange reads a value range: "0-1" (also "0..1"), "0-255" ("0..255") or "-1-1"
// ("-1..1"), and returns the canonical name.
func ParseRange(s string) (string, error) {
	switch strings.ReplaceAll(strings.TrimSpace(s), "..", "-") {
	case "0-1":
		return RangeUnit, nil
	case "0-255":
		return RangeByte, nil
	case "-1-1":
		return RangeSigned, nil
	}
	return "", fmt.Errorf("prep: range %q: use %s, %s or %s", s, RangeUnit, RangeByte, RangeSigned)
}

// ParseLayout reads "nchw" or "nhwc" in any case.
func ParseLayout(s string) (modelio.Layout, error) {
	switch l := modelio.Layout(strings.ToLower(strings.TrimSpace(s))); l {
	case modelio.LayoutNCHW, modelio.LayoutNHWC:
		return l, nil
	}
	return "", fmt.Errorf("prep: layout %q: use %s (channels first) or %s (channels last)", s, modelio.LayoutNCHW, modelio.LayoutNHWC)
}

// ParseResize reads "stretch", "crop" or "crop:S" (S a whole number of pixels,
// 1..MaxSide) in any case, and returns the canonical form ("crop:256"). Whether
// S suits the input size is [Config.Validate]'s question.
func ParseResize(s string) (string, error) {
	r := strings.ToLower(strings.TrimSpace(s))
	switch r {
	case ResizeStretch, ResizeCrop:
		return r, nil
	}
	if rest, ok := strings.CutPrefix(r, ResizeCropPrefix); ok {
		n, err := strconv.Atoi(strings.TrimSpace(rest))
		if err != nil || n < 1 || n > MaxSide {
			return "", fmt.Errorf("prep: resize %q: S in crop:S must be a whole number of pixels 1..%d, e.g. crop:256", s, MaxSide)
		}
		return ResizeCropPrefix + strconv.Itoa(n), nil
	}
	return "", fmt.Errorf("prep: resize %q: use %s (whole picture, aspect ratio not kept), %s (shorter side to size, centre cut) or %sS (shorter side to S, then the centre cut, e.g. crop:256)", s, ResizeStretch, ResizeCrop, ResizeCropPrefix)
}

// ParseOrder reads a channel order, "rgb" or "bgr", and reports whether it is BGR.
func ParseOrder(s string) (bgr bool, err error) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "rgb":
		return false, nil
	case "bgr":
		return true, nil
	}
	return false, fmt.Errorf("prep: channel order %q: use rgb or bgr", s)
}

// ParseColor reads "#rrggbb", "#rgb", "white" or "black" as an opaque colour.
func ParseColor(s string) (color.NRGBA, error) {
	t := strings.ToLower(strings.TrimSpace(s))
	switch t {
	case "white":
		return color.NRGBA{255, 255, 255, 255}, nil
	case "black":
		return color.NRGBA{0, 0, 0, 255}, nil
	}
	hex := strings.TrimPrefix(t, "#")
	if len(hex) == 3 {
		hex = string([]byte{hex[0], hex[0], hex[1], hex[1], hex[2], hex[2]})
	}
	v, err := strconv.ParseUint(hex, 16, 32)
	if err != nil || len(hex) != 6 {
		return color.NRGBA{}, fmt.Errorf("prep: colour %q: want #rrggbb, #rgb, white or black", s)
	}
	return color.NRGBA{uint8(v >> 16), uint8(v >> 8), uint8(v), 255}, nil
}

// Keys accepted by [Config.Set], in the order a help text lists them.
var Keys = []string{"preset", "size", "channels", "order", "range", "mean", "std", "layout", "resize", "background"}

// Set changes one setting from text, the way a command-line flag or a settings field
// gives it: "preset" (a [Presets] name), "size" ("224x224"), "channels" ("3", "1",
// "rgb", "bgr", "gray"), "order" ("rgb"/"bgr"), "range", "mean", "std", "layout",
// "resize" and "background" ("#rrggbb"). c is unchanged when the value is refused.
func (c *Config) Set(key, value string) error {
	var err error
	key = strings.ToLower(strings.TrimSpace(key))
	switch key {
	case "preset":
		p, ok := PresetNamed(strings.ToLower(strings.TrimSpace(value)))
		if !ok {
			names := make([]string, len(presets))
			for i, p := range presets {
				names[i] = p.Name
			}
			return fmt.Errorf("prep: preset %q: use one of %s", value, strings.Join(names, ", "))
		}
		*c = p.Apply(*c)
	case "size":
		var w, h int
		if w, h, err = ParseSize(value); err == nil {
			c.Width, c.Height = w, h
		}
	case "channels":
		switch strings.ToLower(strings.TrimSpace(value)) {
		case "3", "rgb":
			c.Channels, c.BGR = 3, false
		case "bgr":
			c.Channels, c.BGR = 3, true
		case "1", "gray", "grey":
			c.Channels = 1
		default:
			err = fmt.Errorf("prep: channels %q: use 3, 1, rgb, bgr or gray", value)
		}
	case "order":
		var bgr bool
		if bgr, err = ParseOrder(value); err == nil {
			c.BGR = bgr
		}
	case "range":
		var r string
		if r, err = ParseRange(value); err == nil {
			c.Range = r
		}
	case "mean", "std":
		var v [3]float32
		if v, err = ParseTriple(value); err != nil {
			break
		}
		if key == "mean" {
			c.Mean = v
			break
		}
		for i, s := range v {
			if s <= 0 {
				return fmt.Errorf("prep: std %q: value %d is %v, must be positive (1 means no scaling)", value, i+1, s)
			}
		}
		c.Std = v
	case "layout":
		var l modelio.Layout
		if l, err = ParseLayout(value); err == nil {
			c.Layout = l
		}
	case "resize":
		var r string
		if r, err = ParseResize(value); err == nil {
			c.Resize = r
		}
	case "background":
		var bg color.NRGBA
		if bg, err = ParseColor(value); err == nil {
			c.Background = bg
		}
	default:
		return fmt.Errorf("prep: unknown setting %q: use one of %s", key, strings.Join(Keys, ", "))
	}
	return err
}
