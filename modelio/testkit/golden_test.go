package testkit

import (
	"image"
	"image/color"
	"strings"
	"testing"
)

// Compare: equal pictures match, a channel off by more than the tolerance
// does not, and different sizes never do (values by hand).
func TestCompare(t *testing.T) {
	a := image.NewNRGBA(image.Rect(0, 0, 2, 1))
	a.SetNRGBA(1, 0, color.NRGBA{100, 100, 100, 255})
	b := image.NewNRGBA(image.Rect(0, 0, 2, 1))
	b.SetNRGBA(1, 0, color.NRGBA{102, 100, 100, 255})
	for _, c := range []struct {
		name string
		want image.Image
		tol  int
		ok   bool
	}{
		{"same", b, 0, true},
		{"two levels, tolerance 2", a, 2, true},
		{"two levels, tolerance 1", a, 1, false},
		{"other size", image.NewNRGBA(image.Rect(0, 0, 1, 1)), 255, false},
	} {
		t.Run(c.name, func(t *testing.T) {
			diff := Compare(c.want, b, c.tol)
			if (diff == "") != c.ok {
				t.Errorf("Compare = %q, want match %v", diff, c.ok)
			}
			if !c.ok && c.tol == 1 && !strings.Contains(diff, "pixel (1,0)") {
				t.Errorf("Compare = %q does not name pixel (1,0)", diff)
			}
		})
	}
}
