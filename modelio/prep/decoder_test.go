package prep

import (
	"bytes"
	"compress/zlib"
	"encoding/binary"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/color/palette"
	"image/png"
	"maps"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"testing/fstest"
	"time"

	"fovea/modelio"
)

// The reference for every check in this file is the existing path, Decode (the Go
// standard library's image/png, image/jpeg, ... behind it), then Fit and
// TensorFromImage: the Decoder must give the same float32 values bit for bit, or
// the same error. The PNG files are made by the standard library's image/png
// encoder where it can write the kind (gray 8 and 16 bits, RGB, RGBA, palettes of
// 1, 2, 4 and 8 bits with and without transparency), and assembled by hand after
// the PNG specification (W3C, Second Edition: chunks 5.3, IHDR 11.2.2, PLTE
// 11.2.3, tRNS 11.3.2.1, filters 9.2) for the kinds it cannot (gray below 8 bits,
// gray+alpha, keyed transparency, several IDAT chunks, every filter type).

// pngSpec describes a hand-assembled PNG.
type pngSpec struct {
	w, h, depth, colour int
	interlace           uint8
	plte                []byte // PLTE body
	trns                []byte // tRNS body
	filters             []byte // per row, cycled; nil: 0 (None)
	idatSplit           int    // bytes per IDAT chunk; 0: one chunk
	before, after       [][]byte
	rng                 *rand.Rand
	samples             []byte // unfiltered rows without filter bytes; nil: random
	// stream makes the zlib stream of the filtered rows; nil: compress/zlib's
	// default level.
	stream func(raw []byte) []byte
}

// samplesPerPixel is the number of samples a pixel of a PNG colour type has (PNG
// specification, table 11.1).
func samplesPerPixel(colour int) int {
	return map[int]int{pngGray: 1, pngRGB: 3, pngPalette: 1, pngGrayAlpha: 2, pngRGBA: 4}[colour]
}

// build assembles the file: rows are filtered with the given filter types (PNG
// specification 9.2; Paeth as in 9.4) and compressed with compress/zlib.
func (s pngSpec) build() []byte {
	bits := samplesPerPixel(s.colour) * s.depth
	rowLen := (bits*s.w + 7) / 8
	bpp := max(1, bits/8)
	samples := s.samples
	if samples == nil {
		samples = make([]byte, rowLen*s.h)
		for i := range samples {
			samples[i] = uint8(s.rng.IntN(256))
		}
		if s.colour == pngRGBA || s.colour == pngGrayAlpha {
			// Mostly opaque or clear, as real pictures are, some in between.
			step := samplesPerPixel(s.colour)
			for i := step - 1; i < len(samples); i += step {
				switch s.rng.IntN(3) {
				case 0:
					samples[i] = 0xff
				case 1:
					samples[i] = 0
				}
			}
		}
	}
	var raw []byte
	prev := make([]byte, rowLen)
	for y := range s.h {
		cur := samples[y*rowLen : (y+1)*rowLen]
		ft := byte(0)
		if len(s.filters) > 0 {
			ft = s.filters[y%len(s.filters)]
		}
		raw = append(raw, ft)
		for i := range rowLen {
			var a, c byte
			if i >= bpp {
				a, c = cur[i-bpp], prev[i-bpp]
			}
			b := prev[i]
			var pred byte
			switch ft {
			case 1:
				pred = a
			case 2:
				pred = b
			case 3:
				pred = byte((int(a) + int(b)) / 2)
			case 4:
				p := int(a) + int(b) - int(c)
				pa, pb, pc := abs(p-int(a)), abs(p-int(b)), abs(p-int(c))
				switch {
				case pa <= pb && pa <= pc:
					pred = a
				case pb <= pc:
					pred = b
				default:
					pred = c
				}
			}
			raw = append(raw, cur[i]-pred)
		}
		prev = cur
	}
	stream := s.stream
	if stream == nil {
		stream = zlibLevel(zlib.DefaultCompression)
	}
	data := stream(raw)
	out := []byte(pngSignature)
	ihdr := make([]byte, 13)
	binary.BigEndian.PutUint32(ihdr[0:], uint32(s.w))
	binary.BigEndian.PutUint32(ihdr[4:], uint32(s.h))
	ihdr[8], ihdr[9], ihdr[12] = byte(s.depth), byte(s.colour), s.interlace
	for _, c := range s.before {
		out = append(out, c...)
	}
	out = append(out, pngChunk("IHDR", ihdr)...)
	if s.plte != nil {
		out = append(out, pngChunk("PLTE", s.plte)...)
	}
	if s.trns != nil {
		out = append(out, pngChunk("tRNS", s.trns)...)
	}
	split := s.idatSplit
	if split <= 0 {
		split = len(data)
	}
	for len(data) > 0 {
		n := min(split, len(data))
		out = append(out, pngChunk("IDAT", data[:n])...)
		data = data[n:]
	}
	for _, c := range s.after {
		out = append(out, c...)
	}
	return append(out, pngChunk("IEND", nil)...)
}

// zlibLevel compresses with compress/zlib at a level.
func zlibLevel(level int) func([]byte) []byte {
	return func(raw []byte) []byte {
		var z bytes.Buffer
		zw, err := zlib.NewWriterLevel(&z, level)
		if err != nil {
			panic(err)
		}
		zw.Write(raw)
		zw.Close()
		return z.Bytes()
	}
}

// zlibStreams are zlib streams (RFC 1950) that image/png may or may not accept,
// each a function of the filtered rows.
var zlibStreams = map[string]func([]byte) []byte{
	"stored":   zlibLevel(zlib.NoCompression),
	"huffman":  zlibLevel(zlib.HuffmanOnly),
	"best":     zlibLevel(zlib.BestCompression),
	"trailing": func(raw []byte) []byte { return append(zlibLevel(1)(raw), "xyz"...) },
	"bad-adler": func(raw []byte) []byte {
		z := zlibLevel(1)(raw)
		z[len(z)-1] ^= 1
		return z
	},
	"short": func(raw []byte) []byte { return zlibLevel(1)(raw[:len(raw)-1]) },
	"long":  func(raw []byte) []byte { return zlibLevel(1)(append(bytes.Clone(raw), 0)) },
	"no-adler": func(raw []byte) []byte {
		z := zlibLevel(1)(raw)
		return z[:len(z)-4]
	},
	// FDICT set (RFC 1950, 2.2) with the dictionary id 1, the Adler-32 of an
	// empty dictionary, which compress/zlib accepts without a dictionary.
	"fdict": func(raw []byte) []byte {
		z := zlibLevel(1)(raw)
		flg := byte(0x20)
		flg += byte(31 - (0x78*256+int(flg))%31)
		head := []byte{0x78, flg, 0, 0, 0, 1}
		return append(head, z[2:]...)
	},
	"bad-header": func(raw []byte) []byte {
		z := zlibLevel(1)(raw)
		z[1]++
		return z
	},
}

// diffCase is one file for the differential tests, and whether the fast PNG
// path must take it at the file's own size.
type diffCase struct {
	name  string
	data  []byte
	fast  bool
	maybe bool // either path may take it: only the values are checked
}

// diffPNGs are PNGs of every kind image/png reads, at odd sizes.
func diffPNGs(t testing.TB) []diffCase {
	rng := rand.New(rand.NewPCG(1, 2))
	var cases []diffCase
	add := func(name string, data []byte, fast bool) {
		cases = append(cases, diffCase{name: name, data: data, fast: fast})
	}
	enc := func(img image.Image) []byte { return encPNG(t, img) }
	randomize := func(pix []byte) {
		for i := range pix {
			pix[i] = uint8(rng.IntN(256))
		}
	}
	for _, sz := range [][2]int{{1, 1}, {7, 5}, {13, 1}, {1, 9}, {33, 17}, {64, 64}} {
		w, h := sz[0], sz[1]
		r := image.Rect(0, 0, w, h)
		tag := fmt.Sprintf("%dx%d", w, h)

		g := image.NewGray(r)
		randomize(g.Pix)
		add("gray8-"+tag, enc(g), true)
		g16 := image.NewGray16(r)
		randomize(g16.Pix)
		add("gray16-"+tag, enc(g16), false)
		opaque := image.NewNRGBA(r)
		randomize(opaque.Pix)
		for i := 3; i < len(opaque.Pix); i += 4 {
			opaque.Pix[i] = 0xff
		}
		add("rgb8-"+tag, enc(opaque), true)
		alpha := image.NewNRGBA(r)
		randomize(alpha.Pix)
		for i := 3; i < len(alpha.Pix); i += 4 {
			alpha.Pix[i] = []uint8{0, 0xff, alpha.Pix[i]}[rng.IntN(3)]
		}
		if !alpha.Opaque() {
			add("rgba8-"+tag, enc(alpha), true)
		}
		n64 := image.NewNRGBA64(r)
		randomize(n64.Pix)
		add("rgba16-"+tag, enc(n64), false)
		for _, np := range []int{2, 3, 4, 16, 200, 256} {
			pal := make(color.Palette, np)
			for i := range pal {
				if i%5 == 1 {
					pal[i] = color.NRGBA{uint8(rng.IntN(256)), uint8(rng.IntN(256)), uint8(rng.IntN(256)), uint8(rng.IntN(256))}
				} else {
					pal[i] = palette.Plan9[rng.IntN(256)]
				}
			}
			p := image.NewPaletted(r, pal)
			for i := range p.Pix {
				p.Pix[i] = uint8(rng.IntN(np))
			}
			add(fmt.Sprintf("palette%d-%s", np, tag), enc(p), true)
		}

		// Kinds image/png's encoder does not write.
		for _, depth := range []int{1, 2, 4, 8} {
			add(fmt.Sprintf("gray%d-hand-%s", depth, tag), pngSpec{w: w, h: h, depth: depth, colour: pngGray, rng: rng, filters: []byte{0, 1, 2, 3, 4}}.build(), true)
			key := []byte{0, uint8(rng.IntN(1 << depth))}
			add(fmt.Sprintf("gray%d-key-%s", depth, tag), pngSpec{w: w, h: h, depth: depth, colour: pngGray, rng: rng, trns: key, filters: []byte{4, 3}}.build(), true)
			np := 1 << depth
			if depth == 8 {
				np = 100 // indices past PLTE read as opaque black
			}
			plte := make([]byte, 3*max(1, np/2))
			randomize(plte)
			trns := make([]byte, min(256, np))
			randomize(trns)
			add(fmt.Sprintf("palette%d-hand-%s", depth, tag), pngSpec{w: w, h: h, depth: depth, colour: pngPalette, rng: rng, plte: plte, trns: trns, filters: []byte{1, 2, 3, 4, 0}}.build(), true)
		}
		add("gray-alpha8-"+tag, pngSpec{w: w, h: h, depth: 8, colour: pngGrayAlpha, rng: rng, filters: []byte{0, 1, 2, 3, 4}}.build(), true)
		add("rgba8-filters-"+tag, pngSpec{w: w, h: h, depth: 8, colour: pngRGBA, rng: rng, filters: []byte{4, 3, 2, 1, 0}}.build(), true)
		// RGB rows of every filter type (Average and Paeth have their own
		// three-bytes-a-pixel loops).
		add("rgb8-filters-"+tag, pngSpec{w: w, h: h, depth: 8, colour: pngRGB, rng: rng, filters: []byte{3, 4, 0, 4, 1, 3, 2}}.build(), true)
		samples := make([]byte, 3*w*h)
		for i := range samples {
			samples[i] = uint8(rng.IntN(2)) * 0xff // few colours, so the key matches often
		}
		add("rgb8-key-"+tag, pngSpec{w: w, h: h, depth: 8, colour: pngRGB, samples: samples, trns: []byte{0x12, 0xff, 0x34, 0x00, 0x56, 0xff}, filters: []byte{2, 4}}.build(), true)
		add("rgb8-plte-split-"+tag, pngSpec{w: w, h: h, depth: 8, colour: pngRGB, rng: rng, plte: make([]byte, 12), idatSplit: 7,
			before: [][]byte{pngChunk("aaAa", []byte("before IHDR"))},
			after:  [][]byte{pngChunk("tEXt", []byte("k\x00v")), pngChunk("IDAT", []byte("ignored"))}}.build(), true)
		for _, name := range slices.Sorted(maps.Keys(zlibStreams)) {
			good := name == "stored" || name == "huffman" || name == "best"
			data := pngSpec{w: w, h: h, depth: 8, colour: pngRGB, rng: rng, stream: zlibStreams[name], idatSplit: 1 + rng.IntN(40)}.build()
			cases = append(cases, diffCase{name: "rgb8-zlib-" + name + "-" + tag, data: data, fast: good, maybe: !good})
		}
		add("rgb8-interlaced-"+tag, pngSpec{w: w, h: h, depth: 8, colour: pngRGB, rng: rng, interlace: 1}.build(), false)
	}
	return cases
}

// diffConfigs are the settings a w×h picture is checked with: at its own size
// with every value setting, centre cuts (crop and crop:S), and resizes.
func diffConfigs(w, h int) []Config {
	base := Default()
	base.Width, base.Height = w, h
	var cs []Config
	add := func(f func(c *Config)) {
		c := base
		f(&c)
		if c.Validate() == nil {
			cs = append(cs, c)
		}
	}
	add(func(*Config) {})
	add(func(c *Config) { *c = mustPreset("imagenet", *c); c.Layout = modelio.LayoutNHWC })
	add(func(c *Config) { *c = mustPreset("bgr-mean", *c) })
	add(func(c *Config) { c.Channels, c.Range = 1, RangeSigned })
	add(func(c *Config) { c.Background = color.NRGBA{10, 200, 31, 0}; c.Range = RangeByte })
	add(func(c *Config) { c.Resize = ResizeCrop; c.Width, c.Height = min(w, h), min(w, h) })
	add(func(c *Config) {
		c.Resize = ResizeCropPrefix + fmt.Sprint(min(w, h))
		c.Width, c.Height = max(1, min(w, h)-2), max(1, min(w, h)-1)
		c.Background = color.NRGBA{0, 0, 0, 255}
	})
	add(func(c *Config) { c.Width, c.Height = w+3, h }) // a resize: the general path
	add(func(c *Config) { c.Resize = ResizeCrop; c.Width, c.Height = w, h+1 })
	return cs
}

// reference is the existing path: Decode, Fit, TensorFromImage.
func reference(data []byte, name string, c Config, maxPixels int) ([]float32, error) {
	img, err := DecodeLimit(bytes.NewReader(data), int64(len(data)), name, maxPixels)
	if err != nil {
		return nil, err
	}
	dst := make([]float32, c.Len())
	c.TensorFromImage(Fit(img, c), dst)
	return dst, nil
}

// sameBits reports the first index where a and b differ as float32 bit patterns.
func sameBits(a, b []float32) (int, bool) {
	if len(a) != len(b) {
		return -1, false
	}
	for i := range a {
		if math.Float32bits(a[i]) != math.Float32bits(b[i]) {
			return i, false
		}
	}
	return 0, true
}

// checkSame runs the Decoder and the reference on data with c and fails unless
// both fail with the same message or both give the same bits. It returns
// whether the fast path took the file.
func checkSame(t testing.TB, d *Decoder, data []byte, name string, c Config, maxPixels int) bool {
	t.Helper()
	want, wantErr := reference(data, name, c, maxPixels)
	got := make([]float32, c.Len())
	for i := range got {
		got[i] = -12345 // untouched on error
	}
	fast, err := d.decodeInto(data, name, c, got, maxPixels, time.Now())
	switch {
	case (err == nil) != (wantErr == nil):
		t.Fatalf("%s with %v: Decoder error %v, reference error %v", name, c, err, wantErr)
	case err != nil:
		if err.Error() != wantErr.Error() {
			t.Fatalf("%s: Decoder error %q, reference %q", name, err, wantErr)
		}
		if fast {
			t.Fatalf("%s: error %v on the fast path", name, err)
		}
		for _, v := range got {
			if v != -12345 {
				t.Fatalf("%s: dst written although decoding failed", name)
			}
		}
	default:
		if i, ok := sameBits(got, want); !ok {
			t.Fatalf("%s with %v (fast %v): value %d is %v, reference %v", name, c, fast, i, got[i], want[i])
		}
	}
	return fast
}

// inflaters are the Decoder's two ways to inflate: the C zlib library (where
// the build has cgo) and compress/zlib. Each Decoder of the tests is checked
// with both.
func inflaters() []*Decoder {
	ds := []*Decoder{{goInflate: true}}
	if haveCInflate {
		ds = append(ds, &Decoder{})
	}
	return ds
}

func TestDecoderMatchesReference(t *testing.T) {
	cases := diffPNGs(t)
	// One Decoder for all files: state carried from file to file must not leak.
	for _, d := range inflaters() {
		t.Run(fmt.Sprintf("goInflate=%v", d.goInflate), func(t *testing.T) {
			for _, tc := range cases {
				cfg, err := png.DecodeConfig(bytes.NewReader(tc.data))
				if err != nil {
					t.Fatalf("%s: %v", tc.name, err)
				}
				for i, c := range diffConfigs(cfg.Width, cfg.Height) {
					fast := checkSame(t, d, tc.data, tc.name, c, MaxPixels)
					if i == 0 && !tc.maybe && fast != tc.fast {
						t.Errorf("%s at its own size: fast path %v, want %v", tc.name, fast, tc.fast)
					}
				}
			}
		})
	}
}

// TestDecoderStoredFiles runs the project's test images and the demo's probe
// images through the Decoder, from disk, and compares with Load.
func TestDecoderStoredFiles(t *testing.T) {
	var files []string
	for _, dir := range []string{imagesDir, filepath.Join("..", "..", "assets", "demo", "probe"), filepath.Join("..", "..", "assets", "demo", "images")} {
		entries, err := os.ReadDir(dir)
		if err != nil {
			t.Fatal(err)
		}
		for _, e := range entries {
			files = append(files, filepath.Join(dir, e.Name()))
		}
	}
	d := new(Decoder)
	fastFiles := 0
	for _, f := range files {
		img, wantErr := Load(f)
		var w, h int
		if wantErr == nil {
			w, h = img.Bounds().Dx(), img.Bounds().Dy()
		} else {
			w, h = 16, 16
		}
		for _, c := range diffConfigs(w, h) {
			got := make([]float32, c.Len())
			err := d.LoadInto(f, c, got)
			if (err == nil) != (wantErr == nil) || (err != nil && err.Error() != wantErr.Error()) {
				t.Fatalf("%s: Decoder error %v, Load error %v", f, err, wantErr)
			}
			if err != nil {
				continue
			}
			want := make([]float32, c.Len())
			c.TensorFromImage(Fit(img, c), want)
			if i, ok := sameBits(got, want); !ok {
				t.Fatalf("%s with %v: value %d is %v, Load's path %v", f, c, i, got[i], want[i])
			}
		}
		if data, err := os.ReadFile(f); err == nil && wantErr == nil {
			c := diffConfigs(w, h)[0]
			if fast, _ := d.decodeInto(data, f, c, make([]float32, c.Len()), MaxPixels, time.Now()); fast {
				fastFiles++
			}
		}
	}
	// 281 demo probes and 3 demo images are 8-bit RGB PNGs.
	if fastFiles < 284 {
		t.Errorf("%d stored files took the fast path, want at least 284", fastFiles)
	}
}

// TestDecoderFS compares LoadIntoFS with LoadFS on an in-memory file system, a
// folder, and a file system whose files offer no io.ReaderAt.
func TestDecoderFS(t *testing.T) {
	good := pngSpec{w: 5, h: 4, depth: 8, colour: pngRGBA, rng: rand.New(rand.NewPCG(3, 4))}.build()
	mem := fstest.MapFS{
		"a/good.png": {Data: good},
		"a/bad.png":  {Data: good[:len(good)-20]},
		"a/empty":    {Data: nil},
	}
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "good.png"), good, 0o644); err != nil {
		t.Fatal(err)
	}
	c := Default()
	c.Width, c.Height = 5, 4
	d := new(Decoder)
	check := func(what string, load func() (image.Image, error), into func([]float32) error) {
		t.Helper()
		img, wantErr := load()
		got := make([]float32, c.Len())
		err := into(got)
		if (err == nil) != (wantErr == nil) || (err != nil && err.Error() != wantErr.Error()) {
			t.Fatalf("%s: Decoder error %v, reference error %v", what, err, wantErr)
		}
		if err != nil {
			return
		}
		want := make([]float32, c.Len())
		c.TensorFromImage(Fit(img, c), want)
		if i, ok := sameBits(got, want); !ok {
			t.Fatalf("%s: value %d is %v, want %v", what, i, got[i], want[i])
		}
	}
	for _, name := range []string{"a/good.png", "a/bad.png", "a/empty", "a", "missing.png", "../x.png"} {
		check("MapFS "+name, func() (image.Image, error) { return LoadFS(mem, name) },
			func(dst []float32) error { return d.LoadIntoFS(mem, name, c, dst) })
	}
	seq := seqFS{os.DirFS(dir)}
	for _, name := range []string{"good.png", "missing.png"} {
		check("seqFS "+name, func() (image.Image, error) { return LoadFS(seq, name) },
			func(dst []float32) error { return d.LoadIntoFS(seq, name, c, dst) })
		p := filepath.Join(dir, name)
		check("path "+name, func() (image.Image, error) { return Load(p) },
			func(dst []float32) error { return d.LoadInto(p, c, dst) })
	}
	check("folder", func() (image.Image, error) { return Load(dir) },
		func(dst []float32) error { return d.LoadInto(dir, c, dst) })
}

// TestDecoderErrors: damaged PNGs get Load's error, which names the file and
// says what is wrong (the classes of FileError), from the fast path's files too.
func TestDecoderErrors(t *testing.T) {
	good := pngSpec{w: 8, h: 8, depth: 8, colour: pngRGB, rng: rand.New(rand.NewPCG(5, 6)), filters: []byte{1, 4}}.build()
	idat := bytes.Index(good, []byte("IDAT"))
	flip := func(i int) []byte {
		b := bytes.Clone(good)
		b[i] ^= 0x40
		return b
	}
	badFilter := pngSpec{w: 8, h: 8, depth: 8, colour: pngRGB, rng: rand.New(rand.NewPCG(5, 6)), filters: []byte{5}}.build()
	dir := t.TempDir()
	c := Default()
	c.Width, c.Height = 8, 8
	for _, tc := range []struct {
		name  string
		data  []byte
		class error
		words []string
	}{
		{"truncated.png", good[:len(good)-30], ErrCorrupt, []string{"PNG", "truncated"}},
		{"no-iend.png", good[:len(good)-12], ErrCorrupt, []string{"PNG pixel data"}},
		{"bad-crc.png", flip(len(good) - 20), ErrCorrupt, []string{"checksum"}},
		{"bad-zlib.png", flip(idat + 4), ErrCorrupt, []string{"PNG pixel data"}},
		{"bad-filter.png", badFilter, ErrCorrupt, []string{"filter"}},
		{"signature.png", flip(1), ErrFormat, []string{"content starts with"}},
		{"empty.png", nil, ErrEmpty, nil},
	} {
		p := filepath.Join(dir, tc.name)
		if err := os.WriteFile(p, tc.data, 0o644); err != nil {
			t.Fatal(err)
		}
		_, wantErr := Load(p)
		var err error
		for _, d := range inflaters() {
			err = d.LoadInto(p, c, make([]float32, c.Len()))
			if err == nil || wantErr == nil || err.Error() != wantErr.Error() {
				t.Fatalf("%s (goInflate %v): Decoder error %v, Load error %v", tc.name, d.goInflate, err, wantErr)
			}
		}
		var fe *FileError
		if !errors.As(err, &fe) || !errors.Is(err, tc.class) || !strings.HasPrefix(err.Error(), "prep: "+p+": ") {
			t.Errorf("%s: error %q: want a FileError of class %v naming the file", tc.name, err, tc.class)
		}
		for _, w := range tc.words {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%s: error %q does not say %q", tc.name, err, w)
			}
		}
	}
}

// TestDecoderPanics: a wrong Config or dst is the caller's mistake, as for
// TensorFromImage.
func TestDecoderPanics(t *testing.T) {
	for _, tc := range []struct {
		name string
		c    Config
		n    int
	}{{"invalid config", Config{}, 0}, {"short dst", Default(), 5}} {
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("%s: no panic", tc.name)
				}
			}()
			new(Decoder).LoadInto("whatever.png", tc.c, make([]float32, tc.n))
		}()
	}
}

// TestDecoderKeepsLittle: the fast path allocates no buffer per file once its
// own exist.
func TestDecoderKeepsLittle(t *testing.T) {
	data := pngSpec{w: 64, h: 64, depth: 8, colour: pngRGB, rng: rand.New(rand.NewPCG(7, 8)), filters: []byte{0, 1, 2, 3, 4}}.build()
	p := filepath.Join(t.TempDir(), "p.png")
	if err := os.WriteFile(p, data, 0o644); err != nil {
		t.Fatal(err)
	}
	c := Default()
	c.Width, c.Height = 64, 64
	dst := make([]float32, c.Len())
	d := new(Decoder)
	if err := d.LoadInto(p, c, dst); err != nil {
		t.Fatal(err)
	}
	// Opening the file allocates the name as a C string (on Linux the
	// system calls are made directly; elsewhere *os.File and the Stat result
	// add a few more).
	if n := testing.AllocsPerRun(20, func() { d.LoadInto(p, c, dst) }); n > 6 {
		t.Errorf("%v allocations a file, want at most 6", n)
	}
}
