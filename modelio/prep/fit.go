package prep

import (
	"fmt"
	"image"
	"image/color"

	"github.com/disintegration/imaging"
)

// resample is the filter of [Fit]: imaging.Linear is a triangle filter that imaging
// widens by the scale factor when shrinking, i.e. an antialiased bilinear resize, which
// is how training pipelines commonly resize (common practice). Sharper filters
// (Lanczos, CatmullRom) overshoot at edges, which a model never saw in training.
var resample = imaging.Linear

// Fit returns img as an opaque Width×Height picture ready for [Planes]:
//
//   - transparent pixels are composited over c.Background (straight or premultiplied
//     alpha, as the image's colour model says);
//   - Resize "stretch" scales the whole picture to Width×Height, ignoring its aspect ratio;
//   - Resize "crop" scales the picture just enough to cover Width×Height (for a square
//     input: the shorter side to the input's side, the longer one to floor(side·long/short))
//     and cuts Width×Height from the centre: torchvision's Resize(224) then
//     CenterCrop(224) for a 224×224 input;
//   - Resize "crop:S" scales the shorter side to S (the longer one to floor(S·long/short))
//     and cuts Width×Height from the centre: torchvision's Resize(S) then CenterCrop.
//
// Both crops use Pillow's bilinear arithmetic (see resizeWindow), so they give the
// pixels torchvision gives a PIL image (a test compares them), and compute only the
// window they keep: a 10000×20 strip costs a 224×224 window, not a 112000×224 resize.
// Stretch uses imaging's antialiased bilinear filter, within one 8-bit level of
// torchvision's Resize((H, W)). No side ever rounds to 0. The result's Rect starts
// at (0, 0); img is not modified.
//
// Fit panics when c's size is outside 1..MaxSide or img is empty: both are mistakes of
// the caller ([Load] never returns an empty image, [Config.Validate] checks the size).
func Fit(img image.Image, c Config) *image.NRGBA {
	if c.Width < 1 || c.Height < 1 || c.Width > MaxSide || c.Height > MaxSide {
		panic(fmt.Sprintf("prep: Fit to %dx%d: size must be 1..%d (call Config.Validate first)", c.Width, c.Height, MaxSide))
	}
	b := img.Bounds()
	if b.Empty() {
		panic(fmt.Sprintf("prep: Fit of an empty image (bounds %v)", b))
	}
	if win, ok := plainCut(b.Dx(), b.Dy(), c); ok {
		// Nothing to resize (the filter's taps would copy each pixel): only
		// the cut, or the whole picture.
		return flatten(img, win.Add(b.Min), c.Background)
	}
	if s := CropSide(c.Resize); s > 0 || c.Resize == ResizeCrop {
		rw, rh := scaledSize(b.Dx(), b.Dy(), c.Width, c.Height, s)
		return resizeWindow(img, b, c.Background, rw, rh, centreWindow(rw, rh, c.Width, c.Height))
	}
	r := b
	if r.Dx() > c.Width && r.Dy() > bandRows {
		// Shrinking a wide picture: flatten and narrow it band by band, so that a
		// 24-megapixel photo never exists as a whole opaque copy.
		return imaging.Resize(narrow(img, r, c.Background, c.Width), c.Width, c.Height, resample)
	}
	return imaging.Resize(flatten(img, r, c.Background), c.Width, c.Height, resample)
}

// plainCut says whether [Fit] of a w×h picture resamples nothing, and then which
// window of it (origin (0, 0)) Fit keeps: the whole picture when it already has
// c's size, or the centre cut of a crop whose scaled size is the picture's own.
// Fit and [Decoder] both ask it, so the fast path of one is the other's.
func plainCut(w, h int, c Config) (image.Rectangle, bool) {
	if s := CropSide(c.Resize); s > 0 || c.Resize == ResizeCrop {
		rw, rh := scaledSize(w, h, c.Width, c.Height, s)
		if rw != w || rh != h {
			return image.Rectangle{}, false
		}
		return centreWindow(rw, rh, c.Width, c.Height), true
	}
	if w != c.Width || h != c.Height {
		return image.Rectangle{}, false
	}
	return image.Rect(0, 0, w, h), true
}

// bandRows is the height of the bands narrow works in.
const bandRows = 64

// narrow flattens the part r of img and resizes it horizontally to width w, bandRows
// rows at a time. imaging.Resize filters horizontally row by row before it filters
// vertically, so narrow followed by a vertical resize gives exactly what one Resize of
// the whole flattened picture gives (a test checks it), with memory for one band and
// the narrowed picture instead of the full-size copy.
func narrow(img image.Image, r image.Rectangle, bg color.NRGBA, w int) *image.NRGBA {
	out := image.NewNRGBA(image.Rect(0, 0, w, r.Dy()))
	for y0 := r.Min.Y; y0 < r.Max.Y; y0 += bandRows {
		y1 := min(y0+bandRows, r.Max.Y)
		band := imaging.Resize(flatten(img, image.Rect(r.Min.X, y0, r.Max.X, y1), bg), w, y1-y0, resample)
		copy(out.Pix[(y0-r.Min.Y)*out.Stride:], band.Pix)
	}
	return out
}

// flatten copies the part r of img into a new opaque NRGBA with origin (0, 0),
// compositing every pixel over bg. All paths compute the same thing: take the colour as
// 16-bit premultiplied RGBA (the colour model's own RGBA method, which knows whether the
// format stores straight or premultiplied alpha), composite
//
//	out = c + bg × (1 - α)      (Porter & Duff 1984, "over", premultiplied)
//
// and round to 8 bits (out + 128) / 257. The type switches only avoid an interface call
// per pixel; a test checks each against the generic At path.
func flatten(img image.Image, r image.Rectangle, bg color.NRGBA) *image.NRGBA {
	w, h := r.Dx(), r.Dy()
	dst := image.NewNRGBA(image.Rect(0, 0, w, h))
	o := compositor{uint32(bg.R) * 0x101, uint32(bg.G) * 0x101, uint32(bg.B) * 0x101}
	put := func(i int, cr, cg, cb, ca uint32) {
		dst.Pix[i+0], dst.Pix[i+1], dst.Pix[i+2] = o.over(cr, cg, cb, ca)
		dst.Pix[i+3] = 0xff
	}
	// An opaque pixel composites to itself (α = 1: out = c), and with α = 255
	// premultiplied and straight values are the same, so for NRGBA and RGBA
	// each row is copied whole and only the pixels with α < 255 are
	// composited: an opaque picture (PNG without alpha, most photos) is a
	// plain copy.
	copyRows := func(pix []byte, offset func(x, y int) int, rgba func(p []byte) (r, g, b, a uint32)) {
		for y := range h {
			s := offset(r.Min.X, r.Min.Y+y)
			d := y * dst.Stride
			copy(dst.Pix[d:d+4*w], pix[s:s+4*w])
			for x := range w {
				if p := pix[s+4*x : s+4*x+4 : s+4*x+4]; p[3] != 0xff {
					cr, cg, cb, ca := rgba(p)
					put(d+4*x, cr, cg, cb, ca)
				}
			}
		}
	}
	switch src := img.(type) {
	case *image.NRGBA:
		copyRows(src.Pix, src.PixOffset, func(p []byte) (uint32, uint32, uint32, uint32) {
			return color.NRGBA{p[0], p[1], p[2], p[3]}.RGBA()
		})
	case *image.RGBA:
		copyRows(src.Pix, src.PixOffset, func(p []byte) (uint32, uint32, uint32, uint32) {
			return color.RGBA{p[0], p[1], p[2], p[3]}.RGBA()
		})
	case *image.YCbCr:
		flattenYCbCr(src, r, dst)
	case *image.Gray:
		for y := range h {
			s := src.PixOffset(r.Min.X, r.Min.Y+y)
			d := y * dst.Stride
			for x := range w {
				v := src.Pix[s+x]
				copy(dst.Pix[d+4*x:], []uint8{v, v, v, 0xff})
			}
		}
	case *image.Paletted:
		// Composite each palette entry once. Indices past the palette (which At would
		// panic on) and nil entries count as transparent.
		var table [256][4]uint8
		for i := range table {
			var cr, cg, cb, ca uint32
			if i < len(src.Palette) && src.Palette[i] != nil {
				cr, cg, cb, ca = src.Palette[i].RGBA()
			}
			table[i][0], table[i][1], table[i][2] = o.over(cr, cg, cb, ca)
			table[i][3] = 0xff
		}
		for y := range h {
			s := src.PixOffset(r.Min.X, r.Min.Y+y)
			d := y * dst.Stride
			for x := range w {
				copy(dst.Pix[d+4*x:], table[src.Pix[s+x]][:])
			}
		}
	case image.RGBA64Image: // Gray16, RGBA64, NRGBA64, CMYK, NYCbCrA, Alpha, ...
		for y := range h {
			d := y * dst.Stride
			for x := range w {
				c := src.RGBA64At(r.Min.X+x, r.Min.Y+y)
				put(d+4*x, uint32(c.R), uint32(c.G), uint32(c.B), uint32(c.A))
			}
		}
	default:
		for y := range h {
			d := y * dst.Stride
			for x := range w {
				var cr, cg, cb, ca uint32
				if c := img.At(r.Min.X+x, r.Min.Y+y); c != nil {
					cr, cg, cb, ca = c.RGBA()
				}
				put(d+4*x, cr, cg, cb, ca)
			}
		}
	}
	return dst
}

// compositor holds a 16-bit background colour for flatten.
type compositor struct{ r, g, b uint32 }

// over composites a 16-bit premultiplied colour over the background and rounds to 8 bits.
// Values are clamped, so a colour model that breaks the premultiplied rule (r > a)
// cannot wrap around.
func (o compositor) over(cr, cg, cb, ca uint32) (uint8, uint8, uint8) {
	inv := 0xffff - min(ca, 0xffff)
	to8 := func(c, bg uint32) uint8 { return uint8((min(c+bg*inv/0xffff, 0xffff) + 128) / 257) }
	return to8(cr, o.r), to8(cg, o.g), to8(cb, o.b)
}

// flattenYCbCr is flatten for a YCbCr picture (what image/jpeg returns for
// colour photos): the standard library's conversion of each pixel
// (color.YCbCr.RGBA, always opaque, so compositing leaves it as it is)
// rounded to 8 bits as compositor.over rounds, without looking up each
// pixel through YCbCrAt. The chroma sample of pixel (x, y) sits at
// COffset(x, y), which for every subsampling ratio is a part that depends
// on y plus a part that depends on x; the x part is computed once per
// column. Measured on 224×224 JPEG probes (BenchmarkDecoderRatio/jpeg-224):
// decoding and preparing a file went from 1.6 ms to 1.2 ms, of which
// image/jpeg itself takes most; this part from 2.4 times as long.
func flattenYCbCr(src *image.YCbCr, r image.Rectangle, dst *image.NRGBA) {
	w, h := r.Dx(), r.Dy()
	if w <= 0 || h <= 0 {
		return
	}
	col := make([]int, w)
	c0 := src.COffset(r.Min.X, r.Min.Y)
	for x := range col {
		col[x] = src.COffset(r.Min.X+x, r.Min.Y) - c0
	}
	to8 := func(c uint32) uint8 { return uint8((c + 128) / 257) }
	for y := range h {
		yi := src.YOffset(r.Min.X, r.Min.Y+y)
		ci := src.COffset(r.Min.X, r.Min.Y+y)
		ys := src.Y[yi : yi+w]
		out := dst.Pix[y*dst.Stride : y*dst.Stride+4*w]
		for x, yv := range ys {
			k := ci + col[x]
			cr, cg, cb, _ := color.YCbCr{Y: yv, Cb: src.Cb[k], Cr: src.Cr[k]}.RGBA()
			p := out[4*x : 4*x+4 : 4*x+4]
			p[0], p[1], p[2], p[3] = to8(cr), to8(cg), to8(cb), 0xff
		}
	}
}
