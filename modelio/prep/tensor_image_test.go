package prep

import (
	"image"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"fovea/modelio"
)

// randomNRGBA is an opaque w×h picture of random samples with origin (3, −2) and a
// row stride wider than the picture (a sub-image), so indexing by Rect and Stride is
// exercised.
func randomNRGBA(rng *rand.Rand, w, h int) *image.NRGBA {
	big := image.NewNRGBA(image.Rect(-1, -4, w+5, h))
	for i := range big.Pix {
		big.Pix[i] = uint8(rng.IntN(256))
	}
	return big.SubImage(image.Rect(3, -2, 3+w, -2+h)).(*image.NRGBA)
}

// TensorFromImage is Planes followed by Tensor, bit for bit (the slow obviously
// correct path is the reference), for every preset, both layouts, both channel
// orders, one and three channels, and odd sizes.
func TestTensorFromImageMatchesPlanesTensor(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	for _, p := range Presets() {
		for _, layout := range []modelio.Layout{modelio.LayoutNCHW, modelio.LayoutNHWC} {
			for _, ch := range []int{3, 1} {
				for _, bgr := range []bool{false, true} {
					for _, size := range [][2]int{{1, 1}, {7, 5}, {16, 33}} {
						c := p.Apply(Default())
						c.Layout, c.Channels, c.BGR = layout, ch, bgr
						c.Width, c.Height = size[0], size[1]
						img := randomNRGBA(rng, c.Width, c.Height)
						want := make([]float32, c.Len())
						c.Tensor(Planes(img), want)
						got := make([]float32, c.Len())
						c.TensorFromImage(img, got)
						for i := range want {
							if math.Float32bits(got[i]) != math.Float32bits(want[i]) {
								t.Fatalf("%s %s C=%d BGR=%v %dx%d: value %d = %v, Planes+Tensor %v",
									p.Name, layout, ch, bgr, c.Width, c.Height, i, got[i], want[i])
							}
						}
					}
				}
			}
		}
	}
}

func TestTensorFromImagePanics(t *testing.T) {
	c := Default()
	c.Width, c.Height = 4, 4
	cases := map[string]func(){
		"size": func() { c.TensorFromImage(image.NewNRGBA(image.Rect(0, 0, 4, 5)), make([]float32, c.Len())) },
		"dst":  func() { c.TensorFromImage(image.NewNRGBA(image.Rect(0, 0, 4, 4)), make([]float32, c.Len()-1)) },
		"config": func() {
			bad := c
			bad.Range = "0-100"
			bad.TensorFromImage(image.NewNRGBA(image.Rect(0, 0, 4, 4)), nil)
		},
	}
	for name, f := range cases {
		func() {
			defer func() {
				r, _ := recover().(string)
				if !strings.HasPrefix(r, "prep: TensorFromImage") {
					t.Errorf("%s: panic %q, want one starting \"prep: TensorFromImage\"", name, r)
				}
			}()
			f()
		}()
	}
}

// An opaque NRGBA or RGBA picture already at the target size comes out of Fit as a
// copy of its samples: compositing over anything with α = 1 gives the colour itself
// (Porter & Duff 1984, "over"). Pixels with α < 255 among them are still composited,
// the same as the per-pixel reference.
func TestFitOpaqueAtSizeIsCopy(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	c := Default()
	c.Width, c.Height = 9, 6
	c.Background = white
	for _, holes := range []bool{false, true} {
		nrgba := randomNRGBA(rng, c.Width, c.Height)
		rgba := image.NewRGBA(image.Rect(-2, 1, c.Width-2, c.Height+1))
		for i := 3; i < len(nrgba.Pix); i += 4 {
			nrgba.Pix[i] = 0xff
		}
		for i := 0; i < len(rgba.Pix); i += 4 {
			a := uint8(0xff)
			if holes && rng.IntN(3) == 0 {
				a = uint8(rng.IntN(255))
			}
			rgba.Pix[i+3] = a
			for k := range 3 {
				rgba.Pix[i+k] = uint8(rng.IntN(int(a) + 1))
			}
		}
		if holes {
			for i := 3; i < len(nrgba.Pix); i += 4 {
				if rng.IntN(3) == 0 {
					nrgba.Pix[i] = uint8(rng.IntN(255))
				}
			}
		}
		for name, img := range map[string]image.Image{"NRGBA": nrgba, "RGBA": rgba} {
			got := Fit(img, c)
			ref := flattenSlow(img, img.Bounds(), c.Background)
			b := img.Bounds()
			for y := range c.Height {
				for x := range c.Width {
					r, g, bl, a := img.At(b.Min.X+x, b.Min.Y+y).RGBA()
					i := got.PixOffset(x, y)
					px := got.Pix[i : i+4]
					if a == 0xffff {
						if want := [4]uint8{uint8(r >> 8), uint8(g >> 8), uint8(bl >> 8), 0xff}; [4]uint8(px) != want {
							t.Errorf("%s holes=%v (%d,%d): %v, want the opaque source %v", name, holes, x, y, px, want)
						}
						continue
					}
					for k := range 4 {
						if d := int(px[k]) - int(ref.Pix[i+k]); d < -1 || d > 1 {
							t.Errorf("%s (%d,%d): %v, reference %v (±1)", name, x, y, px, ref.Pix[i:i+4])
						}
					}
				}
			}
		}
	}
}

// BenchmarkTensorFromImage compares the fused path with Planes+Tensor on a 224×224
// picture, ImageNet preset.
func BenchmarkTensorFromImage(b *testing.B) {
	img := randomNRGBA(rand.New(rand.NewPCG(1, 1)), 224, 224)
	c := mustPreset("imagenet", Default())
	dst := make([]float32, c.Len())
	b.Run("fused", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			c.TensorFromImage(img, dst)
		}
	})
	b.Run("planes+tensor", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			c.Tensor(Planes(img), dst)
		}
	})
}

// TestTensorFromImageCropS: the settings "crop:S" with S below 256 (valid for a
// small input) once made TensorFromImage panic, because its table of 256 values
// was checked as an input 256 pixels wide.
func TestTensorFromImageCropS(t *testing.T) {
	c := Default()
	c.Width, c.Height, c.Resize = 64, 64, "crop:72"
	img := randomNRGBA(rand.New(rand.NewPCG(9, 9)), 64, 64)
	got := make([]float32, c.Len())
	c.TensorFromImage(img, got)
	want := make([]float32, c.Len())
	c.Tensor(Planes(img), want)
	for i := range got {
		if math.Float32bits(got[i]) != math.Float32bits(want[i]) {
			t.Fatalf("value %d: %v, Tensor gives %v", i, got[i], want[i])
		}
	}
}
