package prep

import (
	"bytes"
	"image"
	"image/color"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/disintegration/imaging"
)

// scaledSize and centreWindow: the resized size and the cut of the crop policies,
// worked out by hand from torchvision 0.14's rules (transforms/functional.py:
// _compute_resized_output_size makes the longer side int(S·long/short), center_crop
// places the window at int(round((size − crop)/2.0)), Python's round taking halves
// to even). s = 0 is crop: scaled just enough to cover w×h.
func TestScaledSizeAndCentreWindow(t *testing.T) {
	cases := []struct {
		sw, sh, w, h, s int
		rw, rh          int
		win             image.Rectangle
	}{
		{640, 480, 224, 224, 0, 298, 224, image.Rect(37, 0, 261, 224)},          // 224·640/480 = 298.67; (298−224)/2 = 37
		{640, 480, 224, 224, 256, 341, 256, image.Rect(58, 16, 282, 240)},       // 341.33; 117/2 = 58.5 → 58 (even)
		{480, 640, 224, 224, 256, 256, 341, image.Rect(16, 58, 240, 282)},       // portrait
		{400, 300, 224, 224, 256, 341, 256, image.Rect(58, 16, 282, 240)},       // 256·400/300 = 341.33
		{10000, 20, 224, 224, 0, 112000, 224, image.Rect(55888, 0, 56112, 224)}, // extreme strip: only the window is computed
		{1, 1, 224, 224, 0, 224, 224, image.Rect(0, 0, 224, 224)},
		{3, 1, 1, 3, 0, 9, 3, image.Rect(4, 0, 5, 3)},                        // wider than 1:3: height limits, 3·3/1 = 9
		{100, 100, 200, 100, 0, 200, 200, image.Rect(0, 50, 200, 150)},       // 2:1 from a square: width limits
		{101, 100, 100, 100, 0, 101, 100, image.Rect(0, 0, 100, 100)},        // surplus 1: 0.5 → 0 (even)
		{103, 100, 100, 100, 0, 103, 100, image.Rect(2, 0, 102, 100)},        // surplus 3: 1.5 → 2 (even)
		{119 + 224, 224, 224, 224, 0, 343, 224, image.Rect(60, 0, 284, 224)}, // 59.5 → 60 (even)
	}
	for _, tc := range cases {
		rw, rh := scaledSize(tc.sw, tc.sh, tc.w, tc.h, tc.s)
		win := centreWindow(rw, rh, tc.w, tc.h)
		if rw != tc.rw || rh != tc.rh || win != tc.win {
			t.Errorf("%dx%d to %dx%d (S %d): resized %dx%d window %v, want %dx%d %v", tc.sw, tc.sh, tc.w, tc.h, tc.s, rw, rh, win, tc.rw, tc.rh, tc.win)
		}
	}
}

// bands is 40×20: columns 0-9 red, 10-29 green, 30-39 blue.
func bands() *image.NRGBA {
	img := image.NewNRGBA(image.Rect(0, 0, 40, 20))
	for y := range 20 {
		for x := range 40 {
			c := green
			if x < 10 {
				c = red
			} else if x >= 30 {
				c = blue
			}
			img.SetNRGBA(x, y, c)
		}
	}
	return img
}

// Crop keeps the middle (only green survives in a 20×20 crop of the 40×20 bands);
// stretch keeps the whole picture (red left, green middle, blue right).
func TestCropVersusStretch(t *testing.T) {
	c := Default()
	c.Width, c.Height, c.Resize = 20, 20, ResizeCrop
	out := Fit(bands(), c)
	for y := range 20 {
		for x := range 20 {
			if got := out.NRGBAAt(x, y); got != green {
				t.Fatalf("crop: (%d,%d) = %v, want green", x, y, got)
			}
		}
	}
	c.Resize = ResizeStretch
	out = Fit(bands(), c)
	for _, p := range []struct {
		x    int
		want color.NRGBA
	}{{0, red}, {2, red}, {10, green}, {17, blue}, {19, blue}} {
		if got := out.NRGBAAt(p.x, 10); !closeTo(got, p.want, 2) {
			t.Errorf("stretch: column %d = %v, want %v", p.x, got, p.want)
		}
	}
	// A sub-image with a non-zero origin crops around its own centre: columns 20..39 of
	// the bands are green then blue; a 10×10 crop of (20,0)-(40,10) is x 25..35.
	sub := bands().SubImage(image.Rect(20, 0, 40, 10))
	c.Width, c.Height, c.Resize = 10, 10, ResizeCrop
	out = Fit(sub, c)
	if out.Rect.Min != (image.Point{}) || out.NRGBAAt(4, 5) != green || out.NRGBAAt(5, 5) != blue {
		t.Errorf("sub-image crop: origin %v, (4,5) %v (want green), (5,5) %v (want blue)", out.Rect.Min, out.NRGBAAt(4, 5), out.NRGBAAt(5, 5))
	}
}

// A constant picture stays exactly constant whatever the resize: the filter weights sum
// to 1. Covers 1×1 up-scaling and the 10000×20 strip in every policy.
func TestFitConstantAnySize(t *testing.T) {
	col := color.NRGBA{12, 34, 56, 255}
	for _, src := range [][2]int{{1, 1}, {10000, 20}, {20, 10000}, {3, 7}} {
		img := solidNRGBA(src[0], src[1], col)
		for _, r := range []string{ResizeStretch, ResizeCrop, "crop:256"} {
			c := Default()
			c.Width, c.Height, c.Resize = 224, 224, r
			out := Fit(img, c)
			if out.Rect != image.Rect(0, 0, 224, 224) {
				t.Fatalf("%v %s: bounds %v", src, r, out.Rect)
			}
			for i := 0; i < len(out.Pix); i += 4 {
				if !bytes.Equal(out.Pix[i:i+4], []byte{12, 34, 56, 255}) {
					t.Fatalf("%v %s: pixel %d = %v", src, r, i/4, out.Pix[i:i+4])
				}
			}
		}
	}
}

// Fit never changes its input.
func TestFitLeavesInput(t *testing.T) {
	img := solidNRGBA(4, 4, color.NRGBA{255, 0, 0, 100})
	before := append([]byte(nil), img.Pix...)
	c := Default()
	c.Width, c.Height = 4, 4
	Fit(img, c)
	if !bytes.Equal(before, img.Pix) {
		t.Error("Fit modified its input")
	}
}

// Straight and premultiplied alpha give the same composite; hand values from Porter &
// Duff's "over": out = α c + (1 - α) bg.
func TestAlphaComposite(t *testing.T) {
	cases := []struct {
		name string
		img  image.Image
		bg   color.NRGBA
		want color.NRGBA
	}{
		// α = 128/255: 255×128/255 = 128 over black; 255×127/255 = 127 of white shows through.
		{"straight over white", solidNRGBA(1, 1, color.NRGBA{255, 0, 0, 128}), white, color.NRGBA{255, 127, 127, 255}},
		{"premultiplied over white", solidRGBA(color.RGBA{128, 0, 0, 128}), white, color.NRGBA{255, 127, 127, 255}},
		{"straight over black", solidNRGBA(1, 1, color.NRGBA{255, 0, 0, 128}), black, color.NRGBA{128, 0, 0, 255}},
		{"premultiplied over black", solidRGBA(color.RGBA{128, 0, 0, 128}), black, color.NRGBA{128, 0, 0, 255}},
		// α = 0: background only, whatever colour sits under it.
		{"transparent over grey", solidNRGBA(1, 1, color.NRGBA{255, 255, 0, 0}), color.NRGBA{50, 60, 70, 255}, color.NRGBA{50, 60, 70, 255}},
		// α = 1/4 of green over blue bg (0,0,200): G = 255/4 = 63.75, B = 200×3/4 = 150.
		{"16-bit quarter", solidNRGBA64(color.NRGBA64{0, 0xFFFF, 0, 0x4000}), color.NRGBA{0, 0, 200, 255}, color.NRGBA{0, 64, 150, 255}},
		// image.Alpha (the generic RGBA64At path) at α 0: the background only.
		{"alpha mask", &image.Alpha{Pix: []uint8{0}, Stride: 1, Rect: image.Rect(0, 0, 1, 1)}, color.NRGBA{9, 8, 7, 255}, color.NRGBA{9, 8, 7, 255}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			c := Default()
			c.Width, c.Height, c.Background = 1, 1, tc.bg
			if got := Fit(tc.img, c).NRGBAAt(0, 0); !closeTo(got, tc.want, 1) {
				t.Errorf("%s: %v, want %v ± 1 (8-bit rounding)", tc.name, got, tc.want)
			}
		})
	}
}

func solidRGBA(c color.RGBA) *image.RGBA {
	img := image.NewRGBA(image.Rect(0, 0, 1, 1))
	img.SetRGBA(0, 0, c)
	return img
}

func solidNRGBA64(c color.NRGBA64) *image.NRGBA64 {
	img := image.NewNRGBA64(image.Rect(0, 0, 1, 1))
	img.SetNRGBA64(0, 0, c)
	return img
}

// flattenSlow is the obviously correct reference of flatten: At() per pixel, the colour
// model's premultiplied RGBA, "over" in float64, rounding to nearest.
func flattenSlow(img image.Image, r image.Rectangle, bg color.NRGBA) *image.NRGBA {
	dst := image.NewNRGBA(image.Rect(0, 0, r.Dx(), r.Dy()))
	for y := r.Min.Y; y < r.Max.Y; y++ {
		for x := r.Min.X; x < r.Max.X; x++ {
			cr, cg, cb, ca := img.At(x, y).RGBA()
			a := float64(ca) / 0xffff
			ch := func(c uint32, b uint8) uint8 {
				v := float64(c)/0xffff*255 + float64(b)*(1-a)
				return uint8(math.Round(math.Min(v, 255)))
			}
			dst.SetNRGBA(x-r.Min.X, y-r.Min.Y, color.NRGBA{ch(cr, bg.R), ch(cg, bg.G), ch(cb, bg.B), 255})
		}
	}
	return dst
}

// onlyAt hides every method but the three of image.Image, forcing flatten's last path.
type onlyAt struct{ image.Image }

// Every fast path of flatten agrees with the slow reference, on random pixels, a
// non-zero origin and a sub-rectangle, within 1 (integer versus float rounding).
func TestFlattenMatchesReference(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	rect := image.Rect(3, -2, 12, 5)
	randBytes := func(p []uint8) {
		for i := range p {
			p[i] = uint8(rng.IntN(256))
		}
	}
	nrgba := image.NewNRGBA(rect)
	randBytes(nrgba.Pix)
	rgba := image.NewRGBA(rect)
	for i := 0; i < len(rgba.Pix); i += 4 { // valid premultiplied: colour <= alpha
		a := uint8(rng.IntN(256))
		rgba.Pix[i+3] = a
		for k := range 3 {
			rgba.Pix[i+k] = uint8(rng.IntN(int(a) + 1))
		}
	}
	ycc := image.NewYCbCr(rect, image.YCbCrSubsampleRatio420)
	randBytes(ycc.Y)
	randBytes(ycc.Cb)
	randBytes(ycc.Cr)
	nycca := image.NewNYCbCrA(rect, image.YCbCrSubsampleRatio422)
	randBytes(nycca.Y)
	randBytes(nycca.Cb)
	randBytes(nycca.Cr)
	randBytes(nycca.A)
	gray := image.NewGray(rect)
	randBytes(gray.Pix)
	gray16 := image.NewGray16(rect)
	randBytes(gray16.Pix)
	nrgba64 := image.NewNRGBA64(rect)
	randBytes(nrgba64.Pix)
	cmyk := image.NewCMYK(rect)
	randBytes(cmyk.Pix)
	alpha := image.NewAlpha(rect)
	randBytes(alpha.Pix)
	pal := image.NewPaletted(rect, color.Palette{color.NRGBA{255, 0, 0, 100}, color.RGBA{0, 50, 0, 50}, color.Gray{7}})
	for i := range pal.Pix {
		pal.Pix[i] = uint8(rng.IntN(3))
	}
	rgba64 := image.NewRGBA64(rect)
	for x := rect.Min.X; x < rect.Max.X; x++ {
		for y := rect.Min.Y; y < rect.Max.Y; y++ {
			a := uint16(rng.IntN(65536))
			rgba64.SetRGBA64(x, y, color.RGBA64{uint16(rng.IntN(int(a) + 1)), uint16(rng.IntN(int(a) + 1)), 0, a})
		}
	}
	images := map[string]image.Image{
		"NRGBA": nrgba, "RGBA": rgba, "YCbCr": ycc, "NYCbCrA": nycca, "Gray": gray, "Gray16": gray16,
		"NRGBA64": nrgba64, "RGBA64": rgba64, "CMYK": cmyk, "Alpha": alpha, "Paletted": pal, "At only": onlyAt{nrgba},
	}
	bg := color.NRGBA{30, 140, 250, 255}
	for name, img := range images {
		for _, r := range []image.Rectangle{rect, image.Rect(5, 0, 9, 4)} {
			fast, slow := flatten(img, r, bg), flattenSlow(img, r, bg)
			for i := range fast.Pix {
				if d := int(fast.Pix[i]) - int(slow.Pix[i]); d < -1 || d > 1 {
					t.Fatalf("%s %v: byte %d fast %d, reference %d", name, r, i, fast.Pix[i], slow.Pix[i])
				}
			}
		}
	}
}

// A palette index past the palette (which image.Paletted.At would panic on) is
// transparent, so it shows the background.
func TestFlattenPaletteOutOfRange(t *testing.T) {
	pal := image.NewPaletted(image.Rect(0, 0, 2, 1), color.Palette{color.Black})
	pal.Pix[1] = 200
	out := flatten(pal, pal.Rect, color.NRGBA{1, 2, 3, 255})
	if out.NRGBAAt(0, 0) != black || out.NRGBAAt(1, 0) != (color.NRGBA{1, 2, 3, 255}) {
		t.Errorf("got %v %v", out.NRGBAAt(0, 0), out.NRGBAAt(1, 0))
	}
}

// Fit's panics are the caller's mistakes and say so.
func TestFitPanics(t *testing.T) {
	for _, tc := range []struct {
		img  image.Image
		w, h int
	}{{solidNRGBA(2, 2, red), 0, 5}, {solidNRGBA(2, 2, red), 5000, 5}, {image.NewNRGBA(image.Rect(0, 0, 0, 3)), 4, 4}} {
		func() {
			defer func() {
				if r := recover(); r == nil {
					t.Errorf("Fit %v to %dx%d did not panic", tc.img.Bounds(), tc.w, tc.h)
				}
			}()
			c := Default()
			c.Width, c.Height = tc.w, tc.h
			Fit(tc.img, c)
		}()
	}
}

// Fit's band-by-band path gives exactly what one resize of the whole flattened picture
// gives (imaging.Resize, the library's own result, is the reference), for a picture of
// random pixels with alpha, several bands and a partial last band (stretch: the crops
// take resizeWindow's path, checked against torchvision in torchvision_test.go).
func TestFitBandsMatchWholeResize(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	img := image.NewNRGBA(image.Rect(-5, 7, 695, 7+5*bandRows+17))
	for i := range img.Pix {
		img.Pix[i] = uint8(rng.IntN(256))
	}
	for _, c := range []Config{
		{Width: 50, Height: 40, Resize: ResizeStretch, Background: color.NRGBA{10, 20, 30, 255}},
		{Width: 90, Height: 300, Resize: ResizeStretch, Background: black}, // taller output, still narrower
	} {
		r := img.Rect
		if !(r.Dx() > c.Width && r.Dy() > bandRows) {
			t.Fatalf("case %dx%d does not take the band path", c.Width, c.Height)
		}
		want := imaging.Resize(flatten(img, r, c.Background), c.Width, c.Height, resample)
		got := Fit(img, c)
		if !bytes.Equal(got.Pix, want.Pix) || got.Rect != want.Rect {
			t.Errorf("%dx%d %s: band path differs from the whole resize", c.Width, c.Height, c.Resize)
		}
	}
}

// A crop that needs no resize (the picture's shorter side already is the
// input's) is the plain cut; it equals what the general resize path makes
// with its identity taps, on random pixels with alpha and a non-zero origin.
func TestCropWithoutResizeIsTheCut(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	img := image.NewNRGBA(image.Rect(3, -4, 3+103, -4+100))
	for i := range img.Pix {
		img.Pix[i] = uint8(rng.IntN(256))
	}
	c := Config{Width: 100, Height: 100, Resize: ResizeCrop, Background: color.NRGBA{10, 200, 30, 255}}
	got := Fit(img, c)
	// 103×100 to 100×100: no resize; a surplus of 3 leaves 2 on the left (1.5 rounds to even).
	win := image.Rect(2, 0, 102, 100)
	slow := resizeWindow(img, img.Rect, c.Background, 103, 100, win)
	cut := flatten(img, win.Add(img.Rect.Min), c.Background)
	if !bytes.Equal(got.Pix, slow.Pix) || !bytes.Equal(got.Pix, cut.Pix) || got.Rect != image.Rect(0, 0, 100, 100) {
		t.Error("a crop without resize differs from the resize path's identity or from the plain cut")
	}
}

// flattenYCbCr gives, bit for bit, what looking up each pixel through the
// standard library gives (YCbCrAt, then color.YCbCr.RGBA composited as every
// other colour is), for every chroma subsampling image/jpeg can return, with
// origins that are not multiples of the subsampling and sub-rectangles that
// start on odd columns and rows.
func TestFlattenYCbCrExact(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	bg := color.NRGBA{30, 140, 250, 255}
	o := compositor{uint32(bg.R) * 0x101, uint32(bg.G) * 0x101, uint32(bg.B) * 0x101}
	ratios := []image.YCbCrSubsampleRatio{image.YCbCrSubsampleRatio444, image.YCbCrSubsampleRatio422,
		image.YCbCrSubsampleRatio420, image.YCbCrSubsampleRatio440, image.YCbCrSubsampleRatio411, image.YCbCrSubsampleRatio410}
	for _, ratio := range ratios {
		for _, rect := range []image.Rectangle{image.Rect(0, 0, 16, 9), image.Rect(-3, 5, 14, 18), image.Rect(1, -7, 10, 2)} {
			img := image.NewYCbCr(rect, ratio)
			for _, p := range [][]uint8{img.Y, img.Cb, img.Cr} {
				for i := range p {
					p[i] = uint8(rng.IntN(256))
				}
			}
			for _, r := range []image.Rectangle{rect, image.Rect(rect.Min.X+1, rect.Min.Y+3, rect.Max.X-2, rect.Max.Y-1)} {
				got := flatten(img, r, bg)
				for y := r.Min.Y; y < r.Max.Y; y++ {
					for x := r.Min.X; x < r.Max.X; x++ {
						cr, cg, cb, ca := img.YCbCrAt(x, y).RGBA()
						wr, wg, wb := o.over(cr, cg, cb, ca)
						i := got.PixOffset(x-r.Min.X, y-r.Min.Y)
						if g := got.Pix[i : i+4]; g[0] != wr || g[1] != wg || g[2] != wb || g[3] != 0xff {
							t.Fatalf("%v %v %v: pixel (%d, %d) is %v, want [%d %d %d 255]", ratio, rect, r, x, y, g, wr, wg, wb)
						}
					}
				}
			}
		}
	}
}
