package core

import (
	"context"
	"fmt"
	"image"
	"math"
	"strings"

	"fovea/viz"
	"fovea/viz/analysis"
)

// ComparePage draws the one-page picture of the comparison (viz.DrawComparePage):
// both files with their SHA-256, the first convolution's filter pairs on one
// colour scale with the similarity under each pair, and the findings.
// bgr says the models read blue first (the tiles then swap channels back).
func (c *Comparison) ComparePage(labels []string, bgr bool) (*image.NRGBA, error) {
	p := viz.ComparePage{
		Title:   "Two checkpoints compared: a (reference) and b (candidate)",
		A:       fmt.Sprintf("a: %s  sha256 %s", c.A.Model, c.A.SHA256),
		B:       fmt.Sprintf("b: %s  sha256 %s", c.B.Model, c.B.SHA256),
		Caution: "This page is evidence about these two files on these images only. A filter that changed is not worse by itself, and a few dead channels or flipped images need not matter on other data.",
	}
	if len(c.Filters) > 0 {
		f := c.Filters[0]
		kp := viz.KernelPairs{A: f.A, B: f.B, BGR: bgr}
		changed := 0
		for _, q := range f.Pairs {
			kp.Match = append(kp.Match, q.Match)
			cos, ratio := math.NaN(), math.NaN()
			if q.Cosine != nil {
				cos, ratio = *q.Cosine, *q.NormRatio
			}
			kp.Cosine = append(kp.Cosine, cos)
			kp.NormRatio = append(kp.NormRatio, ratio)
			if q.Changed {
				changed++
			}
		}
		pic, scale, err := viz.PairTiles(kp)
		if err != nil {
			return nil, fmt.Errorf("core: comparison page: %w", err)
		}
		p.Pairs = pic
		p.PairNote = fmt.Sprintf("Filters of %s (paired by %s; %d of %d changed): in each pair a's tile left, b's right, both grids on one scale (±%.3g at full colour); under each pair the cosine similarity and the norm ratio b/a.",
			f.Layer, c.Match, changed, len(f.Pairs), scale)
	}
	var lay []string
	diff := 0
	for _, r := range c.Layers {
		if r.Changed || r.By == "position" {
			diff++
			if diff <= 12 {
				lay = append(lay, fmt.Sprintf("%s: %s", r.Name, strings.Join(r.Differs, ", ")))
			}
		}
	}
	head := fmt.Sprintf("%d layers, the same architecture", len(c.Layers))
	if !c.Same {
		head = fmt.Sprintf("%d rows, %d differ", len(c.Layers), diff)
	}
	lay = append([]string{head + fmt.Sprintf("; parameters %d → %d, MACs %d → %d", c.TotalA.Params, c.TotalB.Params, c.TotalA.MACs, c.TotalB.MACs)}, lay...)
	p.Sections = append(p.Sections, viz.PageSection{Heading: "Layers", Lines: lay})
	if c.Same {
		pairs := analysis.MostChanged(c.Filters)
		var lines []string
		for i, q := range pairs {
			if i >= 8 || !q.Changed {
				break
			}
			s := fmt.Sprintf("%s filter %d", q.Layer, q.Index)
			if q.Cosine != nil {
				s += fmt.Sprintf(": cosine %.3f, norm ratio %.3f", *q.Cosine, *q.NormRatio)
			}
			if q.BiasA != q.BiasB {
				s += fmt.Sprintf(", bias %.3g → %.3g", q.BiasA, q.BiasB)
			}
			lines = append(lines, s)
		}
		if len(lines) == 0 {
			lines = []string{"no filter changed"}
		}
		p.Sections = append(p.Sections, viz.PageSection{Heading: "Most changed filters", Lines: lines})
	}
	if h := c.Health; h != nil {
		lines := []string{fmt.Sprintf("over %d probe images: %d channels newly dead or rare in b, %d revived, %d firing rates changed",
			c.ScanA.Images, len(h.NewlyDead), len(h.Revived), len(h.Firing))}
		lines = append(lines, channelList("newly dead or rare", h.NewlyDead)...)
		lines = append(lines, channelList("revived", h.Revived)...)
		p.Sections = append(p.Sections, viz.PageSection{Heading: "Channel health", Lines: lines})
	}
	if c.Predictions != nil {
		j := c.JSON(labels)
		a := j.Accuracy
		lines := []string{
			fmt.Sprintf("on %d labelled images: a %.1f%% (95%% interval %.1f–%.1f%%), b %.1f%% (%.1f–%.1f%%)",
				a.Images, 100*a.A, 100*a.A95[0], 100*a.A95[1], 100*a.B, 100*a.B95[0], 100*a.B95[1]),
			fmt.Sprintf("right → wrong: %d, wrong → right: %d; McNemar's exact test (McNemar 1947): p = %.3g", a.Worse, a.Better, *j.McNemarP),
		}
		for i, f := range j.Flipped {
			if i >= 10 {
				lines = append(lines, fmt.Sprintf("… and %d more", len(j.Flipped)-10))
				break
			}
			lines = append(lines, fmt.Sprintf("%s: true %s, a says %s, b says %s", f.File, f.True, f.A, f.B))
		}
		p.Sections = append(p.Sections, viz.PageSection{Heading: "Predictions", Lines: lines})
	}
	if len(c.Notes) > 0 {
		p.Sections = append(p.Sections, viz.PageSection{Heading: "Notes", Lines: c.Notes})
	}
	return viz.DrawComparePage(p)
}

// channelList lists channels by layer on a few lines.
func channelList(what string, list []analysis.ChannelRef) []string {
	if len(list) == 0 {
		return nil
	}
	var lines []string
	var cur string
	var idx []string
	flush := func() {
		if cur != "" {
			lines = append(lines, fmt.Sprintf("%s in %s: %s", what, cur, strings.Join(idx, ", ")))
		}
	}
	for _, ch := range list {
		if ch.Layer != cur {
			flush()
			cur, idx = ch.Layer, nil
		}
		idx = append(idx, fmt.Sprint(ch.Index))
	}
	flush()
	return lines
}

// CompareOcclusion measures occlusion sensitivity for class target on img in
// both models, with the same settings, and draws the two results side by
// side on one shared scale (viz.RenderOcclusion scales all panels by the
// largest |score| of both): where hiding a patch hurts a but not b. Both
// models must see the same picture (the same preprocessing), else the
// panels would not line up.
func CompareOcclusion(ctx context.Context, a, b *Workspace, img image.Image, target int,
	progress func(done, total int)) (*image.NRGBA, []*viz.Occlusion, error) {
	ca, _ := a.Prep()
	cb, _ := b.Prep()
	if ca != cb {
		return nil, nil, inputf(b.Name(), "the two models prepare images differently (%s against %s): their occlusion maps would not line up", ca, cb)
	}
	set := DefaultOcclusion(ca.Width, ca.Height)
	half := func(off int) func(done, total int) {
		if progress == nil {
			return nil
		}
		return func(done, total int) { progress(off+done, 2*total) }
	}
	occA, fit, err := a.Occlude(ctx, img, set, []int{target}, half(0))
	if err != nil {
		return nil, nil, err
	}
	occB, _, err := b.Occlude(ctx, img, set, []int{target}, func(done, total int) {
		if p := half(total); p != nil {
			p(done, total)
		}
	})
	if err != nil {
		return nil, nil, err
	}
	occA[0].Label = "a " + a.Name() + ": " + occA[0].Label
	occB[0].Label = "b " + b.Name() + ": " + occB[0].Label
	occ := []*viz.Occlusion{occA[0], occB[0]}
	return viz.RenderOcclusion(fit, occ, viz.HeatOptions{Captions: true}), occ, nil
}
