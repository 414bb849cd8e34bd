package core

import "testing"

func TestClassIndex(t *testing.T) {
	labels := []string{"washer", "Hex nut", "hex NUT", "7"}
	for _, c := range []struct {
		in   string
		n    int
		want int
		ok   bool
	}{
		{"washer", 4, 0, true},
		{" washer ", 4, 0, true},
		{"WASHER", 4, 0, true},   // one case-insensitive match
		{"hex nut", 4, 0, false}, // two case-insensitive matches: ambiguous
		{"Hex nut", 4, 1, true},  // exact match wins
		{"7", 4, 3, true},        // a label that looks like a number is a label first
		{"2", 4, 2, true},        // otherwise a number is an index
		{"4", 4, 0, false},       // out of range
		{"-1", 4, 0, false},      // negative
		{"bolt", 4, 0, false},    // unknown
		{"12", 0, 12, true},      // number of classes unknown: any index ≥ 0
	} {
		got, err := classIndex(c.in, labels, c.n)
		if c.ok != (err == nil) || c.ok && got != c.want {
			t.Errorf("classIndex(%q) = %d, %v; want %d, ok %v", c.in, got, err, c.want, c.ok)
		}
		if err != nil && !IsInput(err) {
			t.Errorf("classIndex(%q): %v is not an input error", c.in, err)
		}
	}
}
