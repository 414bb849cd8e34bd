package prep

import (
	"compress/zlib"
	"encoding/binary"
	"hash/crc32"
	"image"
	"image/color"
	"io"
)

// The fast PNG path of [Decoder]. It accepts a file only where the standard
// library's image/png (which [Load] uses) accepts it too, and then gives the
// values Load, Fit and TensorFromImage give: it checks what image/png checks (the
// signature, each chunk's CRC up to IEND, the order of IHDR, PLTE, tRNS, IDAT
// and IEND, the zlib stream and its checksum, the amount of pixel data, the
// filter types) and converts samples to colours as image/png does, then to
// opaque pixels as flatten does. Everything else, or any doubt, returns ok ==
// false and the caller decodes the file the general way, which also words the
// error. The PNG format is the W3C's PNG specification (Second Edition), sections
// 5 (chunks), 9 (filters) and 11 (chunk contents).

// pngSignature starts every PNG file (PNG specification, 5.2).
const pngSignature = "\x89PNG\r\n\x1a\n"

// Colour types (PNG specification, 11.2.2, table 11.1).
const (
	pngGray      = 0
	pngRGB       = 2
	pngPalette   = 3
	pngGrayAlpha = 4
	pngRGBA      = 6
)

// Chunk order as image/png tracks it: each stage is the last of IHDR, PLTE,
// tRNS, IDAT and IEND seen.
const (
	stStart = iota
	stIHDR
	stPLTE
	stTRNS
	stIDAT
	stIEND
)

// pngRows is a PNG inflated and unfiltered into Decoder.raw.
type pngRows struct {
	w, h    int
	depth   int // bits a sample: 1, 2, 4 or 8
	colour  int // pngGray, ...
	rowSize int // bytes a row, its filter byte included
	bpp     int // bytes a pixel, at least 1: how far the filters look left
	win     image.Rectangle

	palette [256][3]uint8 // PLTE entries; image/png reads the rest as black
	np      int           // PLTE entries
	alpha   [256]uint8    // tRNS alpha of palette entries
	nAlpha  int
	// Gray or RGB tRNS: the colour that is transparent (its low bytes,
	// scaled to 8 bits for gray below 8 bits, as image/png does).
	keyed bool
	key   [3]uint8
}

// paletted says whether p is a palette image.
func (p *pngRows) paletted() bool { return p.colour == pngPalette }

// inflatePNG reads data as a PNG that the fast path handles for c: not
// interlaced, 8 bits a sample or fewer, at most maxPixels, and with a size that
// Fit only cuts (plainCut). It leaves the unfiltered rows in d.raw.
func (d *Decoder) inflatePNG(data []byte, c Config, maxPixels int) (p *pngRows, ok bool) {
	if len(data) < len(pngSignature) || string(data[:len(pngSignature)]) != pngSignature {
		return nil, false
	}
	p = &d.png
	*p = pngRows{}
	run := d.run[:0] // the first run of IDAT chunks: data offset, length
	inRun := false
	stage := stStart
	for pos := len(pngSignature); stage != stIEND; {
		if len(data)-pos < 12 {
			return nil, false
		}
		length := binary.BigEndian.Uint32(data[pos:])
		if uint64(length) > uint64(len(data)-pos-12) {
			return nil, false
		}
		n := int(length)
		typ := data[pos+4 : pos+8]
		body := data[pos+8 : pos+8+n]
		if crc32.Update(crc32.ChecksumIEEE(typ), crc32.IEEETable, body) != binary.BigEndian.Uint32(data[pos+8+n:]) {
			return nil, false
		}
		start := pos + 8
		pos += 12 + n
		wasRun := inRun
		inRun = false
		switch string(typ) {
		case "IHDR":
			if stage != stStart || !p.header(body, c, maxPixels) {
				return nil, false
			}
			stage = stIHDR
		case "PLTE":
			if stage != stIHDR {
				return nil, false
			}
			stage = stPLTE
			np := n / 3
			if n%3 != 0 || np <= 0 || np > 256 || np > 1<<p.depth {
				return nil, false
			}
			switch p.colour {
			case pngPalette:
				for i := range np {
					p.palette[i] = [3]uint8(body[3*i : 3*i+3])
				}
				p.np = np
			case pngRGB, pngRGBA:
				// Allowed and ignored (PNG specification 11.2.3; image/png).
			default:
				return nil, false
			}
		case "tRNS":
			switch {
			case p.paletted():
				if stage != stPLTE {
					return nil, false
				}
			case p.colour == pngRGB:
				if stage != stIHDR && stage != stPLTE {
					return nil, false
				}
			case stage != stIHDR:
				return nil, false
			}
			stage = stTRNS
			switch p.colour {
			case pngGray:
				if n != 2 {
					return nil, false
				}
				// image/png keeps the low byte, scaled in 8-bit arithmetic.
				k := body[1]
				switch p.depth {
				case 1:
					k *= 0xff
				case 2:
					k *= 0x55
				case 4:
					k *= 0x11
				}
				p.keyed, p.key = true, [3]uint8{k, k, k}
			case pngRGB:
				if n != 6 {
					return nil, false
				}
				p.keyed, p.key = true, [3]uint8{body[1], body[3], body[5]}
			case pngPalette:
				if n > 256 {
					return nil, false
				}
				copy(p.alpha[:], body)
				p.nAlpha = n
			default:
				return nil, false
			}
		case "IDAT":
			if stage < stIHDR || (stage == stIHDR && p.paletted()) {
				return nil, false
			}
			if stage != stIDAT {
				stage = stIDAT
				run = append(run, start, n)
				inRun = true
			} else if wasRun {
				run = append(run, start, n)
				inRun = true
			}
			// Else an IDAT after other chunks: image/png skips it.
		case "IEND":
			if stage != stIDAT || n != 0 {
				return nil, false
			}
			stage = stIEND
		}
	}
	d.run = run
	return p, d.inflate(data, p)
}

// header reads IHDR (PNG specification 11.2.2) and says whether the fast path
// takes the image for c.
func (p *pngRows) header(b []byte, c Config, maxPixels int) bool {
	if len(b) != 13 || b[10] != 0 || b[11] != 0 || b[12] != 0 { // compression, filter, interlace
		return false
	}
	w, h := int32(binary.BigEndian.Uint32(b[0:])), int32(binary.BigEndian.Uint32(b[4:]))
	if w <= 0 || h <= 0 || int64(w)*int64(h) > int64(maxPixels) {
		return false
	}
	p.w, p.h, p.depth, p.colour = int(w), int(h), int(b[8]), int(b[9])
	channels := 0
	switch {
	case p.colour == pngGray && (p.depth == 1 || p.depth == 2 || p.depth == 4 || p.depth == 8):
		channels = 1
	case p.colour == pngPalette && (p.depth == 1 || p.depth == 2 || p.depth == 4 || p.depth == 8):
		channels = 1
	case p.colour == pngGrayAlpha && p.depth == 8:
		channels = 2
	case p.colour == pngRGB && p.depth == 8:
		channels = 3
	case p.colour == pngRGBA && p.depth == 8:
		channels = 4
	default:
		return false // 16 bits a sample, or not a valid combination
	}
	win, ok := plainCut(p.w, p.h, c)
	if !ok {
		return false
	}
	p.win = win
	p.rowSize = 1 + (channels*p.depth*p.w+7)/8
	p.bpp = (channels*p.depth + 7) / 8
	return int64(p.rowSize)*int64(p.h) <= decoderMaxRaw
}

// inflate inflates the IDAT run of data into d.raw (through C zlib
// where the build has cgo, else compress/zlib) and unfilters it, with the
// checks image/png makes: enough pixel data, the zlib checksum, no data left
// over (image/png's "too much pixel data"; it passes when the stream ends at
// the end of one of the run's chunks), and valid filter types.
func (d *Decoder) inflate(data []byte, p *pngRows) bool {
	run := d.run
	var stream []byte
	if len(run) == 2 {
		stream = data[run[0] : run[0]+run[1]]
	} else {
		d.idat = d.idat[:0]
		for i := 0; i < len(run); i += 2 {
			d.idat = append(d.idat, data[run[i]:run[i]+run[i+1]]...)
		}
		stream = d.idat
	}
	size := p.rowSize * p.h
	if cap(d.raw) < size+1 { // one spare byte for inflateC
		d.raw = make([]byte, size+1)
	}
	raw := d.raw[:size]
	used, ok := d.inflater()(stream, raw)
	if !ok {
		return false
	}
	end, atEnd := 0, false
	for i := 1; i < len(run); i += 2 {
		end += run[i]
		atEnd = atEnd || used == end
	}
	if !atEnd {
		return false
	}
	return unfilter(raw, p.rowSize, p.bpp, d.zeroRow(p.rowSize-1))
}

// inflater is the Decoder's way to inflate: inflateC where the build has
// cgo, unless the tests ask for compress/zlib (goInflate).
func (d *Decoder) inflater() func(src, dst []byte) (used int, ok bool) {
	if haveCInflate && !d.goInflate {
		return inflateC
	}
	return d.inflateGo
}

// inflateGo is inflateC in Go: compress/zlib, with image/png's check that the
// stream ends, its checksum correct, right after the rows.
func (d *Decoder) inflateGo(stream, raw []byte) (used int, ok bool) {
	d.br.Reset(stream)
	if d.zr == nil {
		zr, err := zlib.NewReader(&d.br)
		if err != nil {
			return 0, false
		}
		d.zr = zr
	} else if err := d.zr.(zlib.Resetter).Reset(&d.br, nil); err != nil {
		return 0, false
	}
	if _, err := io.ReadFull(d.zr, raw); err != nil {
		return 0, false
	}
	// image/png reads once more to verify the zlib checksum, and gives up
	// after 100 empty reads.
	var one [1]byte
	n, err := 0, error(nil)
	for i := 0; n == 0 && err == nil; i++ {
		if i == 100 {
			return 0, false
		}
		n, err = d.zr.Read(one[:])
	}
	if n != 0 || err != io.EOF {
		return 0, false
	}
	return len(stream) - d.br.Len(), true
}

// zeroRow returns n zero bytes, the row above the first (PNG specification 9.2).
func (d *Decoder) zeroRow(n int) []byte {
	if cap(d.zero) < n {
		d.zero = make([]byte, n)
	}
	return d.zero[:n]
}

// unfilter reverses the filters of the rows in raw, in place (PNG
// specification 9.2 and 9.4), and says whether every filter type is one of
// the five the specification defines. bpp is the byte distance to the
// corresponding byte of the pixel on the left.
func unfilter(raw []byte, rowSize, bpp int, zero []byte) bool {
	prev := zero
	for y := 0; y < len(raw); y += rowSize {
		cur := raw[y+1 : y+rowSize]
		switch raw[y] {
		case 0: // None
		case 1: // Sub: Raw(x) = Sub(x) + Raw(x-bpp)
			for i := bpp; i < len(cur); i++ {
				cur[i] += cur[i-bpp]
			}
		case 2: // Up: Raw(x) = Up(x) + Prior(x)
			for i, b := range prev {
				cur[i] += b
			}
		case 3: // Average: Raw(x) = Average(x) + floor((Raw(x-bpp) + Prior(x)) / 2)
			if bpp == 3 && len(cur)%3 == 0 {
				unaverage3(cur, prev)
				break
			}
			for i := range min(bpp, len(cur)) {
				cur[i] += prev[i] / 2
			}
			for i := bpp; i < len(cur); i++ {
				cur[i] += uint8((int(cur[i-bpp]) + int(prev[i])) / 2)
			}
		case 4: // Paeth: Raw(x) = Paeth(x) + PaethPredictor(Raw(x-bpp), Prior(x), Prior(x-bpp))
			switch {
			case bpp == 3 && len(cur)%3 == 0:
				unpaeth3(cur, prev)
			case bpp == 4 && len(cur)%4 == 0:
				unpaeth4(cur, prev)
			default:
				unpaeth(cur, prev, bpp)
			}
		default:
			return false
		}
		prev = cur
	}
	return true
}

// unpaeth reverses the Paeth filter of one row (PNG specification 9.4): each
// byte gets back paeth of a (left), b (above) and c (upper left). It walks
// each byte position of the pixel along the row, so that a and c stay in
// registers. Left of the first pixel a = c = 0.
func unpaeth(cur, prev []byte, bpp int) {
	prev = prev[:len(cur)]
	for k := range min(bpp, len(cur)) {
		a, c := 0, 0
		for j := k; j < len(cur); j += bpp {
			b := int(prev[j])
			a = (paeth(a, b, c) + int(cur[j])) & 0xff
			cur[j] = byte(a)
			c = b
		}
	}
}

// paeth is the PNG specification's PaethPredictor (9.4): of a (left), b
// (above) and c (upper left), the one nearest to p = a + b - c, ties in the
// order a, b, c, using |p - a| = |b - c|, |p - b| = |a - c|,
// |p - c| = |a + b - 2c|. Kept small enough for the compiler to inline it
// into the unfilter loops (a call per byte would cost as much as the work).
func paeth(a, b, c int) int {
	pa, pb, pc := abs(b-c), abs(a-c), abs(a+b-2*c)
	if pa <= min(pb, pc) {
		return a
	}
	if pb <= pc {
		return b
	}
	return c
}

// unpaeth3 is unpaeth for three bytes a pixel (8-bit RGB), len(cur) a
// multiple of 3: it steps a pixel at a time, so that the three dependency
// chains (one per sample, each byte waits for its left neighbour) run side
// by side instead of one after the other. Measured on the rows of 64×64
// RGB probe images: Paeth rows about twice as fast as unpaeth.
func unpaeth3(cur, prev []byte) {
	prev = prev[:len(cur)]
	var a0, a1, a2, c0, c1, c2 int
	for j := 0; j+2 < len(cur); j += 3 {
		p, q := prev[j:j+3:j+3], cur[j:j+3:j+3]
		b0, b1, b2 := int(p[0]), int(p[1]), int(p[2])
		a0 = (paeth(a0, b0, c0) + int(q[0])) & 0xff
		a1 = (paeth(a1, b1, c1) + int(q[1])) & 0xff
		a2 = (paeth(a2, b2, c2) + int(q[2])) & 0xff
		q[0], q[1], q[2] = byte(a0), byte(a1), byte(a2)
		c0, c1, c2 = b0, b1, b2
	}
}

// unpaeth4 is unpaeth3 for four bytes a pixel (8-bit RGBA).
func unpaeth4(cur, prev []byte) {
	prev = prev[:len(cur)]
	var a0, a1, a2, a3, c0, c1, c2, c3 int
	for j := 0; j+3 < len(cur); j += 4 {
		p, q := prev[j:j+4:j+4], cur[j:j+4:j+4]
		b0, b1, b2, b3 := int(p[0]), int(p[1]), int(p[2]), int(p[3])
		a0 = (paeth(a0, b0, c0) + int(q[0])) & 0xff
		a1 = (paeth(a1, b1, c1) + int(q[1])) & 0xff
		a2 = (paeth(a2, b2, c2) + int(q[2])) & 0xff
		a3 = (paeth(a3, b3, c3) + int(q[3])) & 0xff
		q[0], q[1], q[2], q[3] = byte(a0), byte(a1), byte(a2), byte(a3)
		c0, c1, c2, c3 = b0, b1, b2, b3
	}
}

// unaverage3 reverses the Average filter of one row of three bytes a pixel,
// len(cur) a multiple of 3, a pixel at a time as unpaeth3 does.
func unaverage3(cur, prev []byte) {
	prev = prev[:len(cur)]
	var a0, a1, a2 int
	for j := 0; j+2 < len(cur); j += 3 {
		p, q := prev[j:j+3:j+3], cur[j:j+3:j+3]
		a0 = (int(q[0]) + (a0+int(p[0]))>>1) & 0xff
		a1 = (int(q[1]) + (a1+int(p[1]))>>1) & 0xff
		a2 = (int(q[2]) + (a2+int(p[2]))>>1) & 0xff
		q[0], q[1], q[2] = byte(a0), byte(a1), byte(a2)
	}
}

// abs is |x| without a branch (x >> 63 is 0 or -1).
func abs(x int) int {
	return (x ^ x>>63) - x>>63
}

// writePNG writes the window of the unfiltered rows in d.raw into dst for c:
// samples to colours as image/png reads them, composited over c.Background and
// cut as flatten does, converted to values as TensorFromImage does.
func (d *Decoder) writePNG(p *pngRows, c Config, dst []float32) {
	if d.tw == nil || d.tw.c != c {
		d.tw = newTensorWriter(c)
	}
	tw := d.tw
	o := compositor{uint32(c.Background.R) * 0x101, uint32(c.Background.G) * 0x101, uint32(c.Background.B) * 0x101}
	// over composites a straight-alpha pixel into px[0:3], as flatten does
	// for the NRGBA image image/png returns for alpha and keyed colours.
	over := func(px []byte, a uint8) {
		cr, cg, cb, ca := color.NRGBA{px[0], px[1], px[2], a}.RGBA()
		px[0], px[1], px[2] = o.over(cr, cg, cb, ca)
	}
	x0, w := p.win.Min.X, p.win.Dx()
	if cap(d.rgba) < 4*w {
		d.rgba = make([]byte, 4*w)
	}
	out := d.rgba[:4*w]
	var table [256][3]uint8
	if p.paletted() {
		// image/png's palette: PLTE entries, black beyond them, tRNS alpha;
		// indices past both read as opaque black, which composites to
		// black, table's zero value.
		for i := range max(p.np, p.nAlpha) {
			px := table[i][:]
			copy(px, p.palette[i][:])
			a := uint8(0xff)
			if i < p.nAlpha {
				a = p.alpha[i]
			}
			over(px, a)
		}
	}
	scale := [9]uint8{1: 0xff, 2: 0x55, 4: 0x11, 8: 1}[p.depth]
	for y := range p.win.Dy() {
		row := d.raw[(p.win.Min.Y+y)*p.rowSize+1 : (p.win.Min.Y+y+1)*p.rowSize]
		switch {
		case p.colour == pngRGB && !p.keyed:
			tw.row(y, row[3*x0:], 3, dst)
			continue
		case p.colour == pngRGB:
			for x := range w {
				s, px := row[3*(x0+x):3*(x0+x)+3], out[4*x:4*x+4]
				copy(px, s)
				if [3]uint8(s) == p.key {
					over(px, 0)
				}
			}
		case p.colour == pngRGBA:
			px := row[4*x0 : 4*(x0+w)]
			for x := 0; x < len(px); x += 4 {
				if a := px[x+3]; a != 0xff {
					over(px[x:x+4], a)
				}
			}
			tw.row(y, px, 4, dst)
			continue
		case p.colour == pngGrayAlpha:
			for x := range w {
				v, a := row[2*(x0+x)], row[2*(x0+x)+1]
				px := out[4*x : 4*x+4]
				px[0], px[1], px[2] = v, v, v
				if a != 0xff {
					over(px, a)
				}
			}
		case p.depth == 8: // gray or palette, one byte a pixel
			for x := range w {
				v, px := row[x0+x], out[4*x:4*x+4]
				if p.paletted() {
					copy(px, table[v][:])
					continue
				}
				px[0], px[1], px[2] = v, v, v
				if p.keyed && v == p.key[0] {
					over(px, 0)
				}
			}
		default: // gray or palette below 8 bits, most significant bits first
			bits, mask := uint(p.depth), uint8(1<<p.depth-1)
			for x := range w {
				i := uint(x0+x) * bits
				v := row[i/8] >> (8 - bits - i%8) & mask
				px := out[4*x : 4*x+4]
				if p.paletted() {
					copy(px, table[v][:])
					continue
				}
				v *= scale
				px[0], px[1], px[2] = v, v, v
				if p.keyed && v == p.key[0] {
					over(px, 0)
				}
			}
		}
		tw.row(y, out, 4, dst)
	}
}
