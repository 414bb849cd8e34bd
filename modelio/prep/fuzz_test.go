package prep

import (
	"bytes"
	"errors"
	"image"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"fovea/modelio"
)

// fuzzMaxPixels keeps each fuzz input cheap; the limit logic itself is the same as with
// MaxPixels.
const fuzzMaxPixels = 1 << 18

// FuzzLoad feeds arbitrary bytes through decoding, Fit and Tensor. Whatever the bytes,
// the result is an image within the limit or a *FileError naming the file; Fit gives the
// asked size, Planes values in 0..1, and Tensor finite values. Seeds: every file in
// testdata/images plus generated EXIF variants. Crashers the fuzzer finds are kept by
// `go test` in testdata/fuzz/FuzzLoad and rerun as regression tests.
//
//	go test -run=XXX -fuzz=FuzzLoad -fuzztime=20s ./modelio/prep
func FuzzLoad(f *testing.F) {
	entries, err := os.ReadDir(imagesDir)
	if err != nil {
		f.Fatal(err)
	}
	for _, e := range entries {
		data, err := os.ReadFile(filepath.Join(imagesDir, e.Name()))
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	small := encJPEG(f, solidNRGBA(8, 8, red))
	for o := uint16(0); o <= 9; o++ {
		f.Add(withExif(small, o, o%2 == 0))
	}
	f.Add(cmykJPEG(3, 17, [4]uint8{10, 20, 30, 40}))
	f.Add(losslessWebP(3, 4, red))

	configs := []Config{Default(), Default()}
	configs[0].Width, configs[0].Height, configs[0].Resize = 7, 5, ResizeCrop
	configs[1] = mustPreset("bgr-mean", configs[1])
	configs[1].Width, configs[1].Height, configs[1].Channels, configs[1].Layout = 4, 9, 1, modelio.LayoutNHWC

	f.Fuzz(func(t *testing.T, data []byte) {
		img, err := DecodeLimit(bytes.NewReader(data), int64(len(data)), "fuzz.bin", fuzzMaxPixels)
		if err != nil {
			var fe *FileError
			if img != nil || !errors.As(err, &fe) || !strings.HasPrefix(err.Error(), "prep: fuzz.bin: ") {
				t.Fatalf("error %v (image %v): want a *FileError naming the file and no image", err, img)
			}
			return
		}
		b := img.Bounds()
		if b.Empty() || b.Dx()*b.Dy() > fuzzMaxPixels {
			t.Fatalf("decoded bounds %v outside the limit", b)
		}
		for _, c := range configs {
			out := Fit(img, c)
			if out.Rect != image.Rect(0, 0, c.Width, c.Height) {
				t.Fatalf("Fit gave %v, want %dx%d", out.Rect, c.Width, c.Height)
			}
			planes := Planes(out)
			for _, v := range planes {
				if !(v >= 0 && v <= 1) {
					t.Fatalf("plane value %v outside 0..1", v)
				}
			}
			dst := make([]float32, c.Len())
			c.Tensor(planes, dst)
			for _, v := range dst {
				if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
					t.Fatalf("tensor value %v", v)
				}
			}
		}
	})
}

func mustPreset(name string, c Config) Config {
	p, ok := PresetNamed(name)
	if !ok {
		panic("no preset " + name)
	}
	return p.Apply(c)
}
