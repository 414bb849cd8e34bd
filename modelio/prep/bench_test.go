package prep

import (
	"image"
	"testing"
)

// benchPhoto is a 1600×1200 4:2:0 YCbCr picture, what image/jpeg returns for a photo.
func benchPhoto() *image.YCbCr {
	img := image.NewYCbCr(image.Rect(0, 0, 1600, 1200), image.YCbCrSubsampleRatio420)
	for i := range img.Y {
		img.Y[i] = uint8(i * 7)
	}
	for i := range img.Cb {
		img.Cb[i], img.Cr[i] = uint8(i*3), uint8(i*5)
	}
	return img
}

// BenchmarkFlatten compares flatten's type-switched path with the per-pixel At()
// reference on the same picture; the ratio fast/reference is the number to watch
// (below 1 means the fast path earns its code).
func BenchmarkFlatten(b *testing.B) {
	img := benchPhoto()
	r := img.Bounds()
	b.Run("fast", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			flatten(img, r, white)
		}
	})
	b.Run("reference", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			flattenSlow(img, r, white)
		}
	})
}

// BenchmarkFitToTensor is the whole path for one photo at 224×224, crop, ImageNet preset.
func BenchmarkFitToTensor(b *testing.B) {
	img := benchPhoto()
	c := mustPreset("imagenet", Default())
	c.Resize = ResizeCrop
	dst := make([]float32, c.Len())
	b.ReportAllocs()
	for b.Loop() {
		c.Tensor(Planes(Fit(img, c)), dst)
	}
}
