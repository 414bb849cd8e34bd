package prep

import (
	"encoding/binary"
	"hash/crc32"
	"image/color"
	"os"
	"path/filepath"
	"testing"

	"fovea/modelio"
)

// FuzzDecoder feeds arbitrary bytes to a Decoder and to the existing path
// (DecodeLimit, the Go standard library's image/png among the decoders, then Fit
// and TensorFromImage) and requires: no panic, an error from both or from
// neither, the same message, and the same values bit for bit when both succeed.
// Both of the Decoder's inflaters are checked. fixCRC rewrites every chunk's
// CRC first, so that changes inside chunks reach the checks behind the CRC;
// mode picks the settings (size from the file's IHDR or a fixed crop, channels,
// layout, order, range, background). Seeds: testdata/images, generated PNGs of
// every kind (diffPNGs) and a demo probe image.
//
//	go test -run '^$' -fuzz '^FuzzDecoder$' -fuzztime 1m ./modelio/prep
func FuzzDecoder(f *testing.F) {
	entries, err := os.ReadDir(imagesDir)
	if err != nil {
		f.Fatal(err)
	}
	for _, e := range entries {
		data, err := os.ReadFile(filepath.Join(imagesDir, e.Name()))
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data, false, uint8(0))
	}
	for i, tc := range diffPNGs(f) {
		if len(tc.data) < 4096 {
			f.Add(tc.data, i%2 == 0, uint8(i))
		}
	}
	probe, err := os.ReadFile(filepath.Join("..", "..", "assets", "demo", "probe", "cable-tie-0000.png"))
	if err != nil {
		f.Fatal(err)
	}
	f.Add(probe, true, uint8(0))
	decoders := inflaters()
	f.Fuzz(func(t *testing.T, data []byte, fixCRC bool, mode uint8) {
		if fixCRC {
			data = withChunkCRCs(data)
		}
		c := fuzzConfig(data, mode)
		for _, d := range decoders {
			checkSame(t, d, data, "fuzz.png", c, fuzzMaxPixels)
		}
	})
}

// withChunkCRCs returns a copy of data with the CRC of every PNG chunk it can
// find recomputed (PNG specification 5.3: CRC-32 of type and data).
func withChunkCRCs(data []byte) []byte {
	out := append([]byte(nil), data...)
	for pos := 8; pos+12 <= len(out); {
		n := binary.BigEndian.Uint32(out[pos:])
		if uint64(n) > uint64(len(out)-pos-12) {
			break
		}
		end := pos + 8 + int(n)
		binary.BigEndian.PutUint32(out[end:], crc32.ChecksumIEEE(out[pos+4:end]))
		pos = end + 4
	}
	return out
}

// fuzzConfig picks settings from mode: even modes take the size from a PNG
// header when it is small (so that the fast path runs), odd ones a 7×5 crop.
func fuzzConfig(data []byte, mode uint8) Config {
	c := Default()
	c.Width, c.Height, c.Resize = 7, 5, ResizeCrop
	if mode%2 == 0 && len(data) >= 24 && string(data[12:16]) == "IHDR" {
		w, h := binary.BigEndian.Uint32(data[16:]), binary.BigEndian.Uint32(data[20:])
		if w >= 1 && h >= 1 && w <= 64 && h <= 64 {
			c.Width, c.Height, c.Resize = int(w), int(h), ResizeStretch
		}
	}
	if mode&2 != 0 {
		c.Channels = 1
	}
	if mode&4 != 0 {
		c.Layout = modelio.LayoutNHWC
	}
	if mode&8 != 0 {
		c = mustPreset("bgr-mean", c)
	}
	if mode&16 != 0 {
		c.Range = RangeSigned
	}
	if mode&32 != 0 {
		c.Background = color.NRGBA{7, 140, 250, 0}
	}
	return c
}
