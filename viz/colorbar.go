package viz

import (
	"fmt"
	"image"
	"image/color"
	"math"
	"strconv"
	"strings"
)

// ColorBar draws a legend for a colour map: a bar running from min to max
// with tick marks labelled in the data's units — both ends (3 significant
// digits) and round values ({1, 2, 5}·10^k steps) between them where they
// fit — and the unit written beside it. A bar wider than high runs
// left to right with the labels under it and the unit below them; otherwise
// it runs bottom to top with the labels to its right and the unit above.
//
// The value v is given to cmap the way the pictures of this package do: when
// min < 0 as cmap(v / max(|min|, |max|)), the convention of [Diverging] and
// of [OverlayScores] with scale = max; otherwise as cmap((v − min)/(max − min)),
// the convention of [Sequential] and of [MapGrid] (whose range starts at 0
// for non-negative maps). So the legend of an occlusion picture drawn with
// scale s is ColorBar(w, h, -s, s, unit, Diverging), and that of an
// activation grid is ColorBar(w, h, lo, hi, unit, cmap) with lo, hi from
// [MapRange] and cmap Sequential when lo = 0, Diverging otherwise.
//
// The picture has a white background and is exactly w×h; its text size
// follows the bar's size (a fifth of the height of a horizontal bar, 11 to 22
// pixels), so draw it at the size it will be seen. It panics, naming
// the problem, when w or h is too small to hold a bar and its labels (40×40
// at least, 200 pixels along the bar for a horizontal one), when min ≥ max or
// either is not finite, or when cmap is nil.
func ColorBar(w, h int, min, max float64, unit string, cmap func(float64) color.NRGBA) *image.NRGBA {
	if cmap == nil {
		panic("viz: ColorBar: nil colour map")
	}
	if math.IsNaN(min) || math.IsNaN(max) || math.IsInf(min, 0) || math.IsInf(max, 0) || !(min < max) {
		panic(fmt.Sprintf("viz: ColorBar: range %v..%v is empty or not finite", min, max))
	}
	horizontal := w >= h
	if w < 40 || h < 40 || (horizontal && w < 200) || (!horizontal && h < 200) {
		panic(fmt.Sprintf("viz: ColorBar: %d×%d is too small for a bar with labels", w, h))
	}
	img := mustCanvas("colour bar", w, h, Light)
	// Text grows with the bar: a fifth of the height of a horizontal bar, a
	// sixth of the width of a vertical one, 11 to 22 px, Go Regular.
	size := float64(h) / 5
	if !horizontal {
		size = float64(w) / 6
	}
	barText := TextStyle{Size: math.Round(math.Max(11, math.Min(22, size)))}
	norm := func(v float64) float64 {
		if min < 0 {
			return v / math.Max(-min, max)
		}
		return (v - min) / (max - min)
	}
	_, lineH := TextSize("0", barText)
	along := w
	if !horizontal {
		along = h
	}
	// A tick every 90 pixels or so, fewer when the inner labels would not
	// all fit with a line height of space between them: then every other
	// one would drop out, unevenly (longer negative labels first).
	marks := barTicks(min, max, clampInt(along/90, 2, 10))
	for target := clampInt(along/90, 2, 10) - 1; target >= 1 && !innerFit(marks, along, lineH, horizontal, barText); target-- {
		marks = barTicks(min, max, target)
	}
	edge := color.NRGBA{0x8a, 0x90, 0x96, 0xff} // the bar's outline and ticks
	const tick = 5

	if horizontal {
		// Leave room for half an end label at each side.
		wMin, _ := TextSize(marks[0].label, barText)
		wMax, _ := TextSize(marks[len(marks)-1].label, barText)
		x0 := 1 + wMin/2
		x1 := w - 1 - wMax/2
		barH := h - 2*lineH - tick - 8
		if unit == "" {
			barH += lineH
		}
		barH = clampInt(barH, 8, 28)
		y0, y1 := 1, 1+barH
		for x := x0; x < x1; x++ {
			c := cmap(norm(min + (max-min)*(float64(x-x0)+0.5)/float64(x1-x0)))
			fill(img, image.Rect(x, y0, x+1, y1), c)
		}
		frame(img, image.Rect(x0-1, y0-1, x1+1, y1+1), 1, edge, false)
		pos := func(m barMark) int { return x0 + int(math.Round(m.t*float64(x1-x0-1))) }
		// Ends first; an inner label that would touch one is left out.
		drawn := []image.Rectangle{}
		place := func(m barMark) {
			x := pos(m)
			lw, _ := TextSize(m.label, barText)
			// At least one line height of space between two labels.
			r := image.Rect(x-lw/2-lineH/2, 0, x+lw/2+lineH/2, 1)
			for _, d := range drawn {
				if r.Overlaps(d) {
					return
				}
			}
			drawn = append(drawn, r)
			fill(img, image.Rect(x, y1+1, x+1, y1+1+tick), edge)
			drawTextCentered(img, x, y1+tick+2, m.label, barText)
		}
		place(marks[0])
		place(marks[len(marks)-1])
		for _, m := range marks[1 : len(marks)-1] {
			place(m)
		}
		if unit != "" {
			drawTextCentered(img, w/2, y1+tick+2+lineH+2, fitText(unit, w-2, barText), barText)
		}
		return img
	}

	// Vertical: unit on top, bar on the left, labels to its right.
	top := 1 + lineH/2
	if unit != "" {
		DrawText(img, 1, 1, fitText(unit, w-2, barText), barText)
		top += lineH + 4
	}
	bottom := h - 1 - lineH/2
	wLab := 0
	for _, m := range marks {
		lw, _ := TextSize(m.label, barText)
		wLab = maxInt(wLab, lw)
	}
	barW := clampInt(w-wLab-tick-6, 8, 28)
	x0, x1 := 1, 1+barW
	for y := top; y < bottom; y++ {
		c := cmap(norm(max - (max-min)*(float64(y-top)+0.5)/float64(bottom-top)))
		fill(img, image.Rect(x0, y, x1, y+1), c)
	}
	frame(img, image.Rect(x0-1, top-1, x1+1, bottom+1), 1, edge, false)
	drawn := []image.Rectangle{}
	place := func(m barMark) {
		y := bottom - 1 - int(math.Round(m.t*float64(bottom-top-1)))
		r := image.Rect(0, y-lineH/2-2, 1, y+lineH/2+2)
		for _, d := range drawn {
			if r.Overlaps(d) {
				return
			}
		}
		drawn = append(drawn, r)
		fill(img, image.Rect(x1+1, y, x1+1+tick, y+1), edge)
		DrawText(img, x1+tick+3, y-lineH/2, m.label, barText)
	}
	place(marks[0])
	place(marks[len(marks)-1])
	for _, m := range marks[1 : len(marks)-1] {
		place(m)
	}
	return img
}

// barMark is one labelled value of a colour bar: t is its position along
// the bar in [0, 1].
type barMark struct {
	v, t  float64
	label string
}

// barTicks returns the marks of a bar from min to max: the two ends and,
// between them, round values ({1, 2, 5}·10^k steps, about target of them).
// Inner values closer than one step to an end are dropped, so that an end
// label never sits against a round one ("−0.69 −0.6"); zero, the centre of
// a diverging bar, is kept unless closer than a quarter step. Every
// label of one bar has one number format, so that they read as one scale:
// fixed-point when the bar's magnitude max(|min|, |max|) lies in [1e-3,
// 1e5), with decimals enough for the step and for 3 significant digits of
// the magnitude (the ends are the scale, the most important numbers of a
// legend); otherwise scientific ("-5.23e-6", "2e-6"), 3 significant digits
// at the ends.
func barTicks(min, max float64, target int) []barMark {
	at := func(v float64) float64 { return (v - min) / (max - min) }
	step := niceStep(max-min, target)
	mag := math.Max(math.Abs(min), math.Abs(max))
	var end, inner func(float64) string
	if mag >= 1e5 || mag < 1e-3 {
		end = func(v float64) string { return sciLabel(v, 2) }
		inner = func(v float64) string { return sciLabel(v, 1) }
	} else {
		dec := stepDecimals(step)
		endDec := dec
		if d := 2 - int(math.Floor(math.Log10(mag))); d > endDec {
			endDec = d
		}
		end = func(v float64) string { return formatFixed(v, endDec) }
		inner = func(v float64) string { return formatFixed(v, dec) }
	}
	marks := []barMark{{min, 0, end(min)}}
	first := math.Ceil(min/step - 1e-9)
	for i := 0.0; ; i++ {
		v := (first + i) * step
		if v >= max {
			break
		}
		zero := math.Abs(v) < step*1e-9 // the centre of a diverging bar: kept unless it touches an end
		if (v-min < step || max-v < step) && !(zero && v-min >= step/4 && max-v >= step/4) {
			continue
		}
		if math.Abs(v) < step*1e-9 {
			v = 0
		}
		marks = append(marks, barMark{v, at(v), inner(v)})
	}
	return append(marks, barMark{max, 1, end(max)})
}

// sciLabel formats v in short scientific notation with at most decimals
// digits after the mantissa's point, trailing zeros dropped: "5.23e-6",
// "2e-6", "1.5e6"; 0 is "0".
func sciLabel(v float64, decimals int) string {
	if v == 0 {
		return "0"
	}
	s := strconv.FormatFloat(v, 'e', decimals, 64)
	mant, exp, _ := strings.Cut(s, "e")
	if strings.Contains(mant, ".") {
		mant = strings.TrimRight(strings.TrimRight(mant, "0"), ".")
	}
	sign := ""
	if exp[0] == '-' {
		sign = "-"
	}
	exp = strings.TrimLeft(exp[1:], "0")
	if exp == "" {
		exp = "0"
	}
	return mant + "e" + sign + exp
}

func clampInt(v, lo, hi int) int {
	if v < lo {
		return lo
	}
	if v > hi {
		return hi
	}
	return v
}

func maxInt(a, b int) int {
	if a > b {
		return a
	}
	return b
}

// innerFit reports whether the inner labels of marks fit along a bar of
// the given length with at least space pixels between neighbours.
func innerFit(marks []barMark, along, space int, horizontal bool, st TextStyle) bool {
	if len(marks) < 4 {
		return true
	}
	length := float64(along)
	if horizontal { // the bar leaves half an end label free at each side
		w0, _ := TextSize(marks[0].label, st)
		w1, _ := TextSize(marks[len(marks)-1].label, st)
		length -= float64(2 + (w0+w1)/2)
	} else {
		length -= float64(3 * space) // the unit above, half a label at each end
	}
	prevEnd := math.Inf(-1)
	for _, m := range marks[1 : len(marks)-1] {
		size, _ := TextSize(m.label, st)
		if !horizontal {
			_, size = TextSize(m.label, st)
		}
		c := m.t * length
		if c-float64(size)/2-float64(space) < prevEnd {
			return false
		}
		prevEnd = c + float64(size)/2
	}
	return true
}
