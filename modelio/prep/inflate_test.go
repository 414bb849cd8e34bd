package prep

import (
	"bytes"
	"compress/zlib"
	"encoding/binary"
	"fmt"
	"hash/adler32"
	"testing"
)

// The checks in this file hold the Decoder's inflaters (C and Go) to the rules
// of DEFLATE as the reference path, image/png through compress/flate, applies
// them: RFC 1951 section 3.2.6 says literal/length symbols 286 and 287 and
// distance symbols 30 and 31 "will never actually occur in the compressed
// data", and compress/flate (like the C zlib library) rejects them, as well as
// dynamic block headers declaring more than 286 literal/length or 30 distance
// codes (RFC 1951 3.2.7 gives HLIT 257-286; compress/flate's maxNumLit and
// maxNumDist). An inflater that read such a stream anyway would have the scan
// accept a file that the viewer refuses as damaged. libdeflate, tried as the C
// inflater for a while, does read them; FuzzDecoder caught it.

// deflateStream assembles a zlib stream (RFC 1950: header 0x78 0x9c, deflate
// data, Adler-32 of out, big-endian) from bits written least significant
// first (RFC 1951 3.1.1).
func deflateStream(write func(w *bitWriter), out []byte) []byte {
	var w bitWriter
	write(&w)
	s := append([]byte{0x78, 0x9c}, w.bytes()...)
	return binary.BigEndian.AppendUint32(s, adler32.Checksum(out))
}

// huff writes a Huffman code of n bits, most significant bit first (RFC 1951
// 3.1.1: "Huffman codes are packed starting with the most-significant bit").
func huff(w *bitWriter, code uint64, n uint) {
	for i := int(n) - 1; i >= 0; i-- {
		w.write(code>>uint(i)&1, 1)
	}
}

// fixedLitLen writes literal/length symbol sym with the fixed code (RFC 1951
// 3.2.6's table), 286 and 287 included.
func fixedLitLen(w *bitWriter, sym int) {
	switch {
	case sym < 144:
		huff(w, uint64(0x30+sym), 8)
	case sym < 256:
		huff(w, uint64(0x190+sym-144), 9)
	case sym < 280:
		huff(w, uint64(sym-256), 7)
	default:
		huff(w, uint64(0xc0+sym-280), 8)
	}
}

// reservedFixed is a fixed-Huffman block (BTYPE 01) of n zero bytes: a literal
// 0, then copies at distance 1 (distance symbol 0) of length 258 written with
// lengthSym (285, or one of the reserved 286 and 287 that a lenient decoder
// reads as 258), then the end of block.
func reservedFixed(lengthSym, copies int) (stream []byte, n int) {
	n = 1 + 258*copies
	return deflateStream(func(w *bitWriter) {
		w.write(1, 1) // BFINAL
		w.write(1, 2) // BTYPE 01, fixed Huffman codes
		fixedLitLen(w, 0)
		for range copies {
			fixedLitLen(w, lengthSym)
			huff(w, 0, 5) // distance symbol 0: distance 1
		}
		fixedLitLen(w, 256)
	}, make([]byte, n)), n
}

// reservedFarDistance is a fixed-Huffman block of zeros that ends with one
// copy of length 3 written with distance symbol distSym and 13 zero extra
// bits: 29 is distance 24577 (RFC 1951 3.2.5), 30 is reserved. Enough zeros
// come first for either distance to reach back inside the output.
func reservedFarDistance(distSym int) (stream []byte, n int) {
	const copies = 96 // 1 + 96*258 = 24769 bytes before the last copy
	n = 1 + 258*copies + 3
	return deflateStream(func(w *bitWriter) {
		w.write(1, 1)
		w.write(1, 2)
		fixedLitLen(w, 0)
		for range copies {
			fixedLitLen(w, 285)
			huff(w, 0, 5)
		}
		fixedLitLen(w, 257) // length 3
		huff(w, uint64(distSym), 5)
		w.write(0, 13)
		fixedLitLen(w, 256)
	}, make([]byte, n)), n
}

// dynamicZeros is a dynamic-Huffman block (BTYPE 10, RFC 1951 3.2.7) of n zero
// literals whose header declares hlit literal/length and hdist distance codes.
// The literal/length code gives symbols 0 and 256 one bit each, the distance
// code symbol 0 one bit (a lone one-bit code, which compress/flate and zlib
// accept); every other length is 0. The code lengths are written with a code
// length code of two one-bit symbols: 1 and 18 (a run of 11-138 zeros).
func dynamicZeros(hlit, hdist, n int) []byte {
	return deflateStream(func(w *bitWriter) {
		w.write(1, 1)
		w.write(2, 2) // BTYPE 10
		w.write(uint64(hlit-257), 5)
		w.write(uint64(hdist-1), 5)
		// Code length code lengths in the order of RFC 1951 3.2.7, up to
		// symbol 1, the 18th: only 18 and 1 have a length (1).
		order := []int{16, 17, 18, 0, 8, 7, 9, 6, 10, 5, 11, 4, 12, 3, 13, 2, 14, 1}
		w.write(uint64(len(order)-4), 4)
		for _, sym := range order {
			l := uint64(0)
			if sym == 18 || sym == 1 {
				l = 1
			}
			w.write(l, 3)
		}
		// Canonical codes (RFC 1951 3.2.2): symbol 1 is 0, symbol 18 is 1.
		// zeros writes k zero lengths; k is 0 or at least 11, the shortest
		// run symbol 18 can say.
		zeros := func(k int) {
			if k > 0 && k < 11 {
				panic(fmt.Sprintf("dynamicZeros: a run of %d zeros needs symbol 17", k))
			}
			for k > 0 {
				run := min(k, 138)
				if k-run > 0 && k-run < 11 {
					run = k - 11
				}
				huff(w, 1, 1)
				w.write(uint64(run-11), 7)
				k -= run
			}
		}
		one := func() { huff(w, 0, 1) }
		one()             // literal 0
		zeros(255)        // literals 1-255
		one()             // end of block, 256
		zeros(hlit - 257) // lengths 257 up to hlit-1
		one()             // distance 0
		zeros(hdist - 1)  // the other distances
		for range n {
			huff(w, 0, 1) // literal 0
		}
		huff(w, 1, 1) // end of block
	}, make([]byte, n))
}

// reservedCase is a stream that uses one of the reserved constructs, with a
// control stream that differs from it only there and must be accepted.
type reservedCase struct {
	name      string
	bad, good []byte
	n         int // bytes of output (both streams)
}

func reservedCases() []reservedCase {
	var cs []reservedCase
	for _, sym := range []int{286, 287} {
		bad, n := reservedFixed(sym, 3)
		good, _ := reservedFixed(285, 3)
		cs = append(cs, reservedCase{fmt.Sprintf("fixed-length-%d", sym), bad, good, n})
	}
	for _, sym := range []int{30, 31} {
		bad, n := reservedFarDistance(sym)
		good, _ := reservedFarDistance(29)
		cs = append(cs, reservedCase{fmt.Sprintf("fixed-distance-%d", sym), bad, good, n})
	}
	const n = 259 // 7 rows of a 36-pixel gray PNG, with their filter bytes
	cs = append(cs,
		reservedCase{"dynamic-hlit-287", dynamicZeros(287, 1, n), dynamicZeros(286, 1, n), n},
		reservedCase{"dynamic-hlit-288", dynamicZeros(288, 1, n), dynamicZeros(286, 1, n), n},
		reservedCase{"dynamic-hdist-31", dynamicZeros(257, 31, n), dynamicZeros(257, 30, n), n},
		reservedCase{"dynamic-hdist-32", dynamicZeros(257, 32, n), dynamicZeros(257, 30, n), n},
	)
	return cs
}

// TestInflateReservedCodes: both inflaters reject every reserved construct and
// accept its control, and so does compress/zlib itself (which shows the streams
// are assembled as intended).
func TestInflateReservedCodes(t *testing.T) {
	for _, tc := range reservedCases() {
		for _, s := range []struct {
			data []byte
			ok   bool
		}{{tc.good, true}, {tc.bad, false}} {
			zr, err := zlib.NewReader(bytes.NewReader(s.data))
			if err != nil {
				t.Fatal(err)
			}
			var got bytes.Buffer
			_, err = got.ReadFrom(zr)
			if (err == nil) != s.ok || (s.ok && !bytes.Equal(got.Bytes(), make([]byte, tc.n))) {
				t.Fatalf("%s (accept %v): compress/zlib read %d bytes, error %v", tc.name, s.ok, got.Len(), err)
			}
			for _, d := range inflaters() {
				dst := make([]byte, tc.n, tc.n+1)
				used, ok := d.inflater()(s.data, dst)
				if ok != s.ok || (ok && used != len(s.data)) {
					t.Errorf("%s (goInflate %v): the inflater says ok=%v (used %d of %d), want ok=%v", tc.name, d.goInflate, ok, used, len(s.data), s.ok)
				}
			}
		}
	}
}

// TestDecoderReservedCodes puts the same streams in PNGs of zeros (8-bit gray,
// filter None) and requires of the Decoder the reference's pixels or error.
func TestDecoderReservedCodes(t *testing.T) {
	sizes := map[int][2]int{259: {36, 7}, 775: {30, 25}, 24772: {562, 44}}
	for _, tc := range reservedCases() {
		wh, ok := sizes[tc.n]
		if !ok {
			t.Fatalf("%s: no PNG size for %d bytes", tc.name, tc.n)
		}
		for _, stream := range [][]byte{tc.good, tc.bad} {
			data := pngSpec{w: wh[0], h: wh[1], depth: 8, colour: pngGray,
				samples: make([]byte, wh[0]*wh[1]),
				stream:  func([]byte) []byte { return stream }}.build()
			c := Default()
			c.Width, c.Height = wh[0], wh[1]
			for _, d := range inflaters() {
				checkSame(t, d, data, tc.name+".png", c, MaxPixels)
			}
		}
	}
}

// FuzzInflate feeds arbitrary zlib streams to both inflaters: whatever the C
// inflater accepts, compress/zlib (image/png's inflater) must accept too, with
// the same bytes taken and the same output. The other way round is allowed: a
// stream that only compress/zlib accepts (a preset-dictionary flag, say) sends
// the file to the general path, which gives image/png's answer, only more
// slowly. It reaches the inflaters far faster than FuzzDecoder, whose inputs
// must first pass as PNGs. Seeds: the reserved constructs above with their
// controls, compress/zlib streams at every level and the damaged ones of
// decoder_test.go.
//
//	go test -run '^$' -fuzz '^FuzzInflate$' -fuzztime 1m ./modelio/prep
func FuzzInflate(f *testing.F) {
	if !haveCInflate {
		f.Skip("no C inflater in a build without cgo")
	}
	for _, tc := range reservedCases() {
		f.Add(tc.bad, uint16(tc.n))
		f.Add(tc.good, uint16(tc.n))
	}
	raw := bytes.Repeat([]byte("\x00\x01\x02rows of pixels "), 40)
	for level := zlib.HuffmanOnly; level <= zlib.BestCompression; level++ {
		f.Add(zlibLevel(level)(raw), uint16(len(raw)))
	}
	for _, stream := range zlibStreams {
		f.Add(stream(raw), uint16(len(raw)))
	}
	goInflater := &Decoder{goInflate: true}
	f.Fuzz(func(t *testing.T, src []byte, n uint16) {
		if n == 0 {
			return
		}
		a := make([]byte, n, int(n)+1)
		b := make([]byte, n, int(n)+1)
		usedC, okC := inflateC(src, a)
		usedGo, okGo := goInflater.inflateGo(src, b)
		if okC && (!okGo || usedC != usedGo || !bytes.Equal(a, b)) {
			t.Fatalf("C inflater ok=%v used %d, Go ok=%v used %d (same output %v)", okC, usedC, okGo, usedGo, bytes.Equal(a, b))
		}
	})
}
