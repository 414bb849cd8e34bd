package prep

import (
	"bytes"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
)

// colourAt is the 8-bit straight RGBA of img at (x, y) relative to its origin.
func colourAt(img image.Image, x, y int) color.NRGBA {
	b := img.Bounds()
	return color.NRGBAModel.Convert(img.At(b.Min.X+x, b.Min.Y+y)).(color.NRGBA)
}

func closeTo(a, b color.NRGBA, d int) bool {
	diff := func(x, y uint8) bool { return int(x)-int(y) <= d && int(y)-int(x) <= d }
	return diff(a.R, b.R) && diff(a.G, b.G) && diff(a.B, b.B) && diff(a.A, b.A)
}

// allocated runs f and returns the bytes it allocated (runtime.MemStats.TotalAlloc counts
// every allocation, so it bounds the peak heap growth from above).
func allocated(f func()) uint64 {
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	f()
	runtime.ReadMemStats(&after)
	return after.TotalAlloc - before.TotalAlloc
}

var (
	red   = color.NRGBA{255, 0, 0, 255}
	green = color.NRGBA{0, 255, 0, 255}
	blue  = color.NRGBA{0, 0, 255, 255}
	white = color.NRGBA{255, 255, 255, 255}
	black = color.NRGBA{0, 0, 0, 255}
)

// hostileCase is one odd or hostile image file: either an error class with words the
// message must contain, or a decoded size and a colour at (0, 0) after Fit over white.
type hostileCase struct {
	name     string // file name, extension included
	data     func(t testing.TB) []byte
	class    error    // nil: must decode
	words    []string // in the error message
	w, h     int      // decoded size
	want     color.NRGBA
	tolerate int    // colour tolerance (lossy formats)
	maxAlloc uint64 // bytes the load may allocate
}

func hostileCases() []hostileCase {
	const kib, mib = 1 << 10, 1 << 20
	validPNG := func(t testing.TB) []byte { return encPNG(t, solidNRGBA(16, 16, red)) }
	validJPEG := func(t testing.TB) []byte { return encJPEG(t, solidNRGBA(64, 64, blue)) }
	return []hostileCase{
		// Decompression bombs: the header claims far more than MaxPixels; refused after
		// reading the header, so the load allocates almost nothing.
		{name: "bomb.png", data: func(testing.TB) []byte { return bombPNG(100000, 100000) },
			class: ErrTooLarge, words: []string{"bomb.png", "100000×100000", "PNG"}, maxAlloc: 256 * kib},
		{name: "bomb.gif", data: func(testing.TB) []byte { return bombGIF(65535, 65535) },
			class: ErrTooLarge, words: []string{"65535×65535", "GIF"}, maxAlloc: 256 * kib},
		{name: "bomb.jpg", data: func(testing.TB) []byte { return bombJPEG(65500, 65500) },
			class: ErrTooLarge, words: []string{"65500×65500", "JPEG"}, maxAlloc: 256 * kib},
		{name: "bomb.bmp", data: func(testing.TB) []byte { return bombBMP(100000, 100000) },
			class: ErrTooLarge, words: []string{"100000×100000", "BMP"}, maxAlloc: 256 * kib},
		{name: "bomb.tif", data: func(testing.TB) []byte { return bombTIFF(100000, 100000) },
			class: ErrTooLarge, words: []string{"100000×100000", "TIFF"}, maxAlloc: 256 * kib},
		{name: "bomb.webp", data: func(testing.TB) []byte { return bombWebP(16384, 16384) },
			class: ErrTooLarge, words: []string{"16384×16384", "WebP"}, maxAlloc: 256 * kib},
		// Over 2^31 pixels the WebP decoder itself calls the header invalid.
		{name: "giant.webp", data: func(testing.TB) []byte { return bombWebP(1<<24, 1<<24) },
			class: ErrCorrupt, words: []string{"giant.webp", "WebP"}, maxAlloc: 256 * kib},
		{name: "zero-size.png", data: func(testing.TB) []byte { return bombPNG(0, 10) },
			class: ErrCorrupt, words: []string{"zero-size.png"}, maxAlloc: 256 * kib},

		// Damaged files.
		{name: "empty.png", data: func(testing.TB) []byte { return nil },
			class: ErrEmpty, words: []string{"empty.png", "0 bytes"}, maxAlloc: kib},
		{name: "truncated.png", data: func(t testing.TB) []byte { d := validPNG(t); return d[:len(d)/2] },
			class: ErrCorrupt, words: []string{"truncated.png", "PNG", "ends early"}, maxAlloc: mib},
		{name: "header-only.png", data: func(t testing.TB) []byte { return validPNG(t)[:20] },
			class: ErrCorrupt, words: []string{"header-only.png", "truncated"}, maxAlloc: mib},
		{name: "truncated.jpg", data: func(t testing.TB) []byte { d := validJPEG(t); return d[:len(d)/2] },
			class: ErrCorrupt, words: []string{"truncated.jpg", "JPEG"}, maxAlloc: mib},
		{name: "text.png", data: func(testing.TB) []byte { return []byte("hello, this is not a picture") },
			class: ErrFormat, words: []string{"text.png", "not an image", ".png", "68 65 6c 6c 6f"}, maxAlloc: kib * 64},
		{name: "one-byte.jpg", data: func(testing.TB) []byte { return []byte{0xFF} },
			class: ErrFormat, words: []string{"one-byte.jpg", "ff"}, maxAlloc: kib * 64},

		// Odd but valid files.
		{name: "png-named.jpg", data: validPNG, w: 16, h: 16, want: red, maxAlloc: mib},
		{name: "jpeg-named.png", data: validJPEG, w: 64, h: 64, want: blue, tolerate: 8, maxAlloc: mib},
		{name: "no-extension", data: validPNG, w: 16, h: 16, want: red, maxAlloc: mib},
		{name: "16bit.png", data: func(t testing.TB) []byte {
			img := image.NewNRGBA64(image.Rect(0, 0, 4, 4))
			fill(img, color.NRGBA64{0xFFFF, 0x8080, 0x0000, 0xFFFF}) // 0x8080/257 = 128
			return encPNG(t, img)
		}, w: 4, h: 4, want: color.NRGBA{255, 128, 0, 255}, maxAlloc: mib},
		{name: "gray16.png", data: func(t testing.TB) []byte {
			img := image.NewGray16(image.Rect(0, 0, 3, 5))
			fill(img, color.Gray16{0x4040}) // 0x4040/257 = 64
			return encPNG(t, img)
		}, w: 3, h: 5, want: color.NRGBA{64, 64, 64, 255}, maxAlloc: mib},
		// CMYK: magenta + yellow ink = red; cyan alone = cyan (R = 255(1-C)(1-K), common practice).
		{name: "cmyk-red.jpg", data: func(testing.TB) []byte { return cmykJPEG(16, 8, [4]uint8{0, 255, 255, 0}) },
			w: 16, h: 8, want: red, tolerate: 2, maxAlloc: mib},
		{name: "cmyk-cyan.jpg", data: func(testing.TB) []byte { return cmykJPEG(9, 9, [4]uint8{255, 0, 0, 0}) },
			w: 9, h: 9, want: color.NRGBA{0, 255, 255, 255}, tolerate: 2, maxAlloc: mib},
		{name: "cmyk-half-black.jpg", data: func(testing.TB) []byte { return cmykJPEG(8, 8, [4]uint8{0, 0, 0, 128}) },
			w: 8, h: 8, want: color.NRGBA{127, 127, 127, 255}, tolerate: 2, maxAlloc: mib}, // 255×(1-128/255)
		{name: "palette.png", data: func(t testing.TB) []byte { return palettePNG(t) },
			w: 3, h: 1, want: black, maxAlloc: mib},
		// Alpha 0 over white is white; the straight colour under it must not leak.
		{name: "transparent.png", data: func(t testing.TB) []byte { return encPNG(t, solidNRGBA(5, 5, color.NRGBA{255, 0, 0, 0})) },
			w: 5, h: 5, want: white, maxAlloc: mib},
		// (255,0,0) at alpha 128 over white: G = B = 255×(1 - 128/255) = 127 (Porter & Duff "over").
		{name: "half-alpha.png", data: func(t testing.TB) []byte { return encPNG(t, solidNRGBA(5, 5, color.NRGBA{255, 0, 0, 128})) },
			w: 5, h: 5, want: color.NRGBA{255, 127, 127, 255}, maxAlloc: mib},
		{name: "animated.gif", data: func(t testing.TB) []byte { return animatedGIF(t, 6, 4) },
			w: 6, h: 4, want: red, maxAlloc: mib}, // first frame red, second blue
		{name: "partial-frame.gif", data: func(t testing.TB) []byte { return partialGIF(t) },
			w: 4, h: 4, want: white, maxAlloc: mib}, // (0,0) is outside the first frame: transparent
		{name: "one.png", data: func(t testing.TB) []byte { return encPNG(t, solidNRGBA(1, 1, green)) },
			w: 1, h: 1, want: green, maxAlloc: mib},
		{name: "strip.png", data: func(t testing.TB) []byte { return encPNG(t, solidNRGBA(10000, 20, blue)) },
			w: 10000, h: 20, want: blue, maxAlloc: 16 * mib},
		{name: "column.png", data: func(t testing.TB) []byte { return encPNG(t, solidNRGBA(20, 10000, red)) },
			w: 20, h: 10000, want: red, maxAlloc: 16 * mib},
		{name: "plain.bmp", data: func(t testing.TB) []byte { return encBMP(t, solidNRGBA(7, 3, green)) },
			w: 7, h: 3, want: green, maxAlloc: mib},
		{name: "plain.tiff", data: func(t testing.TB) []byte { return encTIFF(t, solidNRGBA(7, 3, blue)) },
			w: 7, h: 3, want: blue, maxAlloc: mib},
		{name: "lossless.webp", data: func(testing.TB) []byte { return losslessWebP(5, 3, color.NRGBA{10, 200, 30, 255}) },
			w: 5, h: 3, want: color.NRGBA{10, 200, 30, 255}, maxAlloc: mib},
		{name: "alpha.webp", data: func(testing.TB) []byte { return losslessWebP(2, 2, color.NRGBA{0, 0, 0, 0}) },
			w: 2, h: 2, want: white, maxAlloc: mib},
		// EXIF that lies (IFD offset past the end, entry count 65535): ignored, picture as stored.
		{name: "bad-exif.jpg", data: func(t testing.TB) []byte {
			return withAPP1(validJPEG(t), []byte("Exif\x00\x00II*\x00\xff\xff\xff\x7f"))
		}, w: 64, h: 64, want: blue, tolerate: 8, maxAlloc: mib},
		{name: "exif-many-entries.jpg", data: func(t testing.TB) []byte {
			return withAPP1(validJPEG(t), []byte("Exif\x00\x00MM\x00*\x00\x00\x00\x08\xff\xff\x01\x12"))
		}, w: 64, h: 64, want: blue, tolerate: 8, maxAlloc: mib},
	}
}

// TestHostileImages is a table: every odd or hostile image either decodes to the
// right size and colour, or fails with the right class and a message naming the file,
// without a panic and within a fixed allocation bound. Each case is read from a real file
// through Load.
func TestHostileImages(t *testing.T) {
	dir := t.TempDir()
	for _, tc := range hostileCases() {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(dir, tc.name)
			if err := os.WriteFile(path, tc.data(t), 0o644); err != nil {
				t.Fatal(err)
			}
			checkHostile(t, tc, path)
		})
	}
}

// checkHostile loads path and checks the outcome tc describes.
func checkHostile(t *testing.T, tc hostileCase, path string) {
	t.Helper()
	var img image.Image
	var err error
	n := allocated(func() { img, err = Load(path) })
	if n > tc.maxAlloc {
		t.Errorf("allocated %d bytes, bound %d", n, tc.maxAlloc)
	}
	if tc.class != nil {
		if err == nil {
			t.Fatalf("decoded %v, want error %v", img.Bounds(), tc.class)
		}
		if !errors.Is(err, tc.class) {
			t.Errorf("error %q is not %q", err, tc.class)
		}
		msg := err.Error()
		if !strings.HasPrefix(msg, "prep: "+path+": ") {
			t.Errorf("message %q does not start with prep: <file>:", msg)
		}
		for _, w := range tc.words {
			if !strings.Contains(msg, w) {
				t.Errorf("message %q lacks %q", msg, w)
			}
		}
		return
	}
	if err != nil {
		t.Fatal(err)
	}
	if b := img.Bounds(); b.Dx() != tc.w || b.Dy() != tc.h {
		t.Fatalf("size %dx%d, want %dx%d", b.Dx(), b.Dy(), tc.w, tc.h)
	}
	c := Default()
	c.Width, c.Height = min(tc.w, MaxSide), min(tc.h, MaxSide)
	if got := colourAt(Fit(img, c), 0, 0); !closeTo(got, tc.want, tc.tolerate) {
		t.Errorf("colour %v, want %v ± %d", got, tc.want, tc.tolerate)
	}
	// Both resize policies survive every shape, down to a 1×1 input and up to 224.
	for _, size := range [][2]int{{224, 224}, {1, 1}, {3, 500}} {
		for _, r := range []string{ResizeStretch, ResizeCrop} {
			c.Width, c.Height, c.Resize = size[0], size[1], r
			if b := Fit(img, c).Bounds(); b != image.Rect(0, 0, size[0], size[1]) {
				t.Errorf("Fit %s to %v gave %v", r, size, b)
			}
		}
	}
}

// Missing files and folders: errors that name the file.
func TestLoadNotAFile(t *testing.T) {
	dir := t.TempDir()
	for _, p := range []string{filepath.Join(dir, "missing.png"), dir} {
		_, err := Load(p)
		if err == nil || !strings.HasPrefix(err.Error(), "prep: ") || !strings.Contains(err.Error(), p) {
			t.Errorf("Load(%q): %v", p, err)
		}
	}
}

// LoadFS reads the same pixels as Load from a file system's file, whether
// the file can be read at offsets (os.DirFS) or only in sequence (a reader
// without ReadAt), and names the file in its errors.
func TestLoadFS(t *testing.T) {
	dir := t.TempDir()
	img := image.NewNRGBA(image.Rect(0, 0, 2, 2))
	img.Pix = []uint8{255, 0, 0, 255, 0, 255, 0, 255, 0, 0, 255, 255, 10, 20, 30, 255}
	var buf bytes.Buffer
	if err := png.Encode(&buf, img); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "a.png"), buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	want, err := Load(filepath.Join(dir, "a.png"))
	if err != nil {
		t.Fatal(err)
	}
	for name, fsys := range map[string]fs.FS{"os.DirFS": os.DirFS(dir), "sequential": seqFS{os.DirFS(dir)}} {
		t.Run(name, func(t *testing.T) {
			got, err := LoadFS(fsys, "a.png")
			if err != nil {
				t.Fatal(err)
			}
			for y := 0; y < 2; y++ {
				for x := 0; x < 2; x++ {
					if colourAt(got, x, y) != colourAt(want, x, y) {
						t.Errorf("(%d,%d) = %v, Load gave %v", x, y, colourAt(got, x, y), colourAt(want, x, y))
					}
				}
			}
			for _, bad := range []string{"missing.png", "."} {
				if _, err := LoadFS(fsys, bad); err == nil || !strings.HasPrefix(err.Error(), "prep: ") || !strings.Contains(err.Error(), bad) {
					t.Errorf("LoadFS(%q): %v", bad, err)
				}
			}
		})
	}
}

// seqFS hides the io.ReaderAt of its files: LoadFS must read them in
// sequence.
type seqFS struct{ fs.FS }

func (s seqFS) Open(name string) (fs.File, error) {
	f, err := s.FS.Open(name)
	if err != nil {
		return nil, err
	}
	return seqFile{f}, nil
}

type seqFile struct{ f fs.File }

func (s seqFile) Stat() (fs.FileInfo, error) { return s.f.Stat() }
func (s seqFile) Read(b []byte) (int, error) { return s.f.Read(b) }
func (s seqFile) Close() error               { return s.f.Close() }

// DecodeLimit applies a caller's lower limit, and Decode (MaxPixels) accepts the same image.
func TestDecodeLimit(t *testing.T) {
	data := encPNG(t, solidNRGBA(100, 100, red))
	if _, err := DecodeLimit(strings.NewReader(string(data)), int64(len(data)), "x.png", 9999); !errors.Is(err, ErrTooLarge) ||
		!strings.Contains(err.Error(), "10000 pixels") || !strings.Contains(err.Error(), "9999 pixels") {
		t.Errorf("limit 9999: %v", err)
	}
	if _, err := Decode(data, "x.png"); err != nil {
		t.Error(err)
	}
	// A reader that fails is an I/O error naming the file, not a format error.
	if _, err := DecodeLimit(failingReader{}, 100, "broken.png", 0); err == nil || !strings.Contains(err.Error(), "broken.png") {
		t.Errorf("failing reader: %v", err)
	}
}

type failingReader struct{}

func (failingReader) ReadAt([]byte, int64) (int, error) { return 0, io.ErrClosedPipe }

// visualQuadrants is a 32×16 upright picture: top-left red, top-right green, bottom-left
// blue, bottom-right white.
func visualQuadrants() *image.NRGBA {
	img := image.NewNRGBA(image.Rect(0, 0, 32, 16))
	for y := range 16 {
		for x := range 32 {
			c := [2][2]color.NRGBA{{red, green}, {blue, white}}[y/8][x/16]
			img.SetNRGBA(x, y, c)
		}
	}
	return img
}

// storedFor returns how a camera stores the upright picture v under EXIF orientation o.
// The table is the standard's own wording (EXIF 2.32 / TIFF 6.0, tag 274): which visual
// side the stored 0th row and 0th column are.
func storedFor(v *image.NRGBA, o int) *image.NRGBA {
	sides := map[int][2]string{ // o: {0th row, 0th column}
		1: {"top", "left"}, 2: {"top", "right"}, 3: {"bottom", "right"}, 4: {"bottom", "left"},
		5: {"left", "top"}, 6: {"right", "top"}, 7: {"right", "bottom"}, 8: {"left", "bottom"},
	}[o]
	vw, vh := v.Rect.Dx(), v.Rect.Dy()
	sw, sh := vw, vh
	if o >= 5 {
		sw, sh = vh, vw
	}
	s := image.NewNRGBA(image.Rect(0, 0, sw, sh))
	for sy := range sh {
		for sx := range sw {
			var vx, vy int
			switch sides[0] { // where stored row sy lies
			case "top":
				vy = sy
			case "bottom":
				vy = vh - 1 - sy
			case "left":
				vx = sy
			case "right":
				vx = vw - 1 - sy
			}
			switch sides[1] { // where stored column sx lies
			case "left":
				vx = sx
			case "right":
				vx = vw - 1 - sx
			case "top":
				vy = sx
			case "bottom":
				vy = vh - 1 - sx
			}
			s.SetNRGBA(sx, sy, v.NRGBAAt(vx, vy))
		}
	}
	return s
}

// A JPEG with EXIF orientation o comes out upright, for all eight values and both
// byte orders: the JPEG is encoded with image/jpeg and the APP1 Exif segment spliced
// in by hand.
func TestEXIFOrientation(t *testing.T) {
	upright := visualQuadrants()
	for o := 1; o <= 8; o++ {
		for _, be := range []bool{false, true} {
			t.Run(fmt.Sprintf("o%d-be%v", o, be), func(t *testing.T) {
				data := withExif(encJPEG(t, storedFor(upright, o)), uint16(o), be)
				img, err := Decode(data, "photo.jpg")
				if err != nil {
					t.Fatal(err)
				}
				if b := img.Bounds(); b.Dx() != 32 || b.Dy() != 16 {
					t.Fatalf("size %dx%d, want 32x16 upright", b.Dx(), b.Dy())
				}
				// Quadrant centres, away from JPEG's blurred edges; tolerance for lossy coding.
				for _, p := range [][2]int{{8, 4}, {24, 4}, {8, 12}, {24, 12}} {
					want := upright.NRGBAAt(p[0], p[1])
					if got := colourAt(img, p[0], p[1]); !closeTo(got, want, 24) {
						t.Errorf("at %v: %v, want %v", p, got, want)
					}
				}
			})
		}
	}
}

// tiffOrientation reads the tag and nothing else: hand-built IFDs (TIFF 6.0 section 2).
func TestTIFFOrientationParser(t *testing.T) {
	ifd := func(bo string, entries ...[]byte) []byte {
		b := []byte(bo)
		le := bo == "II*\x00"
		u16 := func(v uint16) []byte {
			if le {
				return []byte{byte(v), byte(v >> 8)}
			}
			return []byte{byte(v >> 8), byte(v)}
		}
		b = append(b, u16(0)...) // high/low half of offset 8 depending on order
		b = append(b, u16(0)...)
		if le {
			b[4] = 8
		} else {
			b[7] = 8
		}
		b = append(b, u16(uint16(len(entries)))...)
		for _, e := range entries {
			b = append(b, e...)
		}
		return b
	}
	le := func(tag, typ uint16, count uint32, val uint32) []byte {
		return []byte{byte(tag), byte(tag >> 8), byte(typ), byte(typ >> 8),
			byte(count), byte(count >> 8), byte(count >> 16), byte(count >> 24),
			byte(val), byte(val >> 8), byte(val >> 16), byte(val >> 24)}
	}
	cases := []struct {
		name string
		data []byte
		want int
	}{
		{"short 6", ifd("II*\x00", le(0x0100, 3, 1, 640), le(0x0112, 3, 1, 6)), 6},
		{"long 8", ifd("II*\x00", le(0x0112, 4, 1, 8)), 8},
		{"value 9 out of range", ifd("II*\x00", le(0x0112, 3, 1, 9)), 0},
		{"value 0", ifd("II*\x00", le(0x0112, 3, 1, 0)), 0},
		{"wrong type ASCII", ifd("II*\x00", le(0x0112, 2, 1, 6)), 0},
		{"count 0", ifd("II*\x00", le(0x0112, 3, 0, 6)), 0},
		{"no tag", ifd("II*\x00", le(0x0100, 3, 1, 6)), 0},
		{"entry cut short", ifd("II*\x00", le(0x0112, 3, 1, 6))[:18], 0},
		{"bad magic", []byte("II+\x00\x08\x00\x00\x00"), 0},
		{"bad order", []byte("XX*\x00\x08\x00\x00\x00"), 0},
		{"too short", []byte("II*"), 0},
		{"offset huge", []byte("II*\x00\xff\xff\xff\xff"), 0},
		{"empty", nil, 0},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			if got := tiffOrientation(tc.data); got != tc.want {
				t.Errorf("%s: %d, want %d", tc.name, got, tc.want)
			}
		})
	}
}

// The JPEG segment walk: fill bytes, restart markers, EXIF after APP0, no EXIF, a
// segment length running past the end, a length below 2.
func TestEXIFSegmentWalk(t *testing.T) {
	exif6 := append([]byte("Exif\x00\x00"), []byte("MM\x00*\x00\x00\x00\x08\x00\x01\x01\x12\x00\x03\x00\x00\x00\x01\x00\x06\x00\x00")...)
	app := func(m byte, body []byte) []byte {
		return append([]byte{0xFF, m, byte((len(body) + 2) >> 8), byte(len(body) + 2)}, body...)
	}
	soi := []byte{0xFF, 0xD8}
	join := func(parts ...[]byte) []byte {
		var b []byte
		for _, p := range parts {
			b = append(b, p...)
		}
		return b
	}
	cases := []struct {
		name string
		data []byte
		want int
	}{
		{"exif first", join(soi, app(0xE1, exif6)), 6},
		{"after APP0 and fill bytes", join(soi, app(0xE0, []byte("JFIF\x00\x01\x01")), []byte{0xFF, 0xFF}, app(0xE1, exif6)), 6},
		{"XMP APP1 then EXIF", join(soi, app(0xE1, []byte("http://ns.adobe.com/xap/1.0/\x00<x/>")), app(0xE1, exif6)), 6},
		{"after start of scan", join(soi, []byte{0xFF, 0xDA, 0, 2}, app(0xE1, exif6)), 0},
		{"no SOI", app(0xE1, exif6), 0},
		{"length past end", join(soi, []byte{0xFF, 0xE1, 0xFF, 0xFF, 'E', 'x'}), 0},
		{"length below 2", join(soi, []byte{0xFF, 0xE1, 0, 1}), 0},
		{"not a marker", join(soi, []byte{0x12, 0x34}), 0},
		{"just SOI", soi, 0},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			if got := exifOrientation(strings.NewReader(string(tc.data))); got != tc.want {
				t.Errorf("%s: %d, want %d", tc.name, got, tc.want)
			}
		})
	}
}

// Loading reads the file in place: a 7×3 gray TIFF whose pixels and IFD sit after 8 MiB
// of padding (TIFF locates everything by offsets) allocates far less than the file's
// size. The TIFF decoder copies into memory, up to the furthest offset it reads, any
// reader that is not an io.ReaderAt.
func TestLoadDoesNotCopyFile(t *testing.T) {
	data := grayTIFF(7, 3, bytes.Repeat([]byte{128}, 21), 8<<20)
	path := filepath.Join(t.TempDir(), "padded.tiff")
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	var img image.Image
	var err error
	n := allocated(func() { img, err = Load(path) })
	if err != nil {
		t.Fatal(err)
	}
	if got := colourAt(img, 6, 2); got != (color.NRGBA{128, 128, 128, 255}) || img.Bounds().Dx() != 7 {
		t.Errorf("padded TIFF: %v at (6,2), bounds %v", got, img.Bounds())
	}
	if n > 1<<20 {
		t.Errorf("loading an 8 MiB file allocated %d bytes, bound 1 MiB", n)
	}
}
