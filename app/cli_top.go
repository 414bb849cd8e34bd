package main

import (
	"flag"
	"fmt"
	"strconv"
	"strings"

	"fovea/app/core"
	"fovea/viz/analysis"
)

var topCommand = &command{
	name:    "top",
	args:    "--probe DIR --layer NAME [--channels 3,7] [--k 9] [--out FILE] [--json]",
	summary: "show the probe patches that drive each channel of a layer hardest",
	about: `Runs the model over the probe folder (the scan's single pass) and keeps, for each
channel of the layer, the k probe images on which it reached its highest value,
where in its map (y, x), and the input region that position sees (its receptive
field, in pixels of the model's input after resizing, clipped to the image).
Equal values are ordered by file name. The layer is any layer of the model
(node or output name, as fovea layers lists them) whose output has channels:
a ReLU-like activation, which every scan covers and which also gets the bias
and largest input of a dead channel, or another (a pooling, a Conv, a
Sigmoid...), scanned as well; there a channel "fires" where a value is above 0.

With --out the patches are drawn as a PNG, one row per channel: each enlarged
with its value and a thumbnail of the whole picture with the region framed.
A folder of class subfolders adds each channel's firing per class.
The patches are evidence about this model on these probe images, not a
description of what a channel means.`,
	setup: func(fs *flag.FlagSet, cf *common) func(*invocation) int {
		probe := fs.String("probe", "", "folder `DIR` of probe images, or of class subfolders (default for the demo: its own probe images)")
		layer := fs.String("layer", "", "activation layer `NAME`, node or output tensor (required)")
		chans := fs.String("channels", "", "comma-separated channel `LIST`, e.g. 3,7 (default: every channel)")
		k := fs.Int("k", analysis.DefaultTopK, "`N` strongest images per channel")
		out := fs.String("out", "", "draw the patches as a PNG `FILE` (- for stdout)")
		tile := fs.Int("tile", 96, "side of each enlarged patch in the picture, `PIXELS`")
		asJSON := fs.Bool("json", false, "print the patches as JSON")
		skip := fs.Bool("skip-unreadable", false, "pass over probe files that cannot be read instead of stopping")
		return func(j *invocation) int {
			switch {
			case *layer == "":
				return j.usageErr("--layer NAME is required")
			case *k < 1 || *k > 1000:
				return j.usageErr("--k %d: give 1 to 1000", *k)
			case *tile < 16 || *tile > 1024:
				return j.usageErr("--tile %d: give 16 to 1024 pixels", *tile)
			case *out == "-" && *asJSON:
				return j.usageErr("--out - and --json would both write to stdout")
			}
			var want []int
			if *chans != "" {
				for _, f := range strings.Split(*chans, ",") {
					n, err := strconv.Atoi(strings.TrimSpace(f))
					if err != nil || n < 0 {
						return j.usageErr("--channels %q: give channel numbers (0 or more) separated by commas", *chans)
					}
					want = append(want, n)
				}
			}
			opt := analysis.ScanOptions{TopK: *k, SkipUnreadable: *skip}
			if _, err := core.ScanLayer(&analysis.ScanReport{Layers: scanLayerNames(j)}, *layer); err != nil {
				// Not one of the activations every scan covers: scanned
				// too when the model has it (before the pass over the probes).
				if _, err := analysis.LayerOutputs(j.ws.Model, []string{*layer}); err != nil {
					return j.fail(core.NoLayer(j.ws.Model, *layer))
				}
				opt.Layers = []string{*layer}
			}
			var files []string
			var err error
			if *probe != "" {
				files, opt.Labels, err = j.ws.ProbeSet(*probe)
			} else if j.ws.Demo == "" {
				return j.usageErr("--probe DIR is required for your own model")
			} else {
				opt.FS, files, err = core.DemoProbes()
			}
			if err != nil {
				return j.fail(err)
			}
			r, err := j.ws.Scan(j.ctx, files, opt, j.progressFunc("scanning"))
			if err != nil {
				return j.fail(err)
			}
			l, err := core.ScanLayer(r, *layer)
			if err != nil {
				return j.fail(err)
			}
			if want == nil {
				for i := range l.Channels {
					want = append(want, i)
				}
			}
			for _, ch := range want {
				if ch >= len(l.Channels) {
					return j.usageErr("--channels: %s has channels 0 to %d, not %d", l.Name, len(l.Channels)-1, ch)
				}
			}
			if *out != "" {
				img, err := j.ws.TopPicture(l, want, *tile, opt.FS)
				if err != nil {
					return j.fail(err)
				}
				if code := j.writePNG(*out, img); code != exitOK {
					return code
				}
			}
			if *asJSON {
				d := topDoc{Layer: l.Name, Channels: []topChannel{}}
				for _, ch := range want {
					c := l.Channels[ch]
					tc := topChannel{Index: ch, Images: c.Top, Fires: c.Fires, Flags: c.Flags, Bias: c.Bias,
						MaxPreActivation: c.MaxPreActivation, PerClass: c.PerClass, SelectiveFor: c.SelectiveFor, Selectivity: c.Selectivity}
					if tc.Images == nil {
						tc.Images = []analysis.Patch{}
					}
					d.Channels = append(d.Channels, tc)
				}
				return j.writeJSON(d)
			}
			if *out == "-" {
				return exitOK
			}
			writeTopTable(j, r, l, want)
			if *out != "" {
				fmt.Fprintf(j.stdout, "wrote %s\n", *out)
			}
			return exitOK
		}
	},
}

// topDoc is the JSON of fovea top: the documented fields (layer; per
// channel index and images with file, value, y, x, box) and, per channel,
// the scan's findings from the same pass.
type topDoc struct {
	Layer    string       `json:"layer"`
	Channels []topChannel `json:"channels"`
}

type topChannel struct {
	Index            int                  `json:"index"`
	Images           []analysis.Patch     `json:"images"`
	Fires            float64              `json:"fires"`
	Flags            any                  `json:"flags"`
	Bias             *float64             `json:"bias,omitempty"`
	MaxPreActivation *float64             `json:"max_preactivation,omitempty"`
	PerClass         []analysis.ClassRate `json:"per_class,omitempty"`
	SelectiveFor     string               `json:"selective_for,omitempty"`
	Selectivity      float64              `json:"selectivity,omitempty"`
}

// writeTopTable prints each channel's strongest images.
func writeTopTable(j *invocation, r *analysis.ScanReport, l *analysis.ScanLayer, chans []int) {
	w := j.stdout
	fmt.Fprintf(w, "%s: %s over %d probe images; boxes in input pixels [x0 y0 x1 y1), x1 and y1 excluded\n", j.ws.Name(), l.Name, r.Images)
	for _, ch := range chans {
		c := l.Channels[ch]
		head := fmt.Sprintf("\nchannel %d: fires on %.1f%% of the images", ch, 100*c.Fires)
		if len(c.Flags) > 0 {
			head += " (" + joinFlags(c.Flags) + ")"
		}
		if c.MaxPreActivation != nil {
			head += ", largest input to the activation " + num(*c.MaxPreActivation)
		}
		if c.Bias != nil {
			head += ", bias " + num(*c.Bias)
		}
		if c.SelectiveFor != "" {
			head += fmt.Sprintf(", most selective for %s (index %.2f)", c.SelectiveFor, c.Selectivity)
		}
		fmt.Fprintln(w, head)
		t := table{right: []bool{true, true, true, false, false}}
		t.add("rank", "value", "y,x", "box", "file")
		for i, p := range c.Top {
			t.add(strconv.Itoa(i+1), num(p.Value), fmt.Sprintf("%d,%d", p.Y, p.X),
				fmt.Sprintf("%d %d %d %d", p.Box[0], p.Box[1], p.Box[2], p.Box[3]), p.File)
		}
		t.write(w)
	}
}

// scanLayerNames are the layers a scan of the model covers, named only.
func scanLayerNames(j *invocation) []analysis.ScanLayer {
	var out []analysis.ScanLayer
	for _, l := range j.ws.Model.ReluLayers() {
		out = append(out, analysis.ScanLayer{Name: l.Name, Output: l.Output})
	}
	return out
}
