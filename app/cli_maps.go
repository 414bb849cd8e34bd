package main

import (
	"flag"
	"fmt"

	"fovea/app/core"
	"fovea/viz"
)

var mapsCommand = &command{
	name:    "maps",
	args:    "--image FILE --layer NAME --out FILE [--channel N]",
	summary: "draw the activation maps of one layer for an image as a PNG",
	about: `Runs the model on the image and draws every channel of the layer's activation map
as a tile, or with --channel one channel's map over the image as the model saw it,
with a colour legend under the picture. Colours: a layer with no negative value
(after a ReLU) runs from dark violet at 0 to pale yellow at its largest value; a
layer with negative values (a convolution before its ReLU) is near-white at 0,
orange above, blue below. The scale is shared across the layer's channels, or with
--per-tile each channel's own; the grid and --channel use the same colours for
one channel, and the legend says whose scale it shows.`,
	setup: func(fs *flag.FlagSet, cf *common) func(*invocation) int {
		image := fs.String("image", "", "image `FILE` (required)")
		layer := fs.String("layer", "", "activation layer `NAME`, node or output tensor (default: the first)")
		out := fs.String("out", "", "write the PNG to `FILE` (required; - for stdout)")
		channel := fs.Int("channel", -1, "draw only this `CHANNEL` over the image instead of the grid")
		opacity := fs.Float64("opacity", 0.6, "with --channel: `WEIGHT` of the map over the image, 0..1")
		zoom := fs.Int("zoom", 0, "`PIXELS` per map cell in the grid (default: about 48 pixels per tile)")
		scale := fs.Int("scale", 0, "with --channel: enlarge the overlay by this `FACTOR` (default: to about 256 pixels)")
		perTile := fs.Bool("per-tile", false, "scale each channel to its own range, in the grid and with --channel (default: one scale shared across the layer)")
		columns := fs.Int("columns", 0, "`N` tiles per row (default: about square)")
		captions := fs.Bool("captions", false, "write the channel index under each tile")
		asJSON := fs.Bool("json", false, "print each channel's min, max, mean and active fraction as JSON")
		return func(j *invocation) int {
			switch {
			case *image == "":
				return j.usageErr("--image FILE is required")
			case *out == "":
				return j.usageErr("--out FILE is required")
			case *out == "-" && *asJSON:
				return j.usageErr("--out - and --json would both write to stdout")
			case !(*opacity >= 0 && *opacity <= 1):
				return j.usageErr("--opacity %g: give a value from 0 to 1", *opacity)
			case *zoom < 0 || *scale < 0 || *columns < 0:
				return j.usageErr("--zoom, --scale and --columns cannot be negative")
			}
			img, err := core.LoadImage(*image)
			if err != nil {
				return j.fail(err)
			}
			a, err := j.ws.Activations(j.ctx, img)
			if err != nil {
				return j.fail(err)
			}
			l, t, err := a.MapLayer(*layer)
			if err != nil {
				return j.fail(err)
			}
			var stats []viz.ChannelStats
			if *channel >= 0 {
				ov, err := a.OverlayPicture(l.Output, *channel, *opacity, *scale, *perTile)
				if err != nil {
					return j.fail(err)
				}
				if code := j.writePNG(*out, ov); code != exitOK {
					return code
				}
			} else {
				grid, st, err := a.MapPicture(l.Output, viz.GridOptions{Zoom: *zoom, PerTile: *perTile, Columns: *columns, Labels: *captions})
				if err != nil {
					return j.fail(err)
				}
				stats = st
				if code := j.writePNG(*out, grid); code != exitOK {
					return code
				}
			}
			if *asJSON {
				if stats == nil {
					_, st, err := viz.MapGrid(t, core.MapLayout, viz.GridOptions{Channels: []int{*channel}})
					if err != nil {
						return j.fail(err)
					}
					stats = st
				}
				d := mapsDoc{Model: j.ws.Name(), Image: *image, Layer: l.Name, Output: l.Output, Shape: t.Shape, Channels: []channelDoc{}}
				for _, s := range stats {
					d.Channels = append(d.Channels, channelDoc{s.Channel, s.Min, s.Max, s.Mean, s.Fires})
				}
				return j.writeJSON(d)
			}
			if *out != "-" {
				fmt.Fprintf(j.stdout, "wrote %s: %s (%s), %s\n", *out, l.Name, l.Op, l.WHD())
			}
			return exitOK
		}
	},
}

type mapsDoc struct {
	Model    string       `json:"model"`
	Image    string       `json:"image"`
	Layer    string       `json:"layer"`
	Output   string       `json:"output"`
	Shape    []int64      `json:"shape"`
	Channels []channelDoc `json:"channels"`
}

// channelDoc: min, max, mean over the channel's positions on this image;
// active_fraction is the fraction of positions above zero (named apart from
// scan's "fires", the fraction of probe images on which a channel fired).
type channelDoc struct {
	Index          int     `json:"index"`
	Min            float64 `json:"min"`
	Max            float64 `json:"max"`
	Mean           float64 `json:"mean"`
	ActiveFraction float64 `json:"active_fraction"`
}
