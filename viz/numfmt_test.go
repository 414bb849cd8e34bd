package viz

import (
	"math"
	"testing"
)

func TestFormatProbability(t *testing.T) {
	// Expected strings written by hand from the rule in the doc comment: three
	// decimals unless they would show a value strictly between 0 and 1 as 0
	// or 1 (the captions used to say "p = 1" for 0.9995 and "p = 0" for 0.0002).
	cases := []struct {
		p    float64
		want string
	}{
		{0.62, "0.62"},
		{0.21, "0.21"},
		{0.2134, "0.213"},
		{0.9995, "0.9995"},
		{0.99949, "0.999"},
		{0.99996, "0.99996"}, // 4 decimals round to 1.0000, 5 do not
		{0.999999999, "> 0.999999"},
		{1, "1"},
		{0.0002, "< 0.001"},
		{0.001, "0.001"},
		{0, "0"},
		{math.NaN(), "?"},
	}
	for _, c := range cases {
		if got := formatProbability(c.p); got != c.want {
			t.Errorf("formatProbability(%v) = %q, want %q", c.p, got, c.want)
		}
	}
}
