package viz

import (
	"fmt"
	"image/color"
	"math"
	"testing"
)

// The checks below measure the colour maps with the CIE formulas, which the
// maps' construction (OKLab) does not use, so they are an outside judge.

// srgbToLinear is the sRGB decoding of IEC 61966-2-1:1999, section 5.2.
func srgbToLinear(v uint8) float64 {
	c := float64(v) / 255
	if c <= 0.04045 {
		return c / 12.92
	}
	return math.Pow((c+0.055)/1.055, 2.4)
}

// lab converts an sRGB colour to CIELAB (CIE 15:2004), D65 white. XYZ from
// linear RGB with the matrix of IEC 61966-2-1 (rounded to 4 decimals there);
// white point Xn = 0.9505, Yn = 1, Zn = 1.0890 (the matrix's row sums).
func lab(c color.NRGBA) (L, a, b float64) {
	r, g, bl := srgbToLinear(c.R), srgbToLinear(c.G), srgbToLinear(c.B)
	return labFromLinear(r, g, bl)
}

func labFromLinear(r, g, bl float64) (L, a, b float64) {
	x := 0.4124*r + 0.3576*g + 0.1805*bl
	y := 0.2126*r + 0.7152*g + 0.0722*bl
	z := 0.0193*r + 0.1192*g + 0.9505*bl
	f := func(t float64) float64 {
		const d = 6.0 / 29
		if t > d*d*d {
			return math.Cbrt(t)
		}
		return t/(3*d*d) + 4.0/29
	}
	fx, fy, fz := f(x/0.9505), f(y/1.0), f(z/1.0890)
	return 116*fy - 16, 500 * (fx - fy), 200 * (fy - fz)
}

// deltaE is the CIE 1976 colour difference ΔE*ab.
func deltaE(p, q color.NRGBA) float64 {
	l1, a1, b1 := lab(p)
	l2, a2, b2 := lab(q)
	return math.Sqrt((l1-l2)*(l1-l2) + (a1-a2)*(a1-a2) + (b1-b2)*(b1-b2))
}

func lstar(c color.NRGBA) float64 { l, _, _ := lab(c); return l }

func TestLabReference(t *testing.T) {
	// CIE L* of sRGB white is 100, of black 0, of mid-grey #777777 about
	// 50.0 (common practice: #777777 is the usual "L* = 50" grey; value from
	// memory, tolerance 0.3).
	for _, c := range []struct {
		in   color.NRGBA
		want float64
		tol  float64
	}{
		{color.NRGBA{255, 255, 255, 255}, 100, 0.05},
		{color.NRGBA{0, 0, 0, 255}, 0, 1e-9},
		{color.NRGBA{0x77, 0x77, 0x77, 255}, 50.0, 0.3},
	} {
		if got := lstar(c.in); math.Abs(got-c.want) > c.tol {
			t.Errorf("L*(%v) = %.3f, want %.1f ± %v", c.in, got, c.want, c.tol)
		}
	}
}

func TestSequentialLightnessMonotonic(t *testing.T) {
	// A perceptually uniform sequential map has monotonically increasing
	// lightness (van der Walt & Smith, "A better default colormap for
	// Matplotlib", SciPy 2015: the design goal of viridis). On every 8-bit
	// step L* never decreases (neighbouring entries may round to the same
	// colour); over steps of 1/16 it increases by at least 2.
	prev := -1.0
	for i := range 256 {
		l := lstar(Sequential(float64(i) / 255))
		if l < prev {
			t.Fatalf("L* decreases at step %d: %.3f after %.3f", i, l, prev)
		}
		prev = l
	}
	for i := range 16 {
		if d := lstar(Sequential(float64(i+1)/16)) - lstar(Sequential(float64(i)/16)); d < 2 {
			t.Errorf("L* rises only %.2f from %d/16 to %d/16", d, i, i+1)
		}
	}
}

func TestSequentialUniformSteps(t *testing.T) {
	// Equal steps in v should look equal: the CIEDE2000 differences of 16
	// equal steps stay within a factor 1.5 of each other (our own tolerance:
	// the map is built uniform in OKLab, which CIEDE2000 only approximately
	// agrees with).
	var steps []float64
	for i := range 16 {
		steps = append(steps, de00(Sequential(float64(i)/16), Sequential(float64(i+1)/16)))
	}
	lo, hi := math.Inf(1), 0.0
	for _, s := range steps {
		lo, hi = math.Min(lo, s), math.Max(hi, s)
	}
	if hi/lo > 1.5 {
		t.Errorf("ΔE00 of equal steps ranges %.2f..%.2f (ratio %.2f > 1.5): %v", lo, hi, hi/lo, steps)
	}
}

func TestMapsReadableOnBothBackgrounds(t *testing.T) {
	// Neither map ends in pure black or pure white, so that both ends stand
	// apart from dark and light backgrounds: L* of every colour within
	// 20..97 (our own requirement; ΔL* ≥ 3 from white and ≥ 20 from black).
	for i := range 256 {
		for _, c := range []color.NRGBA{Sequential(float64(i) / 255), Diverging(float64(i)/127.5 - 1)} {
			if l := lstar(c); l < 20 || l > 97 {
				t.Fatalf("colour %v has L* %.1f outside 20..97", c, l)
			}
		}
	}
}

func TestDivergingNeutralAtZero(t *testing.T) {
	// Zero is achromatic (R = G = B) and light (L* ≥ 90).
	c := Diverging(0)
	if c.R != c.G || c.G != c.B || c.A != 255 {
		t.Errorf("Diverging(0) = %v, want an opaque grey", c)
	}
	if l := lstar(c); l < 90 {
		t.Errorf("L*(Diverging(0)) = %.1f, want ≥ 90", l)
	}
}

func TestDivergingSymmetric(t *testing.T) {
	// Both halves move away from the neutral at the same relative pace: the
	// CIEDE2000 difference from the neutral at ±v, as a fraction of that at
	// ±1, agrees within 0.1 (our own tolerance: the halves are straight lines
	// in OKLab, where the paces agree exactly; CIEDE2000 weighs the blue and
	// the orange half differently by up to about 0.07). And the sides point
	// opposite ways on the blue–yellow axis (b* < 0 below zero, > 0 above).
	n := Diverging(0)
	dNeg, dPos := de00(n, Diverging(-1)), de00(n, Diverging(1))
	for i := 1; i <= 20; i++ {
		v := float64(i) / 20
		fn := de00(n, Diverging(-v)) / dNeg
		fp := de00(n, Diverging(v)) / dPos
		if math.Abs(fn-fp) > 0.1 {
			t.Errorf("v=%.2f: relative distance from neutral %.3f below zero, %.3f above", v, fn, fp)
		}
		_, _, bn := lab(Diverging(-v))
		_, _, bp := lab(Diverging(v))
		if !(bn < 0 && bp > 0) {
			t.Errorf("v=%.2f: b* is %.1f below zero and %.1f above, want negative and positive", v, bn, bp)
		}
	}
	// Neither side dwarfs the other: end distances within a factor 1.3.
	if r := math.Max(dNeg, dPos) / math.Min(dNeg, dPos); r > 1.3 {
		t.Errorf("end distances from neutral %.1f (negative) and %.1f (positive): ratio %.2f > 1.3", dNeg, dPos, r)
	}
	// The table is symmetric in |v|: the same number of steps from the centre.
	if Diverging(-0.3) == Diverging(0.3) || Diverging(-1e-9) != Diverging(0) || Diverging(2) != Diverging(1) || Diverging(-2) != Diverging(-1) {
		t.Error("clamping or centre of Diverging is off")
	}
}

func TestDivergingEndsDifferInLightness(t *testing.T) {
	// The ends must differ in lightness too (readable in grey-scale print and
	// for blue–yellow deficiencies): |ΔL*| ≥ 8 (our own requirement).
	if d := math.Abs(lstar(Diverging(-1)) - lstar(Diverging(1))); d < 8 {
		t.Errorf("|ΔL*| of the ends = %.1f, want ≥ 8", d)
	}
}

// machado holds the simulation matrices for full dichromacy (severity 1.0)
// of Machado, Oliveira & Fernandes, "A physiologically-based model for
// simulation of color vision deficiency", IEEE TVCG 15(6), 2009, applied to
// linear RGB. Values from memory; each row sums to 1 (white stays white),
// which the test checks as a guard against a mistyped digit.
var machado = map[string][3][3]float64{
	"protanopia": {
		{0.152286, 1.052583, -0.204868},
		{0.114503, 0.786281, 0.099216},
		{-0.003882, -0.048116, 1.051998}},
	"deuteranopia": {
		{0.367322, 0.860646, -0.227968},
		{0.280085, 0.672501, 0.047413},
		{-0.011820, 0.042940, 0.968881}},
	"tritanopia": {
		{1.255528, -0.076749, -0.178779},
		{-0.078411, 0.930809, 0.147602},
		{0.004733, 0.691367, 0.303900}},
}

func simulate(m [3][3]float64, c color.NRGBA) (L, a, b float64) {
	in := [3]float64{srgbToLinear(c.R), srgbToLinear(c.G), srgbToLinear(c.B)}
	var out [3]float64
	for i := range 3 {
		for j := range 3 {
			out[i] += m[i][j] * in[j]
		}
		out[i] = math.Max(0, math.Min(1, out[i]))
	}
	return labFromLinear(out[0], out[1], out[2])
}

// cvdProblems lists where the diverging map f fails for dichromacy m: +v
// and −v must stay clearly apart (ΔE*ab ≥ 25·v, so ≥ 25 at the ends) and,
// for |v| ≥ 0.5, each must stay ΔE*ab ≥ 10 from the neutral (our own
// requirements).
func cvdProblems(m [3][3]float64, f func(float64) color.NRGBA) []string {
	dist := func(p, q color.NRGBA) float64 {
		l1, a1, b1 := simulate(m, p)
		l2, a2, b2 := simulate(m, q)
		return math.Sqrt((l1-l2)*(l1-l2) + (a1-a2)*(a1-a2) + (b1-b2)*(b1-b2))
	}
	var out []string
	for i := 1; i <= 10; i++ {
		v := float64(i) / 10
		if d := dist(f(v), f(-v)); d < 25*v {
			out = append(out, fmt.Sprintf("±%.1f only ΔE %.1f apart, want ≥ %.1f", v, d, 25*v))
		}
		if v >= 0.5 {
			for _, s := range []float64{v, -v} {
				if d := dist(f(s), f(0)); d < 10 {
					out = append(out, fmt.Sprintf("%.1f only ΔE %.1f from the neutral", s, d))
				}
			}
		}
	}
	return out
}

func TestDivergingReadableWithColourDeficiencies(t *testing.T) {
	for name, m := range machado {
		for _, row := range m {
			if s := row[0] + row[1] + row[2]; math.Abs(s-1) > 2e-6 {
				t.Fatalf("%s matrix row %v sums to %v, not 1: mistyped", name, row, s)
			}
		}
		for _, p := range cvdProblems(m, Diverging) {
			t.Errorf("%s: %s", name, p)
		}
	}
	// The check can fail: a red–green map of equal lightness (red
	// #C84646 against green #3C8C3C, blended linearly from white) is
	// unreadable with deuteranopia.
	redGreen := func(v float64) color.NRGBA {
		end := color.NRGBA{0xc8, 0x46, 0x46, 255}
		if v < 0 {
			end, v = color.NRGBA{0x3c, 0x8c, 0x3c, 255}, -v
		}
		mix := func(e uint8) uint8 { return uint8(math.Round(255*(1-v) + float64(e)*v)) }
		return color.NRGBA{mix(end.R), mix(end.G), mix(end.B), 255}
	}
	if len(cvdProblems(machado["deuteranopia"], redGreen)) == 0 {
		t.Error("a red–green map passes the deuteranopia check: the check is too weak")
	}
}

func TestColourMapsClampAndNaN(t *testing.T) {
	// Outside the domain the maps clamp; NaN maps as zero (documented).
	if Sequential(-3) != Sequential(0) || Sequential(7) != Sequential(1) || Sequential(math.NaN()) != Sequential(0) {
		t.Error("Sequential does not clamp")
	}
	if Diverging(math.NaN()) != Diverging(0) || Diverging(math.Inf(1)) != Diverging(1) {
		t.Error("Diverging does not clamp")
	}
	if Sequential(0) == Sequential(1) || Sequential(0.5).A != 255 {
		t.Error("Sequential ends equal or not opaque")
	}
}

// ciede2000 is the CIEDE2000 colour difference (CIE 142-2001), kL = kC = kH
// = 1, written after Sharma, Wu & Dalal, "The CIEDE2000 color-difference
// formula: implementation notes, supplementary test data, and mathematical
// observations", Color Res. Appl. 30(1), 2005.
func ciede2000(l1, a1, b1, l2, a2, b2 float64) float64 {
	deg := math.Pi / 180
	c1, c2 := math.Hypot(a1, b1), math.Hypot(a2, b2)
	cm := (c1 + c2) / 2
	c7 := math.Pow(cm, 7)
	g := 0.5 * (1 - math.Sqrt(c7/(c7+math.Pow(25, 7))))
	a1p, a2p := (1+g)*a1, (1+g)*a2
	c1p, c2p := math.Hypot(a1p, b1), math.Hypot(a2p, b2)
	hue := func(b, a float64) float64 {
		if a == 0 && b == 0 {
			return 0
		}
		h := math.Atan2(b, a) / deg
		if h < 0 {
			h += 360
		}
		return h
	}
	h1p, h2p := hue(b1, a1p), hue(b2, a2p)
	dL := l2 - l1
	dC := c2p - c1p
	dh := 0.0
	if c1p*c2p != 0 {
		dh = h2p - h1p
		if dh > 180 {
			dh -= 360
		} else if dh < -180 {
			dh += 360
		}
	}
	dH := 2 * math.Sqrt(c1p*c2p) * math.Sin(dh/2*deg)
	lm := (l1 + l2) / 2
	cmp := (c1p + c2p) / 2
	hm := h1p + h2p
	if c1p*c2p != 0 {
		switch {
		case math.Abs(h1p-h2p) <= 180:
			hm /= 2
		case h1p+h2p < 360:
			hm = (hm + 360) / 2
		default:
			hm = (hm - 360) / 2
		}
	}
	t := 1 - 0.17*math.Cos((hm-30)*deg) + 0.24*math.Cos(2*hm*deg) + 0.32*math.Cos((3*hm+6)*deg) - 0.20*math.Cos((4*hm-63)*deg)
	dTheta := 30 * math.Exp(-math.Pow((hm-275)/25, 2))
	cmp7 := math.Pow(cmp, 7)
	rc := 2 * math.Sqrt(cmp7/(cmp7+math.Pow(25, 7)))
	sl := 1 + 0.015*(lm-50)*(lm-50)/math.Sqrt(20+(lm-50)*(lm-50))
	sc := 1 + 0.045*cmp
	sh := 1 + 0.015*cmp*t
	rt := -math.Sin(2*dTheta*deg) * rc
	return math.Sqrt(math.Pow(dL/sl, 2) + math.Pow(dC/sc, 2) + math.Pow(dH/sh, 2) + rt*(dC/sc)*(dH/sh))
}

func de00(p, q color.NRGBA) float64 {
	l1, a1, b1 := lab(p)
	l2, a2, b2 := lab(q)
	return ciede2000(l1, a1, b1, l2, a2, b2)
}

func TestCIEDE2000Reference(t *testing.T) {
	// First pairs of the supplementary test data of Sharma, Wu & Dalal 2005
	// (Table 1), from memory; the table gives 4 decimals.
	for _, c := range [][7]float64{
		{50, 2.6772, -79.7751, 50, 0, -82.7485, 2.0425},
		{50, 3.1571, -77.2803, 50, 0, -82.7485, 2.8615},
		{50, 2.8361, -74.0200, 50, 0, -82.7485, 3.4412},
	} {
		if got := ciede2000(c[0], c[1], c[2], c[3], c[4], c[5]); math.Abs(got-c[6]) > 1e-4 {
			t.Errorf("ΔE00 %v = %.4f, want %.4f", c[:6], got, c[6])
		}
	}
}

func TestOKLabMatrices(t *testing.T) {
	// OKLab coordinates of sRGB white and primaries as CSS Color Module
	// Level 4 gives them (oklch(62.8% 0.2577 29.23) for red, etc., here in
	// Cartesian form, 4 decimals): converting back must give the primary
	// within 2e-3 per channel (the rounding of the reference values).
	for _, c := range []struct {
		L, a, b float64
		rgb     [3]float64
	}{
		{1, 0, 0, [3]float64{1, 1, 1}},
		{0.6280, 0.2249, 0.1258, [3]float64{1, 0, 0}},
		{0.8664, -0.2339, 0.1795, [3]float64{0, 1, 0}},
		{0.4520, -0.0325, -0.3115, [3]float64{0, 0, 1}},
	} {
		r, g, b := oklabToLinear(c.L, c.a, c.b)
		for i, v := range []float64{r, g, b} {
			if math.Abs(v-c.rgb[i]) > 2e-3 {
				t.Errorf("OKLab (%v, %v, %v) → linear RGB (%.4f, %.4f, %.4f), want %v", c.L, c.a, c.b, r, g, b, c.rgb)
				break
			}
		}
	}
}
