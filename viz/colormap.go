package viz

import (
	"image/color"
	"math"
)

// The two colour maps are our own, built once at start-up in OKLab
// (Björn Ottosson, "A perceptual color space for image processing", 2020),
// whose lightness L and chroma C track perceived lightness and colourfulness
// closely, and tabulated. Tables keep every picture a pure function of its
// input and make a lookup a few instructions.
//
// Sequential: lightness rises linearly from L = 0.33 (a deep blue-violet, not
// black, so that it still separates from a dark background) to L = 0.93 (a
// pale yellow, not white, so that it still separates from a light one); the
// hue turns from 285° through blue, teal and green to 105°, and chroma is
// 0.11 + 0.07t² along the path's parameter t in [0, 1] (every point clipped
// to the sRGB gamut by lowering chroma at its lightness and hue). The path is then
// re-sampled at equal OKLab distances so that equal steps of v are equal
// perceived steps.
//
// Diverging: zero is a near-white neutral (L = 0.95, no chroma); negative
// values go to a blue (L = 0.47, C = 0.14, hue 255°), positive ones to a burnt
// orange (L = 0.60, C = 0.145, hue 55°); lightness and chroma change linearly
// with |v| (clipped to the gamut like Sequential). Blue against orange is the pair that viewers
// with the common red–green deficiencies still tell apart, and the two ends
// also differ in lightness, so that the sign stays readable in grey-scale
// print and for blue–yellow deficiencies.

const (
	seqSize = 256 // Sequential table entries: one per 8-bit step
	divHalf = 256 // Diverging table: entries -divHalf..divHalf, index 0 = value 0
)

var (
	seqTable = buildSequential()
	divTable = buildDiverging()
)

// Sequential maps v in [0, 1] to a perceptually uniform colour: dark
// blue-violet at 0 through teal and green to pale yellow at 1, lightness
// increasing monotonically. Values outside [0, 1] are clamped; NaN maps as 0.
// The result is opaque.
func Sequential(v float64) color.NRGBA {
	if !(v > 0) { // also NaN
		return seqTable[0]
	}
	if v >= 1 {
		return seqTable[seqSize-1]
	}
	return seqTable[int(v*(seqSize-1)+0.5)]
}

// Diverging maps v in [-1, 1] to a colour centred on a neutral near-white at 0:
// blue for negative values, orange for positive ones, saturation and lightness
// difference growing with |v|. Diverging(-v) and Diverging(v) lie at the same
// table distance from the centre (the map is symmetric in |v|). Values outside
// [-1, 1] are clamped; NaN maps as 0. The result is opaque.
func Diverging(v float64) color.NRGBA {
	if v != v {
		v = 0
	}
	if v > 1 {
		v = 1
	} else if v < -1 {
		v = -1
	}
	i := int(math.Abs(v)*divHalf + 0.5)
	if v < 0 {
		i = -i
	}
	return divTable[i+divHalf]
}

// oklch is a colour in OKLab's polar form: lightness, chroma, hue in degrees.
type oklch struct{ L, C, H float64 }

func (c oklch) lab() (L, a, b float64) {
	h := c.H * math.Pi / 180
	return c.L, c.C * math.Cos(h), c.C * math.Sin(h)
}

// oklabToLinear converts OKLab to linear-light sRGB with the matrices
// Ottosson published (2020), typed from memory and checked in the tests
// against the OKLab coordinates of the sRGB primaries given in CSS Color
// Module Level 4.
func oklabToLinear(L, a, b float64) (r, g, bl float64) {
	l := L + 0.3963377774*a + 0.2158037573*b
	m := L - 0.1055613458*a - 0.0638541728*b
	s := L - 0.0894841775*a - 1.2914855480*b
	l, m, s = l*l*l, m*m*m, s*s*s
	r = 4.0767416621*l - 3.3077115913*m + 0.2309699292*s
	g = -1.2684380046*l + 2.6097574011*m - 0.3413193965*s
	bl = -0.0041960863*l - 0.7034186147*m + 1.7076147010*s
	return
}

// inGamut reports whether the colour is displayable in sRGB.
func (c oklch) inGamut() bool {
	r, g, b := oklabToLinear(c.lab())
	const eps = 1e-9
	return r >= -eps && r <= 1+eps && g >= -eps && g <= 1+eps && b >= -eps && b <= 1+eps
}

// clip keeps lightness and hue and lowers chroma until the colour is in the
// sRGB gamut (bisection, 30 steps: far below one 8-bit step).
func (c oklch) clip() oklch {
	if c.inGamut() {
		return c
	}
	lo, hi := 0.0, c.C
	for range 30 {
		mid := (lo + hi) / 2
		if (oklch{c.L, mid, c.H}).inGamut() {
			lo = mid
		} else {
			hi = mid
		}
	}
	c.C = lo
	return c
}

// srgbEncode is the sRGB transfer function of IEC 61966-2-1.
func srgbEncode(v float64) float64 {
	if v <= 0.0031308 {
		return 12.92 * v
	}
	return 1.055*math.Pow(v, 1/2.4) - 0.055
}

func to8(v float64) uint8 {
	v = math.Round(v * 255)
	if v < 0 {
		return 0
	}
	if v > 255 {
		return 255
	}
	return uint8(v)
}

func (c oklch) nrgba() color.NRGBA {
	r, g, b := oklabToLinear(c.lab())
	return color.NRGBA{to8(srgbEncode(r)), to8(srgbEncode(g)), to8(srgbEncode(b)), 255}
}

func buildSequential() []color.NRGBA {
	path := func(t float64) oklch {
		return oklch{
			L: 0.33 + 0.60*t,
			C: 0.11 + 0.07*t*t, // stronger colour towards the light end, where sRGB allows it
			H: 285 - 180*t,
		}.clip()
	}
	// Re-sample the path at equal OKLab arc length.
	const fine = 4096
	pts := make([][3]float64, fine+1)
	arc := make([]float64, fine+1)
	for i := range pts {
		L, a, b := path(float64(i) / fine).lab()
		pts[i] = [3]float64{L, a, b}
		if i > 0 {
			p := pts[i-1]
			arc[i] = arc[i-1] + math.Sqrt((L-p[0])*(L-p[0])+(a-p[1])*(a-p[1])+(b-p[2])*(b-p[2]))
		}
	}
	out := make([]color.NRGBA, seqSize)
	j := 0
	prevY := -1.0
	for i := range out {
		want := arc[fine] * float64(i) / (seqSize - 1)
		for j < fine-1 && arc[j+1] < want {
			j++
		}
		f := 0.0
		if d := arc[j+1] - arc[j]; d > 0 {
			f = (want - arc[j]) / d
		}
		f = math.Max(0, math.Min(1, f))
		t := (float64(j) + f) / fine
		out[i] = monotoneRound(path(t), prevY)
		prevY = luminance(out[i])
	}
	return out
}

// monotoneRound rounds c to 8-bit sRGB. Rounding each channel on its own can
// make the luminance of a step fall a hair below the previous step's when the
// hue turns; then, of the 27 colours one unit away per channel, the one
// nearest to c whose luminance is not below minY is taken, so that the
// table's lightness never decreases.
func monotoneRound(c oklch, minY float64) color.NRGBA {
	r, g, b := oklabToLinear(c.lab())
	ideal := [3]float64{255 * srgbEncode(r), 255 * srgbEncode(g), 255 * srgbEncode(b)}
	best := c.nrgba()
	if luminance(best) >= minY {
		return best
	}
	bestD := math.Inf(1)
	base := best
	for dr := -1; dr <= 1; dr++ {
		for dg := -1; dg <= 1; dg++ {
			for db := -1; db <= 1; db++ {
				q := color.NRGBA{to8((float64(base.R) + float64(dr)) / 255), to8((float64(base.G) + float64(dg)) / 255), to8((float64(base.B) + float64(db)) / 255), 255}
				if luminance(q) < minY {
					continue
				}
				d := sq(float64(q.R)-ideal[0]) + sq(float64(q.G)-ideal[1]) + sq(float64(q.B)-ideal[2])
				if d < bestD {
					best, bestD = q, d
				}
			}
		}
	}
	return best
}

func sq(x float64) float64 { return x * x }

func buildDiverging() []color.NRGBA {
	const (
		l0             = 0.95 // neutral
		lNeg, cNeg, hN = 0.47, 0.14, 255.0
		lPos, cPos, hP = 0.60, 0.145, 55.0
	)
	out := make([]color.NRGBA, 2*divHalf+1)
	for i := -divHalf; i <= divHalf; i++ {
		u := math.Abs(float64(i)) / divHalf
		var c oklch
		if i < 0 {
			c = oklch{l0 + (lNeg-l0)*u, cNeg * u, hN}
		} else {
			c = oklch{l0 + (lPos-l0)*u, cPos * u, hP}
		}
		out[i+divHalf] = c.clip().nrgba()
	}
	return out
}
