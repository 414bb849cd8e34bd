package gui

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// percent renders a probability or fraction as a percentage with one
// decimal, "<0.1 %" for tiny non-zero values.
func percent(p float64) string {
	if p > 0 && p < 0.0005 {
		return "<0.1 %"
	}
	return fmt.Sprintf("%.1f %%", 100*p)
}

// number renders a measured value with three significant digits, values
// under 0.01 in exponent form, so that table cells stay short.
func number(v float64) string {
	if v != 0 && math.Abs(v) < 0.01 {
		return strconv.FormatFloat(v, 'e', 1, 64)
	}
	return strconv.FormatFloat(v, 'g', 3, 64)
}

// wrapText breaks s into lines of at most width runes, at spaces where it can
// (long paths are cut anywhere), keeping the line breaks s already has. Dialog
// labels use it: a wrapping label inside a dialog has no width to wrap to.
func wrapText(s string, width int) string {
	var out []string
	for _, para := range strings.Split(s, "\n") {
		line := []rune{}
		for _, word := range strings.Fields(para) {
			w := []rune(word)
			for len(w) > width {
				if len(line) > 0 {
					out = append(out, string(line))
					line = line[:0]
				}
				out = append(out, string(w[:width]))
				w = w[width:]
			}
			switch {
			case len(line) == 0:
				line = append(line, w...)
			case len(line)+1+len(w) <= width:
				line = append(append(line, ' '), w...)
			default:
				out = append(out, string(line))
				line = append([]rune{}, w...)
			}
		}
		out = append(out, string(line))
	}
	return strings.Join(out, "\n")
}
