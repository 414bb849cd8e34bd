package core

import (
	"strconv"
	"strings"
)

// classIndex resolves a class name or number; n is the number of classes
// (0 = unknown).
func classIndex(s string, labels []string, n int) (int, error) {
	s = strings.TrimSpace(s)
	for i, l := range labels {
		if l == s {
			return i, nil
		}
	}
	var folded []int
	for i, l := range labels {
		if strings.EqualFold(l, s) {
			folded = append(folded, i)
		}
	}
	if len(folded) == 1 {
		return folded[0], nil
	}
	if i, err := strconv.Atoi(s); err == nil {
		if i < 0 || (n > 0 && i >= n) {
			return 0, inputf("", "class %d is outside 0…%d", i, n-1)
		}
		return i, nil
	}
	if len(labels) == 0 {
		return 0, inputf("", "class %q: the model has no labels, give the class number", s)
	}
	return 0, inputf("", "no class %q (classes: %s)", s, strings.Join(labels, ", "))
}
