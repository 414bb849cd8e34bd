package prep

// Generators of small test images, each built so that a person can check it: encoders of
// the standard library and golang.org/x/image where they exist, and hand-assembled files
// (CMYK JPEG, lossless WebP, EXIF segments, headers that claim huge sizes) where they do
// not. The file formats are those of the cited standards.

import (
	"bytes"
	"encoding/binary"
	"hash/crc32"
	"image"
	"image/color"
	"image/color/palette"
	"image/gif"
	"image/jpeg"
	"image/png"
	"testing"

	"golang.org/x/image/bmp"
	"golang.org/x/image/tiff"
)

func fill(img interface {
	image.Image
	Set(x, y int, c color.Color)
}, c color.Color) {
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			img.Set(x, y, c)
		}
	}
}

func solidNRGBA(w, h int, c color.NRGBA) *image.NRGBA {
	img := image.NewNRGBA(image.Rect(0, 0, w, h))
	fill(img, c)
	return img
}

func encPNG(t testing.TB, img image.Image) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := png.Encode(&b, img); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func encJPEG(t testing.TB, img image.Image) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := jpeg.Encode(&b, img, &jpeg.Options{Quality: 95}); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func encBMP(t testing.TB, img image.Image) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := bmp.Encode(&b, img); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func encTIFF(t testing.TB, img image.Image) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := tiff.Encode(&b, img, &tiff.Options{Compression: tiff.Deflate}); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

// animatedGIF has two full frames: red, then blue.
func animatedGIF(t testing.TB, w, h int) []byte {
	t.Helper()
	pal := color.Palette{color.RGBA{255, 0, 0, 255}, color.RGBA{0, 0, 255, 255}}
	f0 := image.NewPaletted(image.Rect(0, 0, w, h), pal) // all index 0: red
	f1 := image.NewPaletted(image.Rect(0, 0, w, h), pal)
	for i := range f1.Pix {
		f1.Pix[i] = 1
	}
	var b bytes.Buffer
	if err := gif.EncodeAll(&b, &gif.GIF{Image: []*image.Paletted{f0, f1}, Delay: []int{10, 10}}); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

// partialGIF has a 4×4 logical screen and one opaque green 2×2 frame at (2,2).
func partialGIF(t testing.TB) []byte {
	t.Helper()
	pal := color.Palette{color.RGBA{0, 255, 0, 255}}
	f := image.NewPaletted(image.Rect(2, 2, 4, 4), pal)
	var b bytes.Buffer
	g := &gif.GIF{Image: []*image.Paletted{f}, Delay: []int{0},
		Config: image.Config{ColorModel: pal, Width: 4, Height: 4}}
	if err := gif.EncodeAll(&b, g); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func palettePNG(t testing.TB) []byte {
	img := image.NewPaletted(image.Rect(0, 0, 3, 1), palette.WebSafe)
	img.SetColorIndex(0, 0, 0)   // WebSafe[0] = #000000
	img.SetColorIndex(1, 0, 5)   // WebSafe[5] = #0000ff
	img.SetColorIndex(2, 0, 215) // WebSafe[215] = #ffffff
	return encPNG(t, img)
}

// ---- hand-assembled files ----

// pngChunk is length, type, data, CRC-32 of type+data (PNG spec, ISO/IEC 15948, 5.3).
func pngChunk(typ string, data []byte) []byte {
	var b bytes.Buffer
	binary.Write(&b, binary.BigEndian, uint32(len(data)))
	b.WriteString(typ)
	b.Write(data)
	binary.Write(&b, binary.BigEndian, crc32.ChecksumIEEE(append([]byte(typ), data...)))
	return b.Bytes()
}

// bombPNG is a valid PNG signature and IHDR claiming w×h 8-bit RGBA, a tiny IDAT and IEND.
func bombPNG(w, h uint32) []byte {
	var b bytes.Buffer
	b.WriteString("\x89PNG\r\n\x1a\n")
	ihdr := make([]byte, 13)
	binary.BigEndian.PutUint32(ihdr[0:], w)
	binary.BigEndian.PutUint32(ihdr[4:], h)
	ihdr[8], ihdr[9] = 8, 6 // bit depth 8, colour type 6 (RGBA)
	b.Write(pngChunk("IHDR", ihdr))
	b.Write(pngChunk("IDAT", []byte{0x78, 0x9c, 0x03, 0x00, 0x00, 0x00, 0x00, 0x01})) // zlib of nothing
	b.Write(pngChunk("IEND", nil))
	return b.Bytes()
}

// bombGIF is a GIF89a header with a logical screen of w×h and no frames (GIF89a spec, 18).
func bombGIF(w, h uint16) []byte {
	b := []byte("GIF89a")
	b = binary.LittleEndian.AppendUint16(b, w)
	b = binary.LittleEndian.AppendUint16(b, h)
	b = append(b, 0x80, 0, 0) // global colour table of 2 entries
	b = append(b, 0, 0, 0, 255, 255, 255)
	return append(b, 0x3b)
}

// bombBMP is a BITMAPINFOHEADER file claiming w×h at 24 bits per pixel with no pixels.
func bombBMP(w, h int32) []byte {
	b := []byte("BM")
	b = binary.LittleEndian.AppendUint32(b, 54) // file size (not checked)
	b = binary.LittleEndian.AppendUint32(b, 0)
	b = binary.LittleEndian.AppendUint32(b, 54) // pixel data offset
	b = binary.LittleEndian.AppendUint32(b, 40) // header size
	b = binary.LittleEndian.AppendUint32(b, uint32(w))
	b = binary.LittleEndian.AppendUint32(b, uint32(h))
	b = binary.LittleEndian.AppendUint16(b, 1)  // planes
	b = binary.LittleEndian.AppendUint16(b, 24) // bits per pixel
	return append(b, make([]byte, 24)...)       // compression 0 and the rest
}

// bombJPEG is SOI, a baseline SOF0 claiming w×h with three components, a start of scan
// header and EOI, without any entropy-coded data (T.81 B.2.2, B.2.3).
func bombJPEG(w, h uint16) []byte {
	b := []byte{0xFF, 0xD8, 0xFF, 0xC0, 0, 17, 8}
	b = binary.BigEndian.AppendUint16(b, h)
	b = binary.BigEndian.AppendUint16(b, w)
	b = append(b, 3, 1, 0x11, 0, 2, 0x11, 0, 3, 0x11, 0)
	b = append(b, 0xFF, 0xDA, 0, 12, 3, 1, 0x00, 2, 0x11, 3, 0x11, 0, 63, 0)
	return append(b, 0xFF, 0xD9)
}

// bombTIFF is a little-endian TIFF whose only IFD claims w×h, 8-bit gray (TIFF 6.0, 2).
func bombTIFF(w, h uint32) []byte { return grayTIFF(w, h, nil, 0) }

// grayTIFF is a little-endian, uncompressed 8-bit gray TIFF (TIFF 6.0, section 2 and
// "Grayscale images"): header, pad zero bytes, the pixels as one strip, then the IFD.
func grayTIFF(w, h uint32, pixels []byte, pad int) []byte {
	type entry struct {
		tag, typ uint16
		val      uint32
	}
	dataAt := uint32(8 + pad)
	ifdAt := dataAt + uint32(len(pixels))
	ifdAt += ifdAt % 2 // word boundary
	entries := []entry{
		{256, 4, w}, {257, 4, h}, // ImageWidth, ImageLength
		{258, 3, 8}, {259, 3, 1}, {262, 3, 1}, // BitsPerSample, Compression none, BlackIsZero
		{273, 4, dataAt}, {278, 4, h}, {279, 4, uint32(len(pixels))}, // StripOffsets, RowsPerStrip, StripByteCounts
	}
	b := []byte("II*\x00")
	b = binary.LittleEndian.AppendUint32(b, ifdAt)
	b = append(b, make([]byte, pad)...)
	b = append(b, pixels...)
	for uint32(len(b)) < ifdAt {
		b = append(b, 0)
	}
	b = binary.LittleEndian.AppendUint16(b, uint16(len(entries)))
	for _, e := range entries {
		b = binary.LittleEndian.AppendUint16(b, e.tag)
		b = binary.LittleEndian.AppendUint16(b, e.typ)
		b = binary.LittleEndian.AppendUint32(b, 1)
		if e.typ == 3 {
			b = binary.LittleEndian.AppendUint16(b, uint16(e.val))
			b = append(b, 0, 0)
		} else {
			b = binary.LittleEndian.AppendUint32(b, e.val)
		}
	}
	return binary.LittleEndian.AppendUint32(b, 0)
}

// riffWebP wraps one chunk in a RIFF/WEBP container (WebP Container Specification).
func riffWebP(fourcc string, data []byte) []byte {
	chunk := []byte(fourcc)
	chunk = binary.LittleEndian.AppendUint32(chunk, uint32(len(data)))
	chunk = append(chunk, data...)
	if len(data)%2 == 1 {
		chunk = append(chunk, 0)
	}
	b := []byte("RIFF")
	b = binary.LittleEndian.AppendUint32(b, uint32(4+len(chunk)))
	b = append(b, "WEBP"...)
	return append(b, chunk...)
}

// bombWebP is a VP8X extended header claiming a canvas of w×h (24-bit fields storing
// size-1), with no image chunk.
func bombWebP(w, h uint32) []byte {
	d := make([]byte, 10)
	d[0] = 0 // flags
	put24 := func(p []byte, v uint32) { p[0], p[1], p[2] = byte(v), byte(v>>8), byte(v>>16) }
	put24(d[4:], w-1)
	put24(d[7:], h-1)
	return riffWebP("VP8X", d)
}

// bitWriter writes bits least significant first, as VP8L does.
type bitWriter struct {
	buf   []byte
	acc   uint64
	nbits uint
}

func (w *bitWriter) write(v uint64, n uint) {
	w.acc |= v << w.nbits
	w.nbits += n
	for w.nbits >= 8 {
		w.buf = append(w.buf, byte(w.acc))
		w.acc >>= 8
		w.nbits -= 8
	}
}

func (w *bitWriter) bytes() []byte {
	if w.nbits > 0 {
		w.buf = append(w.buf, byte(w.acc))
	}
	return w.buf
}

// losslessWebP is a w×h lossless WebP of one colour c (WebP Lossless Bitstream
// Specification, RFC 9649): no transforms, no colour cache, no meta prefix codes, and
// five "simple" prefix codes of one symbol each (green, red, blue, alpha, distance),
// so every pixel is coded with zero bits.
func losslessWebP(w, h int, c color.NRGBA) []byte {
	var bw bitWriter
	bw.write(0x2f, 8) // signature
	bw.write(uint64(w-1), 14)
	bw.write(uint64(h-1), 14)
	alphaUsed := uint64(0)
	if c.A != 255 {
		alphaUsed = 1
	}
	bw.write(alphaUsed, 1)
	bw.write(0, 3) // version
	bw.write(0, 1) // no transform
	bw.write(0, 1) // no colour cache
	bw.write(0, 1) // no meta prefix codes
	for _, sym := range []uint8{c.G, c.R, c.B, c.A} {
		bw.write(1, 1) // simple code
		bw.write(0, 1) // one symbol
		bw.write(1, 1) // 8-bit symbol
		bw.write(uint64(sym), 8)
	}
	bw.write(1, 1) // distance: simple code
	bw.write(0, 1) // one symbol
	bw.write(0, 1) // 1-bit symbol
	bw.write(0, 1) // symbol 0
	return riffWebP("VP8L", bw.bytes())
}

// cmykJPEG is a baseline JPEG (ITU-T T.81) of w×h pixels, all of one CMYK ink value
// (0 = no ink, 255 = full ink), stored the way Adobe applications store CMYK: an APP14
// "Adobe" segment with transform 0, and inverted samples (stored = 255 - ink).
// Every 8×8 block holds only a DC coefficient. With every quantiser 8, the DC of a block of
// constant sample s is s-128 after quantisation (T.81 A.3.3: F(0,0) = 8×(s-128)), so the
// decoder reproduces s exactly. The DC Huffman table gives each size category 0–11 a
// 4-bit code equal to the category; the AC table has one 1-bit code, "0", for end of block.
func cmykJPEG(w, h int, ink [4]uint8) []byte {
	seg := func(marker byte, body []byte) []byte {
		b := []byte{0xFF, marker}
		b = binary.BigEndian.AppendUint16(b, uint16(len(body)+2))
		return append(b, body...)
	}
	out := []byte{0xFF, 0xD8}
	out = append(out, seg(0xEE, []byte("Adobe\x00\x64\x00\x00\x00\x00\x00"))...)
	dqt := append([]byte{0x00}, bytes.Repeat([]byte{8}, 64)...)
	out = append(out, seg(0xDB, dqt)...)
	sof := []byte{8}
	sof = binary.BigEndian.AppendUint16(sof, uint16(h))
	sof = binary.BigEndian.AppendUint16(sof, uint16(w))
	sof = append(sof, 4)
	for id := byte(1); id <= 4; id++ {
		sof = append(sof, id, 0x11, 0)
	}
	out = append(out, seg(0xC0, sof)...)
	dht := []byte{0x00, 0, 0, 0, 12, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0}
	dht = append(dht, 0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11)
	dht = append(dht, 0x10, 1, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0x00)
	out = append(out, seg(0xC4, dht)...)
	sos := []byte{4, 1, 0x00, 2, 0x00, 3, 0x00, 4, 0x00, 0, 63, 0}
	out = append(out, seg(0xDA, sos)...)

	var bits []byte // MSB first, as T.81 F.1.2.3 packs them
	acc, n := uint32(0), 0
	put := func(v uint32, nb int) {
		for i := nb - 1; i >= 0; i-- {
			acc = acc<<1 | (v>>uint(i))&1
			n++
			if n == 8 {
				bits = append(bits, byte(acc))
				if byte(acc) == 0xFF {
					bits = append(bits, 0x00) // byte stuffing
				}
				acc, n = 0, 0
			}
		}
	}
	blocks := ((w + 7) / 8) * ((h + 7) / 8)
	var pred [4]int
	for range blocks {
		for c := range 4 {
			dc := int(255-ink[c]) - 128
			diff := dc - pred[c]
			pred[c] = dc
			cat, mag := 0, diff
			if mag < 0 {
				mag = -mag
			}
			for mag>>cat != 0 {
				cat++
			}
			put(uint32(cat), 4)
			if cat > 0 {
				v := diff
				if v < 0 {
					v += 1<<cat - 1
				}
				put(uint32(v), cat)
			}
			put(0, 1) // end of block
		}
	}
	for n != 0 {
		put(1, 1) // pad with ones (T.81 F.1.2.3)
	}
	out = append(out, bits...)
	return append(out, 0xFF, 0xD9)
}

// withExif inserts, right after SOI, an APP1 segment "Exif\0\0" + a TIFF structure whose
// IFD0 has one entry: Orientation (0x0112), SHORT, count 1, value o (EXIF 2.32 4.5.4,
// TIFF 6.0 section 2). bigEndian picks "MM" over "II".
func withExif(jpg []byte, o uint16, bigEndian bool) []byte {
	var bo binary.AppendByteOrder = binary.LittleEndian
	t := []byte("II*\x00")
	if bigEndian {
		bo = binary.BigEndian
		t = []byte("MM\x00*")
	}
	t = bo.AppendUint32(t, 8)
	t = bo.AppendUint16(t, 1)
	t = bo.AppendUint16(t, 0x0112)
	t = bo.AppendUint16(t, 3)
	t = bo.AppendUint32(t, 1)
	t = bo.AppendUint16(t, o)
	t = append(t, 0, 0)
	t = bo.AppendUint32(t, 0) // no next IFD
	return withAPP1(jpg, append([]byte("Exif\x00\x00"), t...))
}

// withAPP1 inserts an APP1 segment with the given body right after SOI.
func withAPP1(jpg, body []byte) []byte {
	seg := []byte{0xFF, 0xE1}
	seg = binary.BigEndian.AppendUint16(seg, uint16(len(body)+2))
	seg = append(seg, body...)
	out := append([]byte{}, jpg[:2]...)
	out = append(out, seg...)
	return append(out, jpg[2:]...)
}
