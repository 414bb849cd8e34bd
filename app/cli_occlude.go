package main

import (
	"flag"
	"fmt"
	"image"
	"strconv"
	"time"

	"fovea/app/core"
	"fovea/viz"
)

var occludeCommand = &command{
	name:    "occlude",
	args:    "--image FILE (--out FILE | --json) [--class CLASS] [--expected CLASS]\n       fovea occlude IMAGE... | FOLDER (--out-dir DIR | --json) [flags]",
	many:    true,
	summary: "occlusion sensitivity: which parts of the image the score depends on (PNG or JSON)",
	about: `Hides one square patch of the image at a time and measures how much the score of
the target class drops (Zeiler & Fergus 2014). The picture shows, for each class, the
heatmap on its own (orange where hiding the patch lowered the score, blue where it
raised it, white for no change; every colour reads on the bar below) beside the image
as the model saw it, in colour (--grey for grey), with a solid line where the drop
reaches half the scale and a dashed one where the rise does. With --expected the
class the image should have been is drawn beside the predicted one, on the same scale.

With several images or a folder, the model is opened once, each image's overlay is
written to --out-dir as NAME.occlusion.png and --json prints one object per line.

The map is evidence about this model on this image, not proof of what it looks at.`,
	setup: func(fs *flag.FlagSet, cf *common) func(*invocation) int {
		var o occlusionFlags
		o.declare(fs)
		out := fs.String("out", "", "write the heatmap overlay PNG to `FILE` (- for stdout)")
		asJSON := fs.Bool("json", false, "print the scores as JSON")
		outDir := fs.String("out-dir", "", "with several images: write one overlay PNG per image into `DIR`")
		return func(j *invocation) int {
			files, many, err := j.imageList(o.image)
			if err != nil {
				return j.fail(err)
			}
			if many {
				if *out != "" {
					return j.usageErr("with several images give --out-dir DIR, not --out")
				}
				if *outDir == "" && !*asJSON {
					return j.usageErr("give --out-dir DIR for the pictures, --json for the scores, or both")
				}
				if *outDir != "" {
					if err := checkOutDir(*outDir); err != nil {
						return j.fail(err)
					}
				}
				used := map[string]bool{}
				return j.eachImage(files, func(f string) int {
					o.image = f
					res, code := o.run(j)
					if res == nil {
						return code
					}
					if *outDir != "" {
						p := outPath(*outDir, f, ".occlusion.png", used)
						img := viz.RenderOcclusion(res.fit, res.occ, viz.HeatOptions{Captions: true})
						if code := j.writePNG(p, img); code != exitOK {
							return code
						}
						if !*asJSON {
							fmt.Fprintf(j.stdout, "wrote %s\n", p)
						}
					}
					if *asJSON {
						return j.writeJSONLine(occlusionJSON(j, res))
					}
					return exitOK
				})
			}
			if len(files) == 1 {
				o.image = files[0]
			}
			if *out == "" && !*asJSON {
				return j.usageErr("give --out FILE for the picture, --json for the scores, or both")
			}
			if *out == "-" && *asJSON {
				return j.usageErr("--out - and --json would both write to stdout")
			}
			res, code := o.run(j)
			if res == nil {
				return code
			}
			if *out != "" {
				img := viz.RenderOcclusion(res.fit, res.occ, viz.HeatOptions{Captions: true, Grey: o.grey})
				if code := j.writePNG(*out, img); code != exitOK {
					return code
				}
			}
			if *asJSON {
				return j.writeJSON(occlusionJSON(j, res))
			}
			if *out != "-" {
				for _, oc := range res.occ {
					label := oc.Label
					if label == "" {
						label = "class " + strconv.Itoa(oc.Target)
					}
					fmt.Fprintf(j.stdout, "%s (class %d): probability %.2f%%, largest drop %.4g (%s)\n",
						label, oc.Target, 100*oc.Probability, largest(oc.Scores), oc.Unit())
					if note := oc.SaturationNote(); note != "" {
						fmt.Fprintf(j.stdout, "  note: %s\n", note)
					}
				}
				fmt.Fprintf(j.stdout, "scored: %s\n", res.occ[0].SourceNote)
				fmt.Fprintf(j.stdout, "wrote %s\n", *out)
			}
			return exitOK
		}
	},
}

// occlusionFlags are the flags of occlude and report.
type occlusionFlags struct {
	image, class, expected string
	patch, stride          int
	fill, score            string
	noReuse, grey          bool
}

func (o *occlusionFlags) declare(fs *flag.FlagSet) {
	fs.StringVar(&o.image, "image", "", "image `FILE` (or give image files or a folder as arguments)")
	fs.StringVar(&o.class, "class", "", "target `CLASS`, a label or a number (default: the predicted class)")
	fs.StringVar(&o.expected, "expected", "", "the `CLASS` the image should have been, drawn beside the first on the same scale")
	fs.StringVar(&o.expected, "versus", "", "old name of --expected")
	hiddenFlags["versus"] = true
	fs.IntVar(&o.patch, "patch", 0, "side of the hidden square in input `PIXELS` (default: a sixth of the shorter side)")
	fs.IntVar(&o.stride, "stride", 0, "step between patch positions in `PIXELS` (default: half the patch)")
	fs.StringVar(&o.fill, "fill", string(viz.FillGrey), "`FILL` of the hidden patch: grey (0.5 on the 0-1 pixel scale, before normalisation), mean, blur or zero")
	fs.BoolVar(&o.grey, "grey", false, "draw the image beside the heatmap in grey (default: in colour, as the model saw it)")
	fs.StringVar(&o.score, "score", string(viz.ScoreProbability), "`SCORE` compared with and without the patch: probability, logit (the logits, also those before a final Softmax) or logprob (log-probability)")
	fs.BoolVar(&o.noReuse, "no-reuse", false, "run every occluded image through the whole model instead of reusing the clean image's activations (same scores, usually slower)")
}

// occlusionResult is what occlude and report share.
type occlusionResult struct {
	occ   []*viz.Occlusion
	fit   *image.NRGBA
	image string
	set   viz.OcclusionSettings
	// seconds is the occlusion's own wall time (not opening the model or
	// reading the image).
	seconds float64
}

// run loads the image, resolves the classes and runs the occlusion.
func (o *occlusionFlags) run(j *invocation) (*occlusionResult, int) {
	if o.image == "" {
		return nil, j.usageErr("--image FILE is required")
	}
	cfg, _ := j.ws.Prep()
	set := core.DefaultOcclusion(cfg.Width, cfg.Height)
	if o.patch != 0 {
		set.Patch = o.patch
		if o.stride == 0 {
			set.Stride = max(1, o.patch/2)
		}
	}
	if o.stride != 0 {
		set.Stride = o.stride
	}
	set.Fill, set.Score, set.NoReuse = viz.Fill(o.fill), viz.Score(o.score), o.noReuse
	if err := core.CheckOcclusion(set, cfg.Width, cfg.Height); err != nil {
		return nil, j.fail(err)
	}
	img, err := core.LoadImage(o.image)
	if err != nil {
		return nil, j.fail(err)
	}
	var targets []int
	if o.class != "" || o.expected != "" {
		first := -1
		if o.class != "" {
			if first, err = j.ws.ClassIndex(o.class); err != nil {
				return nil, j.fail(fmt.Errorf("--class: %w", err))
			}
		} else {
			cl, err := j.ws.Classify(j.ctx, img, 1)
			if err != nil {
				return nil, j.fail(err)
			}
			first = cl.Top[0].Index
		}
		targets = append(targets, first)
		if o.expected != "" {
			v, err := j.ws.ClassIndex(o.expected)
			if err != nil {
				return nil, j.fail(fmt.Errorf("--expected: %w", err))
			}
			targets = append(targets, v)
		}
	}
	start := time.Now()
	occ, fit, err := j.ws.Occlude(j.ctx, img, set, targets, j.progressFunc("occluding"))
	if err != nil {
		return nil, j.fail(err)
	}
	return &occlusionResult{occ: occ, fit: fit, image: o.image, set: set, seconds: time.Since(start).Seconds()}, exitOK
}

// The JSON form of `fovea occlude`: the first target at the top
// level, an --expected target under "expected" with the same fields.
type occlusionDoc struct {
	Model string `json:"model,omitempty"`
	Image string `json:"image,omitempty"`
	occlusionTarget
	Expected *occlusionTarget `json:"expected,omitempty"`
	// Method says how the scores were computed and why; Seconds is the
	// occlusion's wall time, without opening the model.
	Method  methodDoc `json:"method"`
	Seconds float64   `json:"seconds"`
}

// methodDoc: "incremental" (the clean image's activations reused, only what
// the patch can change recomputed) or "every-image"; both give the same
// scores.
type methodDoc struct {
	Name string `json:"name"`
	Why  string `json:"why"`
}

type occlusionTarget struct {
	Target predictionDoc `json:"target"`
	Patch  int           `json:"patch"`
	Stride int           `json:"stride"`
	Fill   viz.Fill      `json:"fill"`
	Score  viz.Score     `json:"score"`
	// ScoreSource is the tensor the score was read from (the model's
	// output, or the logits before its final Softmax); ScoreSourceNote
	// says how, in words.
	ScoreSource     string `json:"score_source"`
	ScoreSourceNote string `json:"score_source_note"`
	// Base is the target's score (per Score) on the unoccluded image.
	Base float64 `json:"base"`
	// Saturated is the warning that the probability barely moves because
	// the model is sure, with the score to use instead ("" when not).
	Saturated string `json:"saturated,omitempty"`
	// Unit says what scores[i][j] is: the drop of the score with the patch
	// at (ys[i], xs[j]); negative where hiding raised it.
	Unit   string      `json:"unit"`
	Width  int         `json:"width"`
	Height int         `json:"height"`
	Ys     []int       `json:"ys"`
	Xs     []int       `json:"xs"`
	Scores [][]float64 `json:"scores"`
}

func occlusionJSON(j *invocation, r *occlusionResult) occlusionDoc {
	t := func(o *viz.Occlusion) occlusionTarget {
		return occlusionTarget{
			Target: predictionDoc{o.Target, o.Label, o.Probability},
			Patch:  o.Patch, Stride: o.Stride, Fill: o.Fill, Score: o.Score, Base: o.Base, Unit: o.Unit(),
			ScoreSource: o.Source, ScoreSourceNote: o.SourceNote, Saturated: o.SaturationNote(),
			Width: o.Width, Height: o.Height, Ys: o.Ys, Xs: o.Xs, Scores: o.Scores,
		}
	}
	d := occlusionDoc{Model: j.ws.Name(), Image: r.image, occlusionTarget: t(r.occ[0]),
		Method: methodDoc{r.occ[0].Method, r.occ[0].MethodWhy}, Seconds: r.seconds}
	if len(r.occ) > 1 {
		v := t(r.occ[1])
		d.Expected = &v
	}
	return d
}

// largest is the largest value of a grid.
func largest(g [][]float64) float64 {
	m := 0.0
	for i, row := range g {
		for j, v := range row {
			if i == 0 && j == 0 || v > m {
				m = v
			}
		}
	}
	return m
}
