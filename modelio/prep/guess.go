package prep

import (
	"bytes"
	"encoding/json"
	"fmt"
	"sort"
	"strings"

	"fovea/modelio"
)

// Input is what [GuessFrom] needs to know of a model's image input: the same fields as
// modelio.ImageInput. A size of 0 means symbolic (unknown until run time).
type Input struct {
	Layout                  modelio.Layout // modelio.LayoutNCHW, modelio.LayoutNHWC or "" (unknown)
	Channels, Height, Width int
}

// MetadataKey is the model metadata key whose JSON value states the preprocessing the
// model was trained with, e.g.
//
//	{"layout":"nchw","range":"0-1","mean":[0.485,0.456,0.406],"std":[0.229,0.224,0.225],
//	 "resize":"stretch","channels":"rgb"}
//
// Keys: layout, range, mean and std (one or three numbers, in the tensor's channel order),
// resize, channels ("rgb", "bgr" or "gray"), order ("rgb"/"bgr"), preset (a [Presets]
// name, applied before the other keys), width, height, size ("224x224"), background.
const MetadataKey = "preprocess"

// GuessFrom proposes a Config for a model input in (nil when the model has no image
// input) and the model's metadata, and says in notes what it assumed and why.
//
// The model's declared input wins for layout, channels, height and width; the metadata
// [MetadataKey] gives everything else (and fills in what the input leaves symbolic).
// Without metadata the values are [Default]'s: range 0–1, no normalisation, stretch,
// NCHW. A symbolic side takes the other side's size, or 224 when both are symbolic.
func GuessFrom(in *Input, meta map[string]string) (Config, []string) {
	c := Default()
	var notes []string
	note := func(format string, a ...any) { notes = append(notes, fmt.Sprintf(format, a...)) }

	fromMeta := map[string]bool{}
	if raw, ok := meta[MetadataKey]; ok {
		fromMeta = applyMetadata(&c, raw, note)
	} else {
		note("no %q metadata: assumed values 0..1, no mean/std, stretch; check against how the model was trained", MetadataKey)
	}
	if in == nil {
		note("no image input recognised: sizes are guesses")
		return c, notes
	}

	switch l := modelio.Layout(strings.ToLower(string(in.Layout))); l {
	case modelio.LayoutNCHW, modelio.LayoutNHWC:
		if fromMeta["layout"] && c.Layout != l {
			note("metadata says layout %s, the model's input shape says %s: using %s", c.Layout, l, l)
		}
		c.Layout = l
	default:
		if !fromMeta["layout"] {
			note("input layout unknown: assumed %s", c.Layout)
		}
	}
	if in.Channels > 0 {
		if fromMeta["channels"] && c.Channels != in.Channels {
			note("metadata says %d channels, the model's input has %d: using %d", c.Channels, in.Channels, in.Channels)
		}
		c.Channels = in.Channels
		if c.Channels != 1 && c.Channels != 3 {
			note("the model's input has %d channels; only 1 or 3 can be made from a picture", c.Channels)
		}
	} else if !fromMeta["channels"] {
		note("channel count symbolic: assumed 3 (colour)")
	}
	h, w := in.Height, in.Width
	switch {
	case h > 0 && w > 0:
		if fromMeta["size"] && (c.Height != h || c.Width != w) {
			note("metadata says size %dx%d, the model's input is %dx%d: using %dx%d", c.Width, c.Height, w, h, w, h)
		}
		c.Height, c.Width = h, w
	case fromMeta["size"]:
		if h > 0 {
			c.Height = h
		}
		if w > 0 {
			c.Width = w
		}
	case h > 0:
		c.Height, c.Width = h, h
		note("input width symbolic: assumed %d, like the height", h)
	case w > 0:
		c.Height, c.Width = w, w
		note("input height symbolic: assumed %d, like the width", w)
	default:
		note("input size symbolic: assumed %dx%d", DefaultSize, DefaultSize)
	}
	return c, notes
}

// applyMetadata sets c from the JSON of the preprocess metadata and reports which
// groups of fields it set ("layout", "channels", "size", ...). Anything it cannot use
// becomes a note; it never fails.
func applyMetadata(c *Config, raw string, note func(string, ...any)) map[string]bool {
	set := map[string]bool{}
	var fields map[string]json.RawMessage
	if err := json.Unmarshal([]byte(raw), &fields); err != nil {
		note("metadata %q is not a JSON object (%v): ignored", MetadataKey, err)
		return set
	}
	keys := make([]string, 0, len(fields))
	for k := range fields {
		keys = append(keys, k)
	}
	sort.Slice(keys, func(i, j int) bool { // preset first, so the other keys refine it
		if (keys[i] == "preset") != (keys[j] == "preset") {
			return keys[i] == "preset"
		}
		return keys[i] < keys[j]
	})
	for _, k := range keys {
		v := fields[k]
		var text string
		switch {
		case bytes.HasPrefix(bytes.TrimSpace(v), []byte(`"`)):
			if err := json.Unmarshal(v, &text); err != nil {
				note("metadata %s: %v: ignored", k, err)
				continue
			}
		case bytes.HasPrefix(bytes.TrimSpace(v), []byte(`[`)):
			var nums []float64
			if err := json.Unmarshal(v, &nums); err != nil {
				note("metadata %s: want numbers: ignored", k)
				continue
			}
			s := make([]string, len(nums))
			for i, n := range nums {
				s[i] = fmt.Sprint(n)
			}
			text = strings.Join(s, ",")
		default:
			text = string(bytes.TrimSpace(v))
		}
		var err error
		switch key := strings.ToLower(k); key {
		case "width", "height":
			var w, h int
			if w, h, err = ParseSize(text); err == nil {
				if key == "width" {
					c.Width = w
				} else {
					c.Height = h
				}
				set["size"] = true
			}
		case "size":
			if err = c.Set("size", text); err == nil {
				set["size"] = true
			}
		case "channels":
			if err = c.Set("channels", text); err == nil {
				if t := strings.ToLower(text); t != "rgb" && t != "bgr" {
					set["channels"] = true
				}
			}
		case "preset", "order", "range", "mean", "std", "layout", "resize", "background":
			if err = c.Set(key, text); err == nil {
				set[key] = true
			}
		default:
			note("metadata %s: key %q not understood: ignored", MetadataKey, k)
			continue
		}
		if err != nil {
			note("metadata %s ignored: %v", k, strings.TrimPrefix(err.Error(), "prep: "))
		}
	}
	return set
}
