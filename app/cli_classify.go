package main

import (
	"flag"
	"fmt"
	"path/filepath"
	"strconv"
	"strings"

	"fovea/app/core"
)

var classifyCommand = &command{
	name:    "classify",
	args:    "(--image FILE | IMAGE... | FOLDER) [--k N] [--json]",
	many:    true,
	summary: "print the model's most probable classes for an image",
	about: `Runs the model on one image and prints the k most probable classes with their
probabilities. When the model's output is not already a probability distribution,
softmax is applied to it. With several images or a folder, the model is opened once
and each image gets its line (with --json: one JSON object per line).`,
	setup: func(fs *flag.FlagSet, cf *common) func(*invocation) int {
		image := fs.String("image", "", "image `FILE` to classify (required)")
		k := fs.Int("k", 5, "list the `N` most probable classes")
		asJSON := fs.Bool("json", false, "print JSON instead of text")
		return func(j *invocation) int {
			if *k < 1 {
				return j.usageErr("--k %d: give at least 1", *k)
			}
			files, many, err := j.imageList(*image)
			if err != nil {
				return j.fail(err)
			}
			if len(files) == 0 {
				return j.usageErr("--image FILE (or image files or a folder as arguments) is required")
			}
			if many {
				return j.eachImage(files, func(f string) int { return classifyOne(j, f, *k, *asJSON) })
			}
			*image = files[0]
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

// classifyOne is one image of a classify over several: a line of text or
// of JSON.
func classifyOne(j *invocation, file string, k int, asJSON bool) int {
	img, err := core.LoadImage(file)
	if err != nil {
		return j.fail(err)
	}
	cl, err := j.ws.Classify(j.ctx, img, k)
	if err != nil {
		return j.fail(err)
	}
	if asJSON {
		d := classifyDoc{Model: j.ws.Name(), Image: file, SoftmaxApplied: !cl.Softmaxed, Top: []predictionDoc{}}
		for _, p := range cl.Top {
			d.Top = append(d.Top, predictionDoc{p.Index, p.Label, p.Probability})
		}
		return j.writeJSONLine(d)
	}
	parts := make([]string, len(cl.Top))
	for i, p := range cl.Top {
		label := p.Label
		if label == "" {
			label = "class " + strconv.Itoa(p.Index)
		}
		parts[i] = fmt.Sprintf("%s %.2f%%", label, 100*p.Probability)
	}
	fmt.Fprintf(j.stdout, "%s: %s\n", file, strings.Join(parts, ", "))
	return exitOK
}

// The JSON form of `fovea classify`: {"top":[{"index","label","probability"}]},
// with the model and image beside it.
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
