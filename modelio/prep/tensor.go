package prep

import (
	"fmt"
	"image"

	"fovea/modelio"
)

// Luminance weights of ITU-R BT.601 (Y = 0.299 R + 0.587 G + 0.114 B), used for
// one-channel models.
const (
	lumaR = 0.299
	lumaG = 0.587
	lumaB = 0.114
)

// Planes splits img into three planes, red, green and blue, each Height×Width, row-major,
// with values sample/255 in 0..1: planes[c*H*W + y*W + x]. Alpha is ignored: [Fit]'s
// output is opaque.
func Planes(img *image.NRGBA) []float32 {
	w, h := img.Rect.Dx(), img.Rect.Dy()
	n := w * h
	out := make([]float32, 3*n)
	for y := range h {
		row := img.Pix[y*img.Stride:]
		for x := range w {
			i := y*w + x
			out[i] = float32(row[4*x]) / 255
			out[n+i] = float32(row[4*x+1]) / 255
			out[2*n+i] = float32(row[4*x+2]) / 255
		}
	}
	return out
}

// Tensor writes one image, given as [Planes] of size c.Height×c.Width, into dst
// (len c.Len()) in c.Layout, applying channel order, value range and mean/std as the
// package documentation says. It panics when c is invalid or a length is wrong: call
// [Config.Validate] first; both are the caller's mistakes, not conditions of a file.
func (c Config) Tensor(planes, dst []float32) {
	if err := c.Validate(); err != nil {
		panic(fmt.Sprintf("prep: Tensor with %v", err))
	}
	hw := c.Height * c.Width
	if len(planes) != 3*hw {
		panic(fmt.Sprintf("prep: Tensor: %d plane values, want 3×%d×%d = %d", len(planes), c.Height, c.Width, 3*hw))
	}
	if len(dst) != c.Len() {
		panic(fmt.Sprintf("prep: Tensor: dst has %d values, want %d×%d×%d = %d", len(dst), c.Channels, c.Height, c.Width, c.Len()))
	}
	var k, off float32 // v = k p + off
	switch c.Range {
	case RangeUnit:
		k, off = 1, 0
	case RangeByte:
		k, off = 255, 0
	case RangeSigned:
		k, off = 2, -1
	}
	r, g, b := planes[:hw], planes[hw:2*hw], planes[2*hw:]
	for ch := range c.Channels {
		var src []float32
		switch {
		case c.Channels == 1:
			src = nil // luminance, computed below
		case c.BGR:
			src = planes[(2-ch)*hw : (3-ch)*hw]
		default:
			src = planes[ch*hw : (ch+1)*hw]
		}
		mean, std := c.Mean[ch], c.Std[ch]
		for i := range hw {
			var p float32
			if src == nil {
				p = lumaR*r[i] + lumaG*g[i] + lumaB*b[i]
			} else {
				p = src[i]
			}
			v := (k*p + off - mean) / std
			if c.Layout == modelio.LayoutNHWC {
				dst[i*c.Channels+ch] = v
			} else {
				dst[ch*hw+i] = v
			}
		}
	}
}

// Batch fits each image ([Fit], [Planes], [Config.Tensor]) into one tensor of shape
// c.Shape(len(imgs)), the images one after the other. It returns c.Validate's error
// when c is not usable.
func (c Config) Batch(imgs []image.Image) ([]float32, []int64, error) {
	if err := c.Validate(); err != nil {
		return nil, nil, err
	}
	n := c.Len()
	out := make([]float32, len(imgs)*n)
	for i, img := range imgs {
		c.Tensor(Planes(Fit(img, c)), out[i*n:(i+1)*n])
	}
	return out, c.Shape(len(imgs)), nil
}

// TensorFromImage writes img, already [Fit] to c.Width×c.Height, into dst (len c.Len())
// in c.Layout: the same values as c.Tensor(Planes(img), dst), bit for bit, without the
// planes in between. For three channels each output value depends on one 8-bit sample,
// so the 256 values of each channel are made once by [Config.Tensor] itself and the
// image is a table look-up; one channel (luminance) is computed per pixel as Tensor does.
// It panics when c is invalid or a size is wrong, like Tensor.
func (c Config) TensorFromImage(img *image.NRGBA, dst []float32) {
	if err := c.Validate(); err != nil {
		panic(fmt.Sprintf("prep: TensorFromImage with %v", err))
	}
	w, h := img.Rect.Dx(), img.Rect.Dy()
	if w != c.Width || h != c.Height {
		panic(fmt.Sprintf("prep: TensorFromImage: image is %d×%d, want %d×%d (Fit it first)", w, h, c.Width, c.Height))
	}
	if len(dst) != c.Len() {
		panic(fmt.Sprintf("prep: TensorFromImage: dst has %d values, want %d×%d×%d = %d", len(dst), c.Channels, c.Height, c.Width, c.Len()))
	}
	tw := newTensorWriter(c)
	for y := range h {
		tw.row(y, img.Pix[y*img.Stride:y*img.Stride+4*w], 4, dst)
	}
}

// tensorWriter writes an image row by row into a tensor, as
// [Config.TensorFromImage] does; [Decoder] keeps one per Config, so the table is
// made once for many files. c must be valid.
type tensorWriter struct {
	c Config
	// table[ch*256+v]: channel ch of a pixel whose three samples are all v
	// (three channels only). Channel ch reads sample src[ch].
	table  [3 * 256]float32
	src    [3]int
	rows   Config    // c with one row's size, for the luminance path
	planes []float32 // one row of planes, for the luminance path
}

func newTensorWriter(c Config) *tensorWriter {
	t := &tensorWriter{c: c}
	if c.Channels == 1 {
		// Tensor's arithmetic on the values Planes makes (layouts agree for one channel).
		t.rows = c
		t.rows.Width, t.rows.Height = c.Width, 1
		t.planes = make([]float32, 3*c.Width)
		return t
	}
	tc := c
	tc.Width, tc.Height, tc.Layout = 256, 1, modelio.LayoutNCHW
	// The resize does not enter the values; "crop:S" with S below 256 would
	// not validate at the table's width.
	tc.Resize = ResizeStretch
	planes := make([]float32, 3*256)
	for v := range 256 {
		p := float32(v) / 255
		planes[v], planes[256+v], planes[512+v] = p, p, p
	}
	tc.Tensor(planes, t.table[:])
	t.src = [3]int{0, 1, 2}
	if c.BGR {
		t.src = [3]int{2, 1, 0}
	}
	return t
}

// row writes row y of an opaque picture, given as px with step bytes a pixel (3 or
// 4, red first, 8-bit samples; a fourth byte is ignored), into dst (len c.Len()).
func (t *tensorWriter) row(y int, px []byte, step int, dst []float32) {
	w := t.c.Width
	px = px[:step*w]
	if t.c.Channels == 1 {
		planes := t.planes
		for x := range w {
			planes[x] = float32(px[step*x]) / 255
			planes[w+x] = float32(px[step*x+1]) / 255
			planes[2*w+x] = float32(px[step*x+2]) / 255
		}
		t.rows.Tensor(planes, dst[y*w:(y+1)*w])
		return
	}
	t0, t1, t2 := t.table[0:256], t.table[256:512], t.table[512:768]
	s0, s1, s2 := t.src[0], t.src[1], t.src[2]
	if t.c.Layout == modelio.LayoutNHWC {
		out := dst[y*w*3 : (y+1)*w*3]
		for x := range w {
			p := px[step*x : step*x+3 : step*x+3]
			out[3*x] = t0[p[s0]]
			out[3*x+1] = t1[p[s1]]
			out[3*x+2] = t2[p[s2]]
		}
		return
	}
	hw := w * t.c.Height
	o0 := dst[y*w : (y+1)*w]
	o1 := dst[hw+y*w : hw+(y+1)*w]
	o2 := dst[2*hw+y*w : 2*hw+(y+1)*w]
	for x := range w {
		p := px[step*x : step*x+3 : step*x+3]
		o0[x] = t0[p[s0]]
		o1[x] = t1[p[s1]]
		o2[x] = t2[p[s2]]
	}
}
