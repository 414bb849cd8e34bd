package gui

import (
	"strings"
	"unicode/utf8"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/theme"
)

// The layer table sizes its columns to what they hold: a number is never
// cut (VGG-16's 224×224×64 needs more room than the demo's 64×64×16), and
// a layer name wider than nameMax is shortened in the middle, at a
// separator where it can be, so that both its start and its distinctive
// end stay readable (the full name shows in the layer maps view when the
// row is chosen).

// nameMax is the widest the name column grows, in device-independent
// pixels.
const nameMax = 210

// cellWidth is the width a table label needs to show s whole.
func cellWidth(s string, bold bool) float32 {
	return fyne.MeasureText(s, theme.TextSize(), fyne.TextStyle{Bold: bold}).Width + 2*theme.InnerPadding() + 4
}

// fitColumns sets the table's column widths for rows: each column as wide
// as its widest value or title, the name column at most nameMax (the
// default widths hold until a model is open).
func (p *layerPanel) fitColumns() {
	p.widths = make([]float32, len(layerColumns))
	for c, col := range layerColumns {
		w := cellWidth(col.title, true)
		for r := range p.rows {
			w = max(w, cellWidth(p.cell(r, c), false))
		}
		if c == 0 {
			w = min(w, nameMax)
		}
		p.widths[c] = w
		p.table.SetColumnWidth(c, w)
	}
}

// middleEllipsis shortens s to fit width w by leaving out its middle:
// the cut falls at separators ('/', '.', '_', '-', ':') when a cut there
// keeps at least a third of the room used, else between letters.
func middleEllipsis(s string, w float32) string {
	fits := func(t string) bool { return cellWidth(t, false) <= w }
	if fits(s) {
		return s
	}
	const ell = "…"
	isSep := func(r rune) bool { return strings.ContainsRune("/._-:", r) }
	best, bestLen := "", 0
	// Cuts at separators: head ends after a separator, tail starts at one.
	var heads, tails []int
	for i, r := range s {
		if isSep(r) {
			heads = append(heads, i+utf8.RuneLen(r))
			tails = append(tails, i)
		}
	}
	for _, h := range heads {
		for _, t := range tails {
			if t < h {
				continue
			}
			c := s[:h] + ell + s[t:]
			if n := utf8.RuneCountInString(c); n > bestLen && fits(c) {
				best, bestLen = c, n
			}
		}
	}
	// Between letters, as evenly as fits.
	rs := []rune(s)
	for keep := len(rs) - 1; keep > 0; keep-- {
		head := (keep + 1) / 2
		c := string(rs[:head]) + ell + string(rs[len(rs)-(keep-head):])
		if fits(c) {
			if bestLen*3 >= keep*2 && best != "" {
				return best
			}
			return c
		}
	}
	if best != "" {
		return best
	}
	return ell
}
