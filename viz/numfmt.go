package viz

import (
	"math"
	"strconv"
	"strings"
)

// formatFixed formats v with the given number of decimals and drops trailing
// zeros ("0.250" -> "0.25", "2.00" -> "2"); "-0" becomes "0".
func formatFixed(v float64, decimals int) string {
	s := strconv.FormatFloat(v, 'f', decimals, 64)
	if strings.Contains(s, ".") {
		s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	}
	if s == "-0" {
		s = "0"
	}
	return s
}

// trimExp formats v in short scientific notation: "1.2e-4", "3e+06" -> "3e6".
func trimExp(v float64) string {
	if v == 0 {
		return "0e0"
	}
	return sciLabel(v, 1)
}

// niceStep returns a step of the form {1, 2, 5}·10^k close to span/target,
// the usual choice for axis ticks (common practice, e.g. Heckbert, "Nice
// numbers for graph labels", Graphics Gems, 1990).
func niceStep(span float64, target int) float64 {
	if !(span > 0) || target < 1 {
		return 1
	}
	raw := span / float64(target)
	p := math.Pow(10, math.Floor(math.Log10(raw)))
	switch f := raw / p; {
	case f < 1.5:
		return p
	case f < 3.5:
		return 2 * p
	case f < 7.5:
		return 5 * p
	}
	return 10 * p
}

// stepDecimals is the number of decimals that shows every multiple of step.
func stepDecimals(step float64) int {
	d := 0
	for d < 12 && math.Abs(step*math.Pow(10, float64(d))-math.Round(step*math.Pow(10, float64(d)))) > 1e-9 {
		d++
	}
	return d
}

// formatProbability prints a probability for a caption: three decimals
// ("0.62", "0.213"), more when three would round a value below 1 up to "1"
// (0.9995 -> "0.9995", up to six decimals, then "> 0.999999"), and "< 0.001"
// for values above 0 that three decimals would show as 0 (the report's
// "<0.1%" threshold). Exactly 0 and 1 print as "0" and "1"; NaN as "?".
func formatProbability(p float64) string {
	switch {
	case math.IsNaN(p):
		return "?"
	case p > 0 && p < 0.001:
		return "< 0.001"
	case p > 0 && p < 1:
		for d := 3; d <= 6; d++ {
			if s := formatFixed(p, d); s != "1" {
				return s
			}
		}
		return "> 0.999999"
	}
	return formatFixed(p, 3)
}
