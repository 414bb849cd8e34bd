package viz

import (
	"image/color"
	"math"
	"regexp"
	"strconv"
	"strings"
	"testing"
)

func TestNiceStep(t *testing.T) {
	// Ticks at {1, 2, 5}·10^k (common practice for axis labels).
	for _, c := range []struct {
		span   float64
		target int
		want   float64
	}{
		{0.8, 8, 0.1}, {1, 5, 0.2}, {7, 5, 1}, {30, 4, 10}, {0.003, 3, 0.001}, {250, 5, 50},
	} {
		if got := niceStep(c.span, c.target); math.Abs(got-c.want) > 1e-12*c.want {
			t.Errorf("niceStep(%v, %d) = %v, want %v", c.span, c.target, got, c.want)
		}
	}
	for _, c := range []struct {
		step float64
		want int
	}{{0.1, 1}, {0.25, 2}, {5, 0}, {0.001, 3}} {
		if got := stepDecimals(c.step); got != c.want {
			t.Errorf("stepDecimals(%v) = %d, want %d", c.step, got, c.want)
		}
	}
	for _, c := range []struct {
		v    float64
		dec  int
		want string
	}{{0.25, 2, "0.25"}, {-0.0000001, 2, "0"}, {2, 2, "2"}, {-0.3, 1, "-0.3"}} {
		if got := formatFixed(c.v, c.dec); got != c.want {
			t.Errorf("formatFixed(%v, %d) = %q, want %q", c.v, c.dec, got, c.want)
		}
	}
	if got := trimExp(0.000123); got != "1.2e-4" {
		t.Errorf("trimExp = %q", got)
	}
}

func TestColorBarHorizontal(t *testing.T) {
	// The bar runs from min to max left to right: its first column is the
	// colour at (about) −1 of the diverging map, its last at +1, and the
	// colour in the middle is the neutral (within one pixel column).
	img := ColorBar(300, 60, -2, 2, "drop in probability", Diverging)
	if b := img.Bounds(); b.Dx() != 300 || b.Dy() != 60 {
		t.Fatalf("bounds %v, want 300×60", b)
	}
	y := 5
	var bar []color.NRGBA
	for x := range 300 {
		c := img.NRGBAAt(x, y)
		if c != Light && c != (color.NRGBA{0x8a, 0x90, 0x96, 0xff}) {
			bar = append(bar, c)
		}
	}
	if len(bar) < 200 {
		t.Fatalf("bar only %d pixels long", len(bar))
	}
	if d := deltaE(bar[0], Diverging(-1)); d > 3 {
		t.Errorf("left end %v is ΔE %.1f from Diverging(-1)", bar[0], d)
	}
	if d := deltaE(bar[len(bar)-1], Diverging(1)); d > 3 {
		t.Errorf("right end %v is ΔE %.1f from Diverging(1)", bar[len(bar)-1], d)
	}
	// Pixels sample their centres, so with an even length none sits exactly
	// on 0: the two middle ones are within ΔE 1 of the neutral.
	for _, c := range bar[len(bar)/2-1 : len(bar)/2+1] {
		if d := deltaE(c, Diverging(0)); d > 1 {
			t.Errorf("middle %v is ΔE %.1f from the neutral %v", c, d, Diverging(0))
		}
	}
}

func TestColorBarSequentialVertical(t *testing.T) {
	// A vertical bar for a non-negative range runs bottom (min) to top (max)
	// and gives cmap (v − min)/(max − min).
	img := ColorBar(80, 260, 0, 5, "activation", Sequential)
	inBar := func(y int) bool {
		c := img.NRGBAAt(8, y)
		return c != Light && c != (color.NRGBA{0x8a, 0x90, 0x96, 0xff})
	}
	y0, y1 := 130, 130 // the middle row is in the bar; walk to its ends
	for inBar(y0 - 1) {
		y0--
	}
	for inBar(y1 + 1) {
		y1++
	}
	if y1-y0 < 150 {
		t.Fatalf("bar rows %d..%d, too short", y0, y1)
	}
	top, bottom := img.NRGBAAt(8, y0), img.NRGBAAt(8, y1)
	if d := deltaE(top, Sequential(1)); d > 3 {
		t.Errorf("top %v is ΔE %.1f from Sequential(1)", top, d)
	}
	if d := deltaE(bottom, Sequential(0)); d > 3 {
		t.Errorf("bottom %v is ΔE %.1f from Sequential(0)", bottom, d)
	}
}

func TestColorBarPanics(t *testing.T) {
	for _, c := range []struct {
		name     string
		w, h     int
		min, max float64
		cmap     func(float64) color.NRGBA
		want     string
	}{
		{"small", 100, 20, 0, 1, Sequential, "too small"},
		{"empty range", 300, 60, 1, 1, Sequential, "empty or not finite"},
		{"nan", 300, 60, math.NaN(), 1, Sequential, "empty or not finite"},
		{"nil map", 300, 60, 0, 1, nil, "nil colour map"},
	} {
		t.Run(c.name, func(t *testing.T) {
			func() {
				defer func() {
					r := recover()
					if s, _ := r.(string); !strings.Contains(s, c.want) {
						t.Errorf("%s: panic %v, want one containing %q", c.name, r, c.want)
					}
				}()
				ColorBar(c.w, c.h, c.min, c.max, "u", c.cmap)
			}()
		})
	}
}

func TestTextMetrics(t *testing.T) {
	// The bitmap face of golang.org/x/image/font/basicfont is 7 pixels per
	// character, 13 pixels per line (its Face7x13 definition).
	if w, h := TextSize("abc", TextStyle{}); w != 21 || h != 13 {
		t.Errorf("bitmap text size %d×%d, want 21×13", w, h)
	}
	// Tracking adds its pixels after every character.
	if w, _ := TextSize("abc", TextStyle{Tracking: 2}); w != 27 {
		t.Errorf("tracked width %d, want 27", w)
	}
	// DrawText draws ink only inside the returned width and the line height.
	img := mustCanvas("t", 60, 20, Light)
	w := DrawText(img, 5, 3, "Hi", TextStyle{Size: 14})
	inked := 0
	for y := range 20 {
		for x := range 60 {
			if img.NRGBAAt(x, y) != Light {
				inked++
				if x < 5 || x >= 5+w+1 {
					t.Fatalf("ink at x=%d outside 5..%d", x, 5+w)
				}
			}
		}
	}
	if inked == 0 {
		t.Error("DrawText drew nothing")
	}
	if got := wrapText("one two three four", 60, TextStyle{}); strings.Join(got, "|") != "one two|three|four" { // 7 px per character: 49, 35, 28 px
		t.Errorf("wrap %q", got)
	}
	if got := fitText("abcdefghij", 49, TextStyle{}); got != "abcd..." {
		t.Errorf("fit %q, want abcd...", got)
	}
}

// TestBarTicksOneFormat: every label of one bar is written in one number
// format, fixed-point or scientific, never a mix (a bar from −5.2e-6 to
// 5.2e-6 once read "−0.000002" beside "5.2e-6"), and each label reads back
// as its value to within its last shown digit (common practice for axis
// labels; no published source).
func TestBarTicksOneFormat(t *testing.T) {
	fixed := regexp.MustCompile(`^-?[0-9]+(\.[0-9]+)?$`)
	sci := regexp.MustCompile(`^(0|-?[0-9](\.[0-9]+)?e-?[0-9]+)$`)
	for _, r := range [][2]float64{
		{-5.2e-6, 5.2e-6}, {-0.00031, 0.00031}, {0, 2.7e-7}, // tiny
		{-0.37, 0.37}, {0, 1}, {-1.234, 5.678}, {0.0123, 5.67}, {-12.5, 12.5}, // medium
		{-3.4e6, 3.4e6}, {0, 1.25e9}, {99999, 250000}, // large
	} {
		marks := barTicks(r[0], r[1], 6)
		if len(marks) < 3 {
			t.Errorf("%v: only %d marks", r, len(marks))
		}
		var nFixed, nSci int
		for _, m := range marks {
			isF, isS := fixed.MatchString(m.label), sci.MatchString(m.label) && m.label != "0"
			switch {
			case m.label == "0": // both formats write zero so
			case isS:
				nSci++
			case isF:
				nFixed++
			default:
				t.Errorf("%v: label %q is neither format", r, m.label)
			}
			v, err := strconv.ParseFloat(m.label, 64)
			if err != nil {
				t.Errorf("%v: label %q does not parse", r, m.label)
				continue
			}
			// The last shown digit's place: 10^-decimals of the mantissa.
			tol := 0.5 * lastDigit(m.label)
			if math.Abs(v-m.v) > tol*(1+1e-9) {
				t.Errorf("%v: label %q for %g (off by more than %g)", r, m.label, m.v, tol)
			}
		}
		if nFixed > 0 && nSci > 0 {
			var labels []string
			for _, m := range marks {
				labels = append(labels, m.label)
			}
			t.Errorf("%v: labels mix fixed and scientific: %q", r, labels)
		}
		// The bar draws with them (sizes as the occlusion picture's).
		ColorBar(480, 56, r[0], r[1], "drop", Diverging)
	}
}

// lastDigit is the value of one unit in the last shown digit of a label.
func lastDigit(label string) float64 {
	mant, exp, isSci := strings.Cut(label, "e")
	d := 0
	if _, frac, ok := strings.Cut(mant, "."); ok {
		d = len(frac)
	}
	unit := math.Pow(10, -float64(d))
	if isSci {
		e, _ := strconv.Atoi(exp)
		unit *= math.Pow(10, float64(e))
	}
	return unit
}

// TestBarTicksKeepClearOfEnds: the occlusion bar of the demo's coil-spring
// image ran −0.69…0.69 with step 0.2 and printed "−0.69 −0.6" side by side.
// Inner ticks now keep at least one step from each end: −0.6 and 0.6
// (0.09 from the ends, under a step of 0.2) go, −0.4 … 0.4 stay; with a
// step of 0.1, −0.6 (0.09 from the end) goes too and −0.5 stays.
func TestBarTicksKeepClearOfEnds(t *testing.T) {
	var got []string
	for _, m := range barTicks(-0.69, 0.69, 7) {
		got = append(got, m.label)
	}
	want := []string{"-0.69", "-0.4", "-0.2", "0", "0.2", "0.4", "0.69"}
	if strings.Join(got, " ") != strings.Join(want, " ") {
		t.Errorf("ticks %v, want %v", got, want)
	}
	got = got[:0]
	for _, m := range barTicks(-0.69, 0.69, 14) {
		got = append(got, m.label)
	}
	if got[1] != "-0.5" || got[len(got)-2] != "0.5" {
		t.Errorf("ticks at step 0.1: %v, want -0.5 and 0.5 next to the ends", got)
	}
}
