package viz

import (
	"image/color"
	"math"
	"sync"
	"testing"
)

// An outside reference for the pictures' colours: the colour maps computed
// from their published definition (the doc comments of colormap.go: straight
// paths in OKLCH, clipped to the sRGB gamut by lowering chroma, Sequential
// re-sampled at equal OKLab distances) with no code of the package, and
// compositing by Porter & Duff's "over" (1984). OKLab is Björn Ottosson's
// (2020): here through his *forward* matrices (linear sRGB → LMS → OKLab,
// from memory), inverted numerically, so that a slip in the package's
// inverse matrices would show; the forward matrices are checked against the
// OKLab coordinates CSS Color Module Level 4 gives for the sRGB primaries.

// okForward1 maps linear sRGB to LMS; okForward2 maps the cube roots of LMS
// to OKLab (Ottosson 2020).
var (
	okForward1 = [3][3]float64{
		{0.4122214708, 0.5363325363, 0.0514459929},
		{0.2119034982, 0.6806995451, 0.1073969566},
		{0.0883024619, 0.2817188376, 0.6299787005},
	}
	okForward2 = [3][3]float64{
		{0.2104542553, 0.7936177850, -0.0040720468},
		{1.9779984951, -2.4285922050, 0.4505937099},
		{0.0259040371, 0.7827717662, -0.8086757660},
	}
)

// solve3 solves m·x = y by Cramer's rule.
func solve3(m [3][3]float64, y [3]float64) [3]float64 {
	det := func(a [3][3]float64) float64 {
		return a[0][0]*(a[1][1]*a[2][2]-a[1][2]*a[2][1]) - a[0][1]*(a[1][0]*a[2][2]-a[1][2]*a[2][0]) + a[0][2]*(a[1][0]*a[2][1]-a[1][1]*a[2][0])
	}
	d := det(m)
	var x [3]float64
	for c := range 3 {
		a := m
		for r := range 3 {
			a[r][c] = y[r]
		}
		x[c] = det(a) / d
	}
	return x
}

// refLinear is linear sRGB of an OKLab colour, through the forward matrices.
func refLinear(L, a, b float64) [3]float64 {
	lms := solve3(okForward2, [3]float64{L, a, b})
	for i := range lms {
		lms[i] = lms[i] * lms[i] * lms[i]
	}
	return solve3(okForward1, lms)
}

// refOKLCH is the 8-bit sRGB colour of OKLCH (L, C, H°), chroma lowered by
// bisection until it is inside the sRGB gamut, encoded with the sRGB
// transfer function of IEC 61966-2-1 and rounded.
func refOKLCH(L, C, H float64) color.NRGBA {
	lin := func(c float64) [3]float64 {
		h := H * math.Pi / 180
		return refLinear(L, c*math.Cos(h), c*math.Sin(h))
	}
	inside := func(v [3]float64) bool {
		for _, x := range v {
			if x < -1e-9 || x > 1+1e-9 {
				return false
			}
		}
		return true
	}
	v := lin(C)
	if !inside(v) {
		lo, hi := 0.0, C
		for range 60 {
			if mid := (lo + hi) / 2; inside(lin(mid)) {
				lo = mid
			} else {
				hi = mid
			}
		}
		v = lin(lo)
	}
	enc := func(x float64) uint8 {
		if x <= 0.0031308 {
			x *= 12.92
		} else {
			x = 1.055*math.Pow(x, 1/2.4) - 0.055
		}
		return uint8(math.Round(math.Min(1, math.Max(0, x)) * 255))
	}
	return color.NRGBA{enc(v[0]), enc(v[1]), enc(v[2]), 255}
}

// refDiverging is Diverging's definition: u = |v| (clamped to 1) moves
// lightness and chroma linearly from the neutral OKLCH (0.95, 0) to the blue
// end (0.47, 0.14, 255°) for v < 0 or the orange end (0.60, 0.145, 55°).
func refDiverging(v float64) color.NRGBA {
	u := math.Min(1, math.Abs(v))
	if v < 0 {
		return refOKLCH(0.95+(0.47-0.95)*u, 0.14*u, 255)
	}
	return refOKLCH(0.95+(0.60-0.95)*u, 0.145*u, 55)
}

// refSequential is Sequential's definition: the OKLCH path
// (0.33 + 0.60t, 0.11 + 0.07t², 285° − 180t), t in [0, 1], each point
// clipped to the gamut, taken at the t where the OKLab arc length from t = 0
// is the fraction v of the whole (equal steps of v, equal distances).
func refSequential(v float64) color.NRGBA {
	v = math.Min(1, math.Max(0, v))
	seqRefOnce.Do(buildSeqRef)
	want := v * seqRefArc[len(seqRefArc)-1]
	n := len(seqRefArc) - 1
	i := 0
	for i < n-1 && seqRefArc[i+1] < want {
		i++
	}
	f := 0.0
	if d := seqRefArc[i+1] - seqRefArc[i]; d > 0 {
		f = math.Min(1, math.Max(0, (want-seqRefArc[i])/d))
	}
	p, q := seqRefLab[i], seqRefLab[i+1]
	L, a, b := p[0]+f*(q[0]-p[0]), p[1]+f*(q[1]-p[1]), p[2]+f*(q[2]-p[2])
	return refOKLCH(L, math.Hypot(a, b), math.Atan2(b, a)*180/math.Pi)
}

// The clipped path sampled at 8192 steps of t, and the arc length to each.
var (
	seqRefOnce sync.Once
	seqRefLab  [][3]float64
	seqRefArc  []float64
)

func buildSeqRef() {
	const n = 8192
	seqRefLab = make([][3]float64, n+1)
	seqRefArc = make([]float64, n+1)
	for i := range seqRefLab {
		t := float64(i) / n
		L, C, H := 0.33+0.60*t, 0.11+0.07*t*t, 285-180*t
		h := H * math.Pi / 180
		in := func(c float64) bool {
			x := refLinear(L, c*math.Cos(h), c*math.Sin(h))
			return x[0] >= -1e-9 && x[0] <= 1+1e-9 && x[1] >= -1e-9 && x[1] <= 1+1e-9 && x[2] >= -1e-9 && x[2] <= 1+1e-9
		}
		if !in(C) {
			lo, hi := 0.0, C
			for range 40 {
				if mid := (lo + hi) / 2; in(mid) {
					lo = mid
				} else {
					hi = mid
				}
			}
			C = lo
		}
		seqRefLab[i] = [3]float64{L, C * math.Cos(h), C * math.Sin(h)}
		if i > 0 {
			p, q := seqRefLab[i-1], seqRefLab[i]
			seqRefArc[i] = seqRefArc[i-1] + math.Sqrt((q[0]-p[0])*(q[0]-p[0])+(q[1]-p[1])*(q[1]-p[1])+(q[2]-p[2])*(q[2]-p[2]))
		}
	}
}

// refOver composites a colour at opacity a over an opaque backdrop: Porter
// & Duff's "over", Co = αs·Cs + αb·Cb·(1 − αs) with αb = 1, rounded to 8
// bits.
func refOver(backdrop, src color.NRGBA, a float64) color.NRGBA {
	mix := func(b, s uint8) uint8 { return uint8(math.Round(a*float64(s) + (1-a)*float64(b))) }
	return color.NRGBA{mix(backdrop.R, src.R), mix(backdrop.G, src.G), mix(backdrop.B, src.B), 255}
}

// nearColour reports whether two colours differ by at most d per channel.
func nearColour(p, q color.NRGBA, d int) bool {
	diff := func(x, y uint8) bool { return int(x)-int(y) <= d && int(y)-int(x) <= d }
	return diff(p.R, q.R) && diff(p.G, q.G) && diff(p.B, q.B) && diff(p.A, q.A)
}

// The reference's OKLab reproduces CSS Color 4's OKLab coordinates of white
// and the sRGB primaries within their 4-decimal rounding, and the maps agree
// with their definitions within one 8-bit step (the tables hold |v| in steps
// of 1/255 or 1/256, and Sequential nudges a step to keep lightness rising).
func TestColourMapsMatchDefinition(t *testing.T) {
	for _, c := range []struct {
		L, a, b float64
		rgb     [3]float64
	}{
		{1, 0, 0, [3]float64{1, 1, 1}},
		{0.6280, 0.2249, 0.1258, [3]float64{1, 0, 0}},
		{0.8664, -0.2339, 0.1795, [3]float64{0, 1, 0}},
		{0.4520, -0.0325, -0.3115, [3]float64{0, 0, 1}},
	} {
		got := refLinear(c.L, c.a, c.b)
		for i := range got {
			if math.Abs(got[i]-c.rgb[i]) > 2e-3 {
				t.Errorf("reference OKLab (%v, %v, %v) → %v, want %v (CSS Color 4)", c.L, c.a, c.b, got, c.rgb)
				break
			}
		}
	}
	// Neutral: OKLab (0.95, 0, 0) is grey with linear value 0.95³ = 0.857375
	// (OKLab puts D65 white at L = 1, a = b = 0), sRGB-encoded 238.
	if got := refDiverging(0); got != (color.NRGBA{238, 238, 238, 255}) || Diverging(0) != got {
		t.Errorf("neutral: reference %v, Diverging(0) %v, want #eeeeee", got, Diverging(0))
	}
	for i := 0; i <= 20; i++ {
		v := float64(i) / 20
		if got, want := Sequential(v), refSequential(v); !nearColour(got, want, 1) {
			t.Errorf("Sequential(%v) = %v, definition %v", v, got, want)
		}
		for _, s := range []float64{-v, v} {
			if got, want := Diverging(s), refDiverging(s); !nearColour(got, want, 1) {
				t.Errorf("Diverging(%v) = %v, definition %v", s, got, want)
			}
		}
	}
}
