package main

import (
	"flag"
	"fmt"

	"fovea/modelio"
	"fovea/viz"
)

var filtersCommand = &command{
	name:    "filters",
	args:    "--out FILE [--layer NAME] [--json]",
	summary: "draw the filters (kernels) of the first layer or of --layer as a PNG",
	about: `Draws every filter of a convolution as a tile: for a first layer reading a colour
image the three input channels become red, green and blue with zero at mid-grey;
otherwise one input channel (--slice) is drawn with a diverging colour map. A colour
bar under the tiles gives the weights' scale and says which input channel is drawn.
Filters whose kernel is all zeros or nearly parallel to another get a frame. With
--captions each tile reads "#index |w|=norm": the L2 norm of the whole filter (all
input channels), then its flag letters.`,
	setup: func(fs *flag.FlagSet, cf *common) func(*invocation) int {
		out := fs.String("out", "", "write the PNG to `FILE` (required; - for stdout)")
		layer := fs.String("layer", "", "the convolution's node `NAME` (default: the first layer)")
		cell := fs.Int("cell", 0, "`PIXELS` per weight (default: about 48 pixels per tile)")
		sortNorm := fs.Bool("sort", false, "order tiles by decreasing L2 norm")
		perFilter := fs.Bool("per-filter", false, "scale each filter by its own largest weight (default: one scale for all)")
		slice := fs.Int("slice", -1, "input `CHANNEL` to draw (default: 3-channel kernels as RGB, others channel 0)")
		columns := fs.Int("columns", 0, "`N` tiles per row (default: about square)")
		captions := fs.Bool("captions", false, "write \"#index |w|=L2 norm of the whole filter\" and flag letters under each tile")
		asJSON := fs.Bool("json", false, "print each tile's index, norm, place and flags as JSON")
		return func(j *invocation) int {
			if *out == "" {
				return j.usageErr("--out FILE is required")
			}
			if *out == "-" && *asJSON {
				return j.usageErr("--out - and --json would both write to stdout")
			}
			k, err := j.ws.Kernels(*layer)
			if err != nil {
				return j.fail(err)
			}
			if *slice < -1 || *slice >= k.C {
				return j.usageErr("--slice %d: %s has %d input channels (0…%d, or -1)", *slice, k.Node, k.C, k.C-1)
			}
			if *slice == -1 && k.C != 1 && k.C != 3 {
				*slice = 0 // no colour rendering for this many channels: the first one
			}
			o := viz.TileOptions{Cell: *cell, PerFilter: *perFilter, SortByNorm: *sortNorm,
				Slice: *slice, Columns: *columns, Labels: *captions}
			img, info, err := j.ws.Tiles(*layer, o, nil)
			if err != nil {
				return j.fail(err)
			}
			if code := j.writePNG(*out, img); code != exitOK {
				return code
			}
			if *asJSON {
				d := filtersDoc{Model: j.ws.Name(), Layer: k.Node, Filters: k.M, Channels: k.C,
					Height: k.KH, Width: k.KW, Tiles: []tileDoc{}}
				for _, t := range info {
					d.Tiles = append(d.Tiles, tileDoc{t.Index, t.Norm,
						[4]int{t.Rect.Min.X, t.Rect.Min.Y, t.Rect.Dx(), t.Rect.Dy()}, nonNil(t.Flags)})
				}
				return j.writeJSON(d)
			}
			if *out != "-" {
				fmt.Fprintf(j.stdout, "wrote %s: %d filters of %s (%d×%d×%d)\n", *out, k.M, k.Node, k.C, k.KH, k.KW)
			}
			return exitOK
		}
	},
}

type filtersDoc struct {
	Model    string    `json:"model"`
	Layer    string    `json:"layer"`
	Filters  int       `json:"filters"`
	Channels int       `json:"channels"`
	Height   int       `json:"kernel_height"`
	Width    int       `json:"kernel_width"`
	Tiles    []tileDoc `json:"tiles"`
}

type tileDoc struct {
	Index int            `json:"index"`
	Norm  float64        `json:"norm"`
	Rect  [4]int         `json:"rect"` // x, y, width, height in the PNG
	Flags []modelio.Flag `json:"flags"`
}

func nonNil[T any](s []T) []T {
	if s == nil {
		return []T{}
	}
	return s
}
