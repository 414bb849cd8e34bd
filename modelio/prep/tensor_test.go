package prep

import (
	"image"
	"image/color"
	"math"
	"strings"
	"testing"

	"fovea/modelio"
)

// tol is the tolerance of float32 tensor values against hand-computed decimals: the
// decimals are rounded to 7 significant digits and float32 keeps about 7.
const tol = 1e-5

func near(a, b float32, eps float64) bool { return math.Abs(float64(a)-float64(b)) <= eps }

// onePixel returns the tensor of a 1×1 image of colour px under the preset p.
func onePixel(t *testing.T, p string, px color.NRGBA, mod func(*Config)) []float32 {
	t.Helper()
	c := Default()
	c.Width, c.Height = 1, 1
	if err := c.Set("preset", p); err != nil {
		t.Fatal(err)
	}
	if mod != nil {
		mod(&c)
	}
	data, shape, err := c.Batch([]image.Image{solidNRGBA(1, 1, px)})
	if err != nil {
		t.Fatal(err)
	}
	if want := c.Shape(1); len(shape) != 4 || shape[1]*shape[2]*shape[3] != int64(len(data)) || shape[0] != want[0] {
		t.Fatalf("shape %v for %d values", shape, len(data))
	}
	return data
}

// A known pixel gives a known value under every preset. Pixel (255, 128, 0): p = 1,
// 128/255 = 0.5019608, 0. Values computed by hand from the formulas v = k p + off,
// (v - mean)/std (package doc); preset constants are common practice (ImageNet
// statistics 0.485,0.456,0.406 / 0.229,0.224,0.225 and 103.939,116.779,123.68 in BGR).
func TestPresetsKnownPixel(t *testing.T) {
	px := color.NRGBA{255, 128, 0, 255}
	cases := []struct {
		preset string
		want   [3]float32 // tensor channel order
	}{
		{"unit", [3]float32{1, 0.5019608, 0}},
		{"byte", [3]float32{255, 128, 0}},
		{"signed", [3]float32{1, 0.0039216, -1}}, // 2×128/255 - 1 = 1/255
		// (1-0.485)/0.229 = 2.2489083; (0.5019608-0.456)/0.224 = 0.2051821; (0-0.406)/0.225 = -1.8044444
		{"imagenet", [3]float32{2.2489083, 0.2051821, -1.8044444}},
		// B,G,R: 0-103.939; 128-116.779 = 11.221; 255-123.68 = 131.32
		{"bgr-mean", [3]float32{-103.939, 11.221, 131.32}},
	}
	if len(cases) != len(Presets()) {
		t.Fatalf("%d presets, %d cases: every preset needs a known-pixel case", len(Presets()), len(cases))
	}
	for _, tc := range cases {
		got := onePixel(t, tc.preset, px, nil)
		for i := range 3 {
			eps := tol * max(1, math.Abs(float64(tc.want[i])))
			if !near(got[i], tc.want[i], eps) {
				t.Errorf("preset %s channel %d = %v, want %v", tc.preset, i, got[i], tc.want[i])
			}
		}
	}
}

// One-channel models get Y = 0.299 R + 0.587 G + 0.114 B (ITU-R BT.601).
func TestLuminanceBT601(t *testing.T) {
	cases := []struct {
		px   color.NRGBA
		want float32
	}{
		{color.NRGBA{255, 0, 0, 255}, 0.299},
		{color.NRGBA{0, 255, 0, 255}, 0.587},
		{color.NRGBA{0, 0, 255, 255}, 0.114},
		{color.NRGBA{255, 255, 255, 255}, 1},
		{color.NRGBA{10, 20, 30, 255}, 0.0711765}, // (2.99 + 11.74 + 3.42)/255
	}
	for _, tc := range cases {
		got := onePixel(t, "unit", tc.px, func(c *Config) { c.Channels = 1 })
		if len(got) != 1 || !near(got[0], tc.want, tol) {
			t.Errorf("Y%v = %v, want %v", tc.px, got, tc.want)
		}
	}
	// BGR is meaningless for one channel and must not change Y.
	got := onePixel(t, "unit", color.NRGBA{255, 0, 0, 255}, func(c *Config) { c.Channels, c.BGR = 1, true })
	if !near(got[0], 0.299, tol) {
		t.Errorf("gray with BGR set: %v, want 0.299", got[0])
	}
}

// BGR swaps the first and last channel, and the mean/std follow the tensor order.
func TestBGR(t *testing.T) {
	got := onePixel(t, "unit", color.NRGBA{255, 128, 0, 255}, func(c *Config) { c.BGR = true })
	want := [3]float32{0, 0.5019608, 1}
	for i := range 3 {
		if !near(got[i], want[i], tol) {
			t.Errorf("BGR channel %d = %v, want %v", i, got[i], want[i])
		}
	}
	got = onePixel(t, "byte", color.NRGBA{255, 128, 0, 255}, func(c *Config) {
		c.BGR, c.Mean, c.Std = true, [3]float32{1, 2, 3}, [3]float32{2, 4, 8}
	})
	want = [3]float32{-0.5, 31.5, 31.5} // (0-1)/2, (128-2)/4, (255-3)/8
	for i := range 3 {
		if !near(got[i], want[i], tol) {
			t.Errorf("BGR mean/std channel %d = %v, want %v", i, got[i], want[i])
		}
	}
}

// NCHW is [c][h][w] and NHWC [h][w][c], row-major (DEVELOPERS.md conventions). A 3×2
// image whose pixel (x, y) is (10x+y, 100+10x+y, 200+10x+y)/255 on the byte range gives
// back exactly those numbers at the positions the two formulas name.
func TestLayoutIndexMapping(t *testing.T) {
	const w, h = 3, 2
	img := image.NewNRGBA(image.Rect(0, 0, w, h))
	for y := range h {
		for x := range w {
			v := uint8(10*x + y)
			img.SetNRGBA(x, y, color.NRGBA{v, 100 + v, 200 + v, 255})
		}
	}
	c := Default()
	c.Width, c.Height, c.Range = w, h, RangeByte
	planes := Planes(img)
	nchw, nhwc := make([]float32, c.Len()), make([]float32, c.Len())
	c.Tensor(planes, nchw)
	c.Layout = modelio.LayoutNHWC
	c.Tensor(planes, nhwc)
	// Hand-written expectations for both layouts.
	wantNCHW := []float32{0, 10, 20, 1, 11, 21, 100, 110, 120, 101, 111, 121, 200, 210, 220, 201, 211, 221}
	wantNHWC := []float32{0, 100, 200, 10, 110, 210, 20, 120, 220, 1, 101, 201, 11, 111, 211, 21, 121, 221}
	for i := range wantNCHW {
		if !near(nchw[i], wantNCHW[i], 1e-3) || !near(nhwc[i], wantNHWC[i], 1e-3) {
			t.Fatalf("index %d: NCHW %v (want %v), NHWC %v (want %v)", i, nchw[i], wantNCHW[i], nhwc[i], wantNHWC[i])
		}
	}
	if s := c.Shape(5); s[0] != 5 || s[1] != h || s[2] != w || s[3] != 3 {
		t.Errorf("NHWC shape %v", s)
	}
	c.Layout = modelio.LayoutNCHW
	if s := c.Shape(5); s[0] != 5 || s[1] != 3 || s[2] != h || s[3] != w {
		t.Errorf("NCHW shape %v", s)
	}
}

// Batch puts the images one after the other (image i at i*C*H*W).
func TestBatchOrder(t *testing.T) {
	c := Default()
	c.Width, c.Height, c.Range = 2, 2, RangeByte
	imgs := []image.Image{solidNRGBA(2, 2, color.NRGBA{1, 2, 3, 255}), solidNRGBA(5, 3, color.NRGBA{7, 8, 9, 255})}
	data, shape, err := c.Batch(imgs)
	if err != nil {
		t.Fatal(err)
	}
	if len(data) != 24 || shape[0] != 2 {
		t.Fatalf("len %d shape %v", len(data), shape)
	}
	// image 1, channel 2 (blue), any pixel: offset 12 + 2*4
	if data[0] != 1 || data[4] != 2 || data[8] != 3 || data[12] != 7 || data[12+8] != 9 {
		t.Errorf("batch layout wrong: %v", data)
	}
	c.Range = "0-100"
	if _, _, err := c.Batch(imgs); err == nil || !strings.Contains(err.Error(), `range "0-100"`) {
		t.Errorf("bad config: err %v", err)
	}
}

// Tensor panics with a clear message on a caller's length mistake.
func TestTensorPanicsOnWrongLength(t *testing.T) {
	c := Default()
	c.Width, c.Height = 2, 2
	defer func() {
		if r := recover(); r == nil || !strings.Contains(r.(string), "dst has 5 values, want 3×2×2 = 12") {
			t.Errorf("panic %v", r)
		}
	}()
	c.Tensor(make([]float32, 12), make([]float32, 5))
}

// Planes: [3][H][W], sample/255, non-zero origin respected.
func TestPlanes(t *testing.T) {
	img := image.NewNRGBA(image.Rect(5, 7, 7, 8)) // 2×1 at (5,7)
	img.SetNRGBA(5, 7, color.NRGBA{255, 0, 51, 255})
	img.SetNRGBA(6, 7, color.NRGBA{0, 102, 255, 0})
	p := Planes(img)
	want := []float32{1, 0, 0, 0.4, 0.2, 1} // 51/255 = 0.2, 102/255 = 0.4
	for i := range want {
		if !near(p[i], want[i], tol) {
			t.Fatalf("planes %v, want %v", p, want)
		}
	}
}
