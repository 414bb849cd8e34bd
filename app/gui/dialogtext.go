package gui

import "strings"

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
