package prep

import (
	"image"
	"image/color"
)

// This file resizes a picture and cuts a window out of the result in one go,
// computing only the window's pixels: the "resize, then centre crop" of
// evaluation pipelines without the full-size intermediate. The arithmetic is
// that of the Pillow imaging library's bilinear resample (libImaging/Resample.c:
// a triangle filter widened by the scale factor when shrinking, coefficients
// normalised and rounded to 22 fractional bits, each pass rounded to 8 bits,
// horizontal pass first), because that is what torchvision's Resize does to a
// PIL image, and a model trained that way should see the same pixels here.

// fracBits is the number of fractional bits of the fixed-point coefficients
// (Pillow's PRECISION_BITS: 32 - 8 - 2, so that 255 × a coefficient sum of 1
// plus rounding stays inside an int32).
const fracBits = 32 - 8 - 2

// taps are the source pixels one output pixel reads: first is the index of the
// first, k their fixed-point weights.
type taps struct {
	first int
	k     []int32
}

// triangleTaps returns the taps of output pixels from..from+count-1 of a
// bilinear resize of in source pixels to out. Output pixel i is centred at
// source coordinate (i + 0.5)·in/out (pixel j spans j..j+1); the filter is the
// triangle 1 − |x| stretched by in/out when shrinking (antialiasing), so every
// source pixel under the output pixel contributes.
func triangleTaps(in, out, from, count int) []taps {
	scale := float64(in) / float64(out)
	fscale := max(scale, 1)
	support := fscale // the triangle's support is 1
	res := make([]taps, count)
	w := make([]float64, 0, int(2*support)+3)
	for i := range res {
		center := (float64(from+i) + 0.5) * scale
		lo := max(int(center-support+0.5), 0)
		hi := min(int(center+support+0.5), in)
		w = w[:0]
		sum := 0.0
		for x := lo; x < hi; x++ {
			d := (float64(x) - center + 0.5) / fscale
			if d < 0 {
				d = -d
			}
			v := 0.0
			if d < 1 {
				v = 1 - d
			}
			w = append(w, v)
			sum += v
		}
		k := make([]int32, len(w))
		for j, v := range w {
			if sum != 0 {
				v /= sum
			}
			if v < 0 {
				k[j] = int32(-0.5 + v*(1<<fracBits))
			} else {
				k[j] = int32(0.5 + v*(1<<fracBits))
			}
		}
		res[i] = taps{first: lo, k: k}
	}
	return res
}

// clip8 turns a fixed-point sum into a byte: the sum carries the rounding half
// already, so this truncates and clamps.
func clip8(v int64) uint8 {
	if v <= 0 {
		return 0
	}
	if v >= 255<<fracBits {
		return 255
	}
	return uint8(v >> fracBits)
}

// resizeWindow flattens the part r of img over bg, resizes it (in thought) to
// rw×rh and returns the window win of that resized picture (win lies inside
// (0,0)-(rw,rh)). Only the source rows and columns the window's taps read are
// flattened, bandRows rows at a time, so memory is one band plus a picture of
// the window's width and the needed rows' height.
func resizeWindow(img image.Image, r image.Rectangle, bg color.NRGBA, rw, rh int, win image.Rectangle) *image.NRGBA {
	sw, sh := r.Dx(), r.Dy()
	ht := triangleTaps(sw, rw, win.Min.X, win.Dx())
	vt := triangleTaps(sh, rh, win.Min.Y, win.Dy())
	x0, x1 := sw, 0
	for _, t := range ht {
		x0, x1 = min(x0, t.first), max(x1, t.first+len(t.k))
	}
	y0, y1 := sh, 0
	for _, t := range vt {
		y0, y1 = min(y0, t.first), max(y1, t.first+len(t.k))
	}
	// Horizontal pass: rows y0..y1-1 of the source, window columns only.
	w := win.Dx()
	mid := make([]uint8, 3*w*(y1-y0))
	for b0 := y0; b0 < y1; b0 += bandRows {
		b1 := min(b0+bandRows, y1)
		band := flatten(img, image.Rect(r.Min.X+x0, r.Min.Y+b0, r.Min.X+x1, r.Min.Y+b1), bg)
		for y := range b1 - b0 {
			row := band.Pix[y*band.Stride:]
			out := mid[3*w*(b0-y0+y):]
			for i, t := range ht {
				var sr, sg, sb int64 = 1 << (fracBits - 1), 1 << (fracBits - 1), 1 << (fracBits - 1)
				p := row[4*(t.first-x0):]
				for j, k := range t.k {
					sr += int64(p[4*j]) * int64(k)
					sg += int64(p[4*j+1]) * int64(k)
					sb += int64(p[4*j+2]) * int64(k)
				}
				out[3*i], out[3*i+1], out[3*i+2] = clip8(sr), clip8(sg), clip8(sb)
			}
		}
	}
	// Vertical pass over the narrowed rows.
	dst := image.NewNRGBA(image.Rect(0, 0, w, win.Dy()))
	for yi, t := range vt {
		d := dst.Pix[yi*dst.Stride:]
		for x := range 3 * w {
			var s int64 = 1 << (fracBits - 1)
			for j, k := range t.k {
				s += int64(mid[3*w*(t.first-y0+j)+x]) * int64(k)
			}
			d[x/3*4+x%3] = clip8(s)
		}
		for x := range w {
			d[4*x+3] = 0xff
		}
	}
	return dst
}

// centreWindow is the window of size w×h centred in a rw×rh picture, placed as
// torchvision's CenterCrop places it: offset round((rw − w)/2) with halves
// rounded to even (Python's round), so a 117-pixel surplus leaves 58 on the
// left and 59 on the right.
func centreWindow(rw, rh, w, h int) image.Rectangle {
	half := func(d int) int {
		q := d / 2
		if d%2 == 1 && q%2 == 1 { // q + 0.5 rounds to the even neighbour
			q++
		}
		return q
	}
	x, y := half(rw-w), half(rh-h)
	return image.Rect(x, y, x+w, y+h)
}

// scaledSize is the size a sw×sh picture is resized to before the centre is
// cut: for crop:S the shorter side becomes S and the longer one
// floor(S·long/short), as torchvision's Resize(S) computes it; for crop
// (S = 0) the picture is scaled just enough to cover w×h, the same rule with
// the side that limits. Sides never drop below the window's.
func scaledSize(sw, sh, w, h, s int) (rw, rh int) {
	W, H, SW, SH := int64(w), int64(h), int64(sw), int64(sh)
	if s > 0 {
		S := int64(s)
		if SW <= SH {
			rw, rh = s, int(S*SH/SW)
		} else {
			rw, rh = int(S*SW/SH), s
		}
	} else if SW*H > SH*W { // wider than w:h: the height limits
		rw, rh = int(H*SW/SH), h
	} else {
		rw, rh = w, int(W*SH/SW)
	}
	return max(rw, w), max(rh, h)
}
