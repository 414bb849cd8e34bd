package gui

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// count renders a non-negative count compactly for tables: 950, 12.3 k,
// 4.56 M, 1.20 G; "?" when negative (unknown).
func count(n int64) string {
	switch {
	case n < 0:
		return "?"
	case n < 1000:
		return strconv.FormatInt(n, 10)
	}
	v := float64(n)
	for _, u := range []string{" k", " M", " G", " T"} {
		v /= 1000
		if v < 1000 || u == " T" {
			return sig3(v) + u
		}
	}
	return strconv.FormatInt(n, 10)
}

// memSize renders a size in binary units: 512 B, 12.0 KiB, 3.40 MiB.
func memSize(n int64) string {
	switch {
	case n < 0:
		return "?"
	case n < 1024:
		return strconv.FormatInt(n, 10) + " B"
	}
	v := float64(n)
	for _, u := range []string{" KiB", " MiB", " GiB", " TiB"} {
		v /= 1024
		if v < 1024 || u == " TiB" {
			return sig3(v) + u
		}
	}
	return strconv.FormatInt(n, 10) + " B"
}

// sig3 prints v ≥ 1 with three significant digits.
func sig3(v float64) string {
	switch {
	case v >= 100:
		return strconv.FormatFloat(math.Round(v), 'f', 0, 64)
	case v >= 10:
		return strconv.FormatFloat(v, 'f', 1, 64)
	}
	return strconv.FormatFloat(v, 'f', 2, 64)
}

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
