package prep

import (
	"bytes"
	"fmt"
	"image"
	"image/jpeg"
	"image/png"
	"os"
	"path/filepath"
	"slices"
	"testing"
	"time"
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

// decoderBenchFiles is the number of files one timed pass of BenchmarkDecoderRatio
// reads, and decoderBenchPairs the interleaved pairs of passes of one iteration.
const (
	decoderBenchFiles = 32
	decoderBenchPairs = 5
)

// benchScene is a smooth, photo-like w×h picture: colour gradients, a bright
// disc whose place depends on seed, and a little noise, so that PNG's filters
// and deflate work as they do on real probe images.
func benchScene(w, h int, seed uint32) *image.NRGBA {
	img := image.NewNRGBA(image.Rect(0, 0, w, h))
	cx, cy, r := w*(3+int(seed%4))/10, h*(3+int(seed%3))/10, min(w, h)/5
	v := seed*2654435761 + 1
	for y := range h {
		for x := range w {
			v = v*1664525 + 1013904223 // Numerical Recipes LCG
			n := int(v>>28) - 8
			px := [3]int{50 + 130*x/w + n, 70 + 100*y/h + n, 120 + 60*(x+y)/(w+h) + n}
			if (x-cx)*(x-cx)+(y-cy)*(y-cy) < r*r {
				px = [3]int{230 + n, 215 + n, 150 + n}
			}
			i := img.PixOffset(x, y)
			for c := range 3 {
				img.Pix[i+c] = uint8(min(255, max(0, px[c])))
			}
			img.Pix[i+3] = 0xff
		}
	}
	return img
}

// BenchmarkDecoderRatio reports a Decoder's time over the time of Load, Fit and
// TensorFromImage (the path it replaces) on the same files, the two interleaved
// in pairs of passes over decoderBenchFiles files; "new/old" is the median ratio
// (below 1: the Decoder is faster), min-ratio and max-ratio its range, and
// new-ns/px and old-ns/px the time per input pixel. PNG files at the model's
// size take the Decoder's fast path; JPEG files its general path, where only
// the read buffer is reused.
func BenchmarkDecoderRatio(b *testing.B) {
	for _, bc := range []struct {
		format string
		side   int
	}{{"png", 64}, {"png", 224}, {"jpeg", 64}, {"jpeg", 224}} {
		b.Run(fmt.Sprintf("%s-%d", bc.format, bc.side), func(b *testing.B) {
			c := mustPreset("imagenet", Default())
			c.Width, c.Height = bc.side, bc.side
			dir := b.TempDir()
			files := make([]string, decoderBenchFiles)
			for i := range files {
				var buf bytes.Buffer
				var err error
				if pic := benchScene(bc.side, bc.side, uint32(i)); bc.format == "png" {
					err = png.Encode(&buf, pic)
				} else {
					err = jpeg.Encode(&buf, pic, &jpeg.Options{Quality: 90})
				}
				if err != nil {
					b.Fatal(err)
				}
				files[i] = filepath.Join(dir, fmt.Sprintf("p%02d.%s", i, bc.format))
				if err := os.WriteFile(files[i], buf.Bytes(), 0o644); err != nil {
					b.Fatal(err)
				}
			}
			dst := make([]float32, c.Len())
			oldPath := func() {
				for _, f := range files {
					img, err := Load(f)
					if err != nil {
						b.Fatal(err)
					}
					c.TensorFromImage(Fit(img, c), dst)
				}
			}
			d := new(Decoder)
			newPath := func() {
				for _, f := range files {
					if err := d.LoadInto(f, c, dst); err != nil {
						b.Fatal(err)
					}
				}
			}
			timed := func(f func()) time.Duration {
				t := time.Now()
				f()
				return time.Since(t)
			}
			var ratios []float64
			var tOld, tNew time.Duration
			b.ReportAllocs()
			for b.Loop() {
				for range decoderBenchPairs {
					var o, n time.Duration
					if len(ratios)%2 == 0 {
						o, n = timed(oldPath), timed(newPath)
					} else {
						n, o = timed(newPath), timed(oldPath)
					}
					tOld += o
					tNew += n
					ratios = append(ratios, float64(n)/float64(o))
				}
			}
			slices.Sort(ratios)
			px := float64(len(ratios) * decoderBenchFiles * bc.side * bc.side)
			b.ReportMetric(ratios[len(ratios)/2], "new/old")
			b.ReportMetric(ratios[0], "min-ratio")
			b.ReportMetric(ratios[len(ratios)-1], "max-ratio")
			b.ReportMetric(float64(tNew.Nanoseconds())/px, "new-ns/px")
			b.ReportMetric(float64(tOld.Nanoseconds())/px, "old-ns/px")
			b.ReportMetric(float64(tNew.Microseconds())/float64(len(ratios)*decoderBenchFiles), "new-µs/file")
		})
	}
}
