package main

import (
	"flag"
	"fmt"
	"path/filepath"
	"strconv"

	"fovea/app/core"
)

var classifyCommand = &command{
	name:    "classify",
	args:    "--image FILE [--k N] [--json]",
	summary: "print the model's most probable classes for an image",
	about: `Runs the model on one image and prints the k most probable classes with their
probabilities. When the model's output is not already a probability distribution,
softmax is applied to it.`,
	setup: func(fs *flag.FlagSet, cf *common) func(*job) int {
		image := fs.String("image", "", "image `FILE` to classify (required)")
		k := fs.Int("k", 5, "list the `N` most probable classes")
		asJSON := fs.Bool("json", false, "print JSON instead of text")
		return func(j *job) int {
			if *image == "" {
				return j.usageErr("--image FILE is required")
			}
			if *k < 1 {
				return j.usageErr("--k %d: give at least 1", *k)
			}
			img, err := core.LoadImage(*image)
			if err != nil {
				return j.fail(err)
			}
			cl, err := j.ws.Classify(j.ctx, img, *k)
			if err != nil {
				return j.fail(err)
			}
			if *asJSON {
				d := classifyDoc{Model: j.ws.Name(), Image: *image, SoftmaxApplied: !cl.Softmaxed, Top: []predictionDoc{}}
				for _, p := range cl.Top {
					d.Top = append(d.Top, predictionDoc{p.Index, p.Label, p.Probability})
				}
				return j.writeJSON(d)
			}
			fmt.Fprintf(j.stdout, "%s on %s:\n", j.ws.Name(), filepath.Base(*image))
			t := table{right: []bool{true, true, false, true}}
			for i, p := range cl.Top {
				label := p.Label
				if label == "" {
					label = "class " + strconv.Itoa(p.Index)
				}
				t.add(strconv.Itoa(i+1)+".", fmt.Sprintf("%.2f%%", 100*p.Probability), label, "(class "+strconv.Itoa(p.Index)+")")
			}
			t.write(j.stdout)
			return exitOK
		}
	},
}

// The JSON form of `fovea classify`: {"top":[{"index","label","probability"}]}
// (issue 8), with the model and image beside it.
type classifyDoc struct {
	Model string          `json:"model"`
	Image string          `json:"image"`
	Top   []predictionDoc `json:"top"`
	// SoftmaxApplied is true when Fovea applied softmax to the model's output,
	// false when the output already was a probability distribution.
	SoftmaxApplied bool `json:"softmax_applied"`
}

type predictionDoc struct {
	Index       int     `json:"index"`
	Label       string  `json:"label"`
	Probability float64 `json:"probability"`
}
