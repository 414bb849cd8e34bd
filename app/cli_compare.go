package main

import (
	"flag"
	"fmt"
	"strconv"
	"strings"

	"fovea/app/core"
	"fovea/viz/analysis"
)

var compareCommand = &command{
	name:    "compare",
	args:    "--against FILE [--probe DIR] [--data DIR_OR_LIST] [--json] [--out page.png] [--max-newly-dead N] [--max-accuracy-drop X]",
	summary: "compare a candidate model (--against) with the reference (--model)",
	about: `Compares two models: the reference (--model, or --demo) and a candidate
(--against FILE, or --against-demo NAME). The layer tables are aligned by layer
name and, where names differ, by position, op and output shape; rows whose
shape, parameters or MACs differ are marked. When the architectures are the
same, every convolution's filters are compared: the cosine similarity of the
two kernels (1: same direction, -1: negated) and the ratio of their norms
(candidate over reference), the most changed first; --match greedy pairs each
filter with its most similar partner instead of the one at the same index
(for a network trained from another seed). With --probe (the demo's own
probe images by default) both models are scanned over the same images: the
channels dead or rare in the candidate only (newly dead), the reverse
(revived), and every change of firing rate.

With --data (a labelled folder or list, as fovea evaluate reads it; the
demo's labelled probe images by default) both models answer the same images:
both accuracies with their 95% Wilson intervals, the images that went from
right to wrong and back, and McNemar's exact test (McNemar 1947) of whether
the accuracies differ beyond chance on such images.

The candidate is run with the reference's preprocessing when the
architectures are the same. With
--max-newly-dead N the exit status is 3 when more than N channels are newly
dead, and with --max-accuracy-drop X when b's accuracy is lower by more than
X, so a training pipeline can stop a worse checkpoint. --out FILE draws the
comparison on one page (both files named with their SHA-256) to hand on.`,
	setup: func(fs *flag.FlagSet, cf *common) func(*invocation) int {
		against := fs.String("against", "", "the candidate ONNX model `FILE`")
		againstDemo := fs.String("against-demo", "", "use the embedded demo `NAME` (healthy or unhealthy) as the candidate")
		probe := fs.String("probe", "", "folder `DIR` of probe images both models are scanned over (default for the demo: its own probe images)")
		data := fs.String("data", "", "labelled `DIR_OR_LIST` both models answer (as fovea evaluate reads it; default for the demo: its labelled probe images)")
		maxDrop := fs.Float64("max-accuracy-drop", -1, "exit with status 3 when b's accuracy is lower than a's by more than `X` (a fraction: 0.02 = 2 points; needs labelled images)")
		asJSON := fs.Bool("json", false, "print the comparison as JSON")
		match := fs.String("match", "index", "how filters are paired: `HOW` index (filter i with filter i) or greedy (most similar first)")
		maxDead := fs.Int("max-newly-dead", -1, "exit with status 3 when more than `N` channels are newly dead (default: no limit)")
		out := fs.String("out", "", "also draw the one-page picture of the comparison into `FILE` (PNG; - for stdout)")
		top := fs.Int("top", 10, "list the `N` most changed filters and firing rates in the text output")
		return func(j *invocation) int {
			if (*against == "") == (*againstDemo == "") {
				return j.usageErr("give the candidate with --against FILE or --against-demo NAME (one of them)")
			}
			if *againstDemo != "" && *againstDemo != core.DemoHealthy && *againstDemo != core.DemoUnhealthy {
				return j.usageErr("--against-demo %q: use healthy or unhealthy", *againstDemo)
			}
			m := analysis.Matching(*match)
			if m != analysis.MatchIndex && m != analysis.MatchGreedy {
				return j.usageErr("--match %q: use index or greedy", *match)
			}
			if *maxDead < -1 || *top < 0 {
				return j.usageErr("--max-newly-dead and --top take 0 or more")
			}
			var b *core.Workspace
			var err error
			if *against != "" {
				b, err = core.OpenModel(*against)
			} else {
				b, err = core.OpenDemo(*againstDemo == core.DemoUnhealthy)
			}
			if err != nil {
				return j.fail(err)
			}
			defer b.Close()
			in := core.CompareInput{Match: m}
			switch {
			case *probe != "":
				if in.Probe, err = core.ProbeFiles(*probe); err != nil {
					return j.fail(err)
				}
			case j.ws.Demo != "":
				// The demo's own probe images, read from the embedded files.
				if in.Scan.FS, in.Probe, err = core.DemoProbes(); err != nil {
					return j.fail(err)
				}
			}
			switch {
			case *data != "":
				if in.Data, err = j.ws.OpenLabelled(*data); err != nil {
					return j.fail(err)
				}
			case j.ws.Demo != "":
				if in.Data, err = j.ws.DemoLabelled(); err != nil {
					return j.fail(err)
				}
			}
			if *maxDrop != -1 && !(*maxDrop >= 0 && *maxDrop <= 1) {
				return j.usageErr("--max-accuracy-drop %g: give a fraction from 0 to 1", *maxDrop)
			}
			if *maxDrop >= 0 && in.Data == nil {
				return j.usageErr("--max-accuracy-drop needs labelled images (--data DIR_OR_LIST)")
			}
			if *maxDead >= 0 && len(in.Probe) == 0 {
				return j.usageErr("--max-newly-dead needs probe images (--probe DIR)")
			}
			progress := func(stage string, done, total int) {}
			if j.progress {
				fns := map[string]func(int, int){}
				progress = func(stage string, done, total int) {
					if fns[stage] == nil {
						fns[stage] = j.progressFunc(stage)
					}
					fns[stage](done, total)
				}
			}
			c, err := core.Compare(j.ctx, j.ws, b, in, progress)
			if err != nil {
				return j.fail(err)
			}
			labels, _ := j.ws.Labels()
			if *out != "" {
				cfg, _ := j.ws.Prep()
				page, err := c.ComparePage(labels, cfg.BGR)
				if err != nil {
					return j.fail(err)
				}
				if code := j.writePNG(*out, page); code != exitOK {
					return code
				}
				if *out == "-" {
					return exitOK
				}
			}
			if *asJSON {
				if code := j.writeJSON(c.JSON(labels)); code != exitOK {
					return code
				}
			} else {
				writeComparison(j, c, labels, *top)
			}
			if *maxDead >= 0 && c.Health != nil && len(c.Health.NewlyDead) > *maxDead {
				fmt.Fprintf(j.stderr, "fovea compare: %d newly dead channels, more than --max-newly-dead %d\n", len(c.Health.NewlyDead), *maxDead)
				return exitGate
			}
			if p := c.Predictions; *maxDrop >= 0 && p != nil && p.Images > 0 {
				drop := float64(p.CorrectA-p.CorrectB) / float64(p.Images)
				if drop > *maxDrop {
					fmt.Fprintf(j.stderr, "fovea compare: accuracy dropped by %.4g (%d → %d of %d right), more than --max-accuracy-drop %g\n",
						drop, p.CorrectA, p.CorrectB, p.Images, *maxDrop)
					return exitGate
				}
			}
			return exitOK
		}
	},
}

// writeComparison prints the comparison as text: the two files, the
// changed layers, the most changed filters, the health changes.
func writeComparison(j *invocation, c *core.Comparison, labels []string, top int) {
	w := j.stdout
	fmt.Fprintf(w, "a (reference): %s  sha256 %s\n", c.A.Model, c.A.SHA256)
	fmt.Fprintf(w, "b (candidate): %s  sha256 %s\n\n", c.B.Model, c.B.SHA256)
	changed := 0
	t := table{right: []bool{false, false, false, true, true, false}}
	t.add("layer", "a", "b", "params a→b", "MACs a→b", "differs")
	side := func(s *analysis.LayerSide) string {
		if s == nil {
			return "—"
		}
		return s.Op + " " + s.Shape
	}
	nums := func(x, y *analysis.LayerSide, f func(*analysis.LayerSide) int64) string {
		switch {
		case x == nil:
			return "— → " + strconv.FormatInt(f(y), 10)
		case y == nil:
			return strconv.FormatInt(f(x), 10) + " → —"
		case f(x) == f(y):
			return strconv.FormatInt(f(x), 10)
		}
		return strconv.FormatInt(f(x), 10) + " → " + strconv.FormatInt(f(y), 10)
	}
	for _, r := range c.Layers {
		if !r.Changed && r.By == "name" {
			continue
		}
		changed++
		name := r.Name
		if r.NameB != "" {
			name += " / " + r.NameB
		}
		diff := strings.Join(r.Differs, ", ")
		if r.By == "position" {
			diff += " (paired by position)"
		}
		t.add(name, side(r.A), side(r.B), nums(r.A, r.B, func(s *analysis.LayerSide) int64 { return s.Params }),
			nums(r.A, r.B, func(s *analysis.LayerSide) int64 { return s.MACs }), diff)
	}
	if changed == 0 {
		fmt.Fprintf(w, "layers: the same architecture, %d layers, none differs\n", len(c.Layers))
	} else {
		fmt.Fprintf(w, "layers: %d of %d rows differ\n", changed, len(c.Layers))
		t.write(w)
	}
	fmt.Fprintf(w, "totals: params %d → %d, MACs %d → %d\n", c.TotalA.Params, c.TotalB.Params, c.TotalA.MACs, c.TotalB.MACs)
	if c.Same {
		pairs := analysis.MostChanged(c.Filters)
		n := 0
		for _, p := range pairs {
			if p.Changed {
				n++
			}
		}
		fmt.Fprintf(w, "\nfilters (paired by %s): %d of %d changed", c.Match, n, len(pairs))
		if n > 0 {
			fmt.Fprintf(w, "; the most changed:\n")
			ft := table{right: []bool{false, true, true, true, true, true, true}}
			ft.add("layer", "filter", "b's", "cosine", "norm b/a", "bias a", "bias b")
			for i, p := range pairs {
				if i >= top || !p.Changed {
					break
				}
				cos, ratio := "undefined", "undefined"
				if p.Cosine != nil {
					cos, ratio = fmt.Sprintf("%.4f", *p.Cosine), fmt.Sprintf("%.4f", *p.NormRatio)
				}
				ft.add(p.Layer, strconv.Itoa(p.Index), strconv.Itoa(p.Match), cos, ratio, num(p.BiasA), num(p.BiasB))
			}
			ft.write(w)
		} else {
			fmt.Fprintln(w)
		}
		for _, s := range c.FilterSkipped {
			fmt.Fprintf(w, "not compared: %s\n", s)
		}
	}
	if h := c.Health; h != nil {
		fmt.Fprintf(w, "\nhealth over %d probe images: %d newly dead or rare in b, %d revived\n", c.ScanA.Images, len(h.NewlyDead), len(h.Revived))
		ht := table{right: []bool{false, false, true, true, true}}
		ht.add("change", "layer", "channel", "fires a", "fires b")
		rate := map[string]analysis.FiringChange{}
		for _, f := range h.Firing {
			rate[f.Layer+"\x00"+strconv.Itoa(f.Index)] = f
		}
		pct := func(v float64) string { return fmt.Sprintf("%.1f%%", 100*v) }
		for _, x := range []struct {
			what string
			list []analysis.ChannelRef
		}{{"newly " + "dead/rare", h.NewlyDead}, {"revived", h.Revived}} {
			for _, ch := range x.list {
				f := rate[ch.Layer+"\x00"+strconv.Itoa(ch.Index)]
				ht.add(x.what+" ("+joinFlags(ch.Flags)+")", ch.Layer, strconv.Itoa(ch.Index), pct(f.A), pct(f.B))
			}
		}
		if len(h.NewlyDead)+len(h.Revived) > 0 {
			ht.write(w)
		}
		fmt.Fprintf(w, "firing rate changed on %d channels", len(h.Firing))
		if len(h.Firing) > 0 {
			fmt.Fprintf(w, "; the largest changes:\n")
			rt := table{right: []bool{false, true, true, true}}
			rt.add("layer", "channel", "fires a", "fires b")
			for i, f := range h.Firing {
				if i >= top {
					break
				}
				rt.add(f.Layer, strconv.Itoa(f.Index), pct(f.A), pct(f.B))
			}
			rt.write(w)
		} else {
			fmt.Fprintln(w)
		}
		for _, u := range h.Unmatched {
			fmt.Fprintf(w, "not compared: %s\n", u)
		}
	}
	writePredictionText(j, c, labels)
	for _, n := range c.Notes {
		fmt.Fprintf(w, "\nnote: %s\n", n)
	}
}

// writePredictionText prints the prediction part: both accuracies with
// their intervals, the flipped images and McNemar's p-value.
func writePredictionText(j *invocation, c *core.Comparison, labels []string) {
	p := c.Predictions
	if p == nil {
		return
	}
	w := j.stdout
	acc := c.JSON(labels).Accuracy
	fmt.Fprintf(w, "\npredictions on %d labelled images:\n", p.Images)
	fmt.Fprintf(w, "  accuracy a %.1f%% (95%% interval %.1f–%.1f%%), b %.1f%% (%.1f–%.1f%%)\n",
		100*acc.A, 100*acc.A95[0], 100*acc.A95[1], 100*acc.B, 100*acc.B95[0], 100*acc.B95[1])
	fmt.Fprintf(w, "  right under a, wrong under b: %d; wrong under a, right under b: %d\n", p.Worse, p.Better)
	fmt.Fprintf(w, "  McNemar's exact test (McNemar 1947): p = %.4g", p.P)
	if p.P < 0.05 {
		fmt.Fprintf(w, " — the accuracies differ beyond chance on images like these\n")
	} else {
		fmt.Fprintf(w, " — no evidence on these images that the accuracies differ\n")
	}
	if len(p.Flips) > 0 {
		t := table{}
		t.add("flipped", "file", "true", "a says", "b says")
		for _, f := range p.Flips {
			dir := "wrong → right"
			if f.Worse {
				dir = "right → wrong"
			}
			t.add(dir, f.File, className(labels, f.True), className(labels, f.A), className(labels, f.B))
		}
		t.write(w)
	}
}

// className names class i by its label, or its number.
func className(labels []string, i int) string {
	if i >= 0 && i < len(labels) && labels[i] != "" {
		return labels[i]
	}
	return "class " + strconv.Itoa(i)
}
