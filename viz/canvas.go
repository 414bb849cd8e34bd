package viz

import (
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"math"

	xdraw "golang.org/x/image/draw"
)

// MaxPixels bounds every picture viz allocates (width × height): 2^25 pixels,
// 128 MiB as NRGBA. A request above it is an error, so that a model file that
// claims absurd shapes cannot make the program allocate without limit.
const MaxPixels = 1 << 25

// The house palette: neutral backgrounds and inks shared by all pictures, so
// that tiles, grids, bars and the report look like one family.
var (
	// Dark is the default background of tile and map grids: a neutral
	// near-black against which both mid-grey (zero weights) and the maps'
	// light ends stand out.
	Dark = color.NRGBA{0x22, 0x24, 0x27, 0xff}
	// Light is the light background (the report's page, colour bars).
	Light = color.NRGBA{0xff, 0xff, 0xff, 0xff}
	// inkDark and inkLight are text colours for light and dark backgrounds.
	inkDark  = color.NRGBA{0x1d, 0x21, 0x26, 0xff}
	inkLight = color.NRGBA{0xe4, 0xe6, 0xe9, 0xff}
	// inkMuted is secondary text on light backgrounds.
	inkMuted = color.NRGBA{0x5c, 0x63, 0x6b, 0xff}
	// flagSevere and flagMild frame flagged filters: a strong magenta-red for
	// filters that do nothing (zero kernel, dead), amber for suspicious ones
	// (duplicate, rare, constant). The frame pattern (solid or dashed) carries
	// the same distinction for readers who cannot tell the colours apart.
	flagSevere = color.NRGBA{0xe0, 0x2f, 0x6b, 0xff}
	flagMild   = color.NRGBA{0xf2, 0xb1, 0x1b, 0xff}
)

// newCanvas allocates a w×h picture filled with bg, or returns an error when
// the size is not positive or above MaxPixels. what names the picture in the
// message.
func newCanvas(what string, w, h int, bg color.NRGBA) (*image.NRGBA, error) {
	if w <= 0 || h <= 0 {
		return nil, fmt.Errorf("viz: %s: picture size %d×%d is not positive", what, w, h)
	}
	if int64(w)*int64(h) > MaxPixels {
		return nil, fmt.Errorf("viz: %s: picture size %d×%d exceeds the limit of %d pixels", what, w, h, MaxPixels)
	}
	img := image.NewNRGBA(image.Rect(0, 0, w, h))
	fill(img, img.Rect, bg)
	return img, nil
}

// mustCanvas is newCanvas for the functions whose contract has no error
// result: a bad size is the caller's mistake and panics with the message.
func mustCanvas(what string, w, h int, bg color.NRGBA) *image.NRGBA {
	img, err := newCanvas(what, w, h, bg)
	if err != nil {
		panic(err.Error())
	}
	return img
}

// fill paints r (clipped to img) with the opaque or translucent colour c,
// replacing what was there.
func fill(img *image.NRGBA, r image.Rectangle, c color.NRGBA) {
	r = r.Intersect(img.Rect)
	for y := r.Min.Y; y < r.Max.Y; y++ {
		i := img.PixOffset(r.Min.X, y)
		for x := r.Min.X; x < r.Max.X; x++ {
			img.Pix[i], img.Pix[i+1], img.Pix[i+2], img.Pix[i+3] = c.R, c.G, c.B, c.A
			i += 4
		}
	}
}

// frame draws a border of thickness t just inside r. dashed draws it in
// segments of 4 pixels on, 3 off, starting at each corner.
func frame(img *image.NRGBA, r image.Rectangle, t int, c color.NRGBA, dashed bool) {
	on := func(k int) bool { return !dashed || k%7 < 4 }
	for y := r.Min.Y; y < r.Max.Y; y++ {
		for x := r.Min.X; x < r.Max.X; x++ {
			top, bottom := y < r.Min.Y+t, y >= r.Max.Y-t
			left, right := x < r.Min.X+t, x >= r.Max.X-t
			var k int
			switch {
			case top || bottom:
				k = x - r.Min.X
			case left || right:
				k = y - r.Min.Y
			default:
				continue
			}
			if on(k) && (image.Point{x, y}).In(img.Rect) {
				img.SetNRGBA(x, y, c)
			}
		}
	}
}

// blend returns (1-a)·base + a·over per channel, rounded, opaque. base is
// treated as already composited onto its own colour (alpha ignored by the
// callers, which flatten first).
func blend(base, over color.NRGBA, a float64) color.NRGBA {
	mix := func(p, q uint8) uint8 {
		return uint8(math.Round(float64(p)*(1-a) + float64(q)*a))
	}
	return color.NRGBA{mix(base.R, over.R), mix(base.G, over.G), mix(base.B, over.B), 255}
}

// flatten copies src into a new NRGBA at origin (0, 0), composited over bg so
// that every pixel is opaque. The source is not modified.
func flatten(src image.Image, bg color.NRGBA) *image.NRGBA {
	b := src.Bounds()
	dst := image.NewNRGBA(image.Rect(0, 0, b.Dx(), b.Dy()))
	fill(dst, dst.Rect, bg)
	draw.Draw(dst, dst.Rect, src, b.Min, draw.Over)
	return dst
}

// paste draws src (any bounds) onto dst with its top-left corner at p.
func paste(dst *image.NRGBA, src image.Image, p image.Point) {
	b := src.Bounds()
	draw.Draw(dst, image.Rectangle{p, p.Add(b.Size())}, src, b.Min, draw.Over)
}

// scaleTo draws src resized to fit inside the box r, keeping its aspect ratio
// and centring it, and returns the rectangle it used. pixels selects
// nearest-neighbour (for kernels and maps, whose cells must stay crisp);
// otherwise Catmull-Rom (for photographs).
func scaleTo(dst *image.NRGBA, src image.Image, r image.Rectangle, pixels bool) image.Rectangle {
	sb := src.Bounds()
	if sb.Empty() || r.Empty() {
		return image.Rectangle{}
	}
	s := math.Min(float64(r.Dx())/float64(sb.Dx()), float64(r.Dy())/float64(sb.Dy()))
	w := max(1, int(math.Round(float64(sb.Dx())*s)))
	h := max(1, int(math.Round(float64(sb.Dy())*s)))
	x := r.Min.X + (r.Dx()-w)/2
	y := r.Min.Y + (r.Dy()-h)/2
	out := image.Rect(x, y, x+w, y+h)
	var k xdraw.Interpolator = xdraw.CatmullRom
	if pixels {
		k = xdraw.NearestNeighbor
	}
	k.Scale(dst, out, src, sb, xdraw.Over, nil)
	return out
}

// luminance is the relative luminance of an sRGB colour (IEC 61966-2-1
// linearisation, ITU-R BT.709 weights), in [0, 1].
func luminance(c color.NRGBA) float64 {
	lin := func(v uint8) float64 {
		x := float64(v) / 255
		if x <= 0.04045 {
			return x / 12.92
		}
		return math.Pow((x+0.055)/1.055, 2.4)
	}
	return 0.2126*lin(c.R) + 0.7152*lin(c.G) + 0.0722*lin(c.B)
}

// inkFor returns the text colour that reads best on bg.
func inkFor(bg color.NRGBA) color.NRGBA {
	if luminance(bg) < 0.25 {
		return inkLight
	}
	return inkDark
}

// outlineFor is a quiet line colour a little apart from bg.
func outlineFor(bg color.NRGBA) color.NRGBA {
	if luminance(bg) < 0.25 {
		return color.NRGBA{0x45, 0x49, 0x4f, 0xff}
	}
	return color.NRGBA{0xc4, 0xc9, 0xcf, 0xff}
}
