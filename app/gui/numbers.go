package gui

import (
	"fmt"
	"math"
	"strconv"
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
