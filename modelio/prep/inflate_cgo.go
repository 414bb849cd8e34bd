//go:build cgo

package prep

/*
#cgo LDFLAGS: -lz
#include <string.h>
#include <zlib.h>

// fovea_inflate inflates the zlib stream src (RFC 1950) into dst in one call.
// It returns zlib's result (Z_STREAM_END when the stream, its Adler-32 included,
// ended within src and dst) and the bytes read and written.
static int fovea_inflate(const unsigned char *src, unsigned long srclen,
		unsigned char *dst, unsigned long dstlen, unsigned long *in, unsigned long *out) {
	z_stream s;
	memset(&s, 0, sizeof s);
	if (inflateInit(&s) != Z_OK) {
		return Z_MEM_ERROR;
	}
	s.next_in = (unsigned char *)src;
	s.avail_in = srclen;
	s.next_out = dst;
	s.avail_out = dstlen;
	int r = inflate(&s, Z_FINISH);
	*in = s.total_in;
	*out = s.total_out;
	inflateEnd(&s);
	return r;
}
*/
import "C"

import "unsafe"

// haveCInflate says whether this build inflates through a C library.
const haveCInflate = true

// inflateC inflates the zlib stream src into dst through the C zlib library
// (Debian's zlib1g, linked dynamically), about two and a half times as fast as
// compress/zlib on PNG rows. It says how many bytes of src the stream took and
// whether the stream ended, its checksum correct, having written exactly
// len(dst) bytes. It reads nothing outside src and writes nothing outside dst
// (one spare byte of dst's capacity is used to notice data left over).
//
// zlib rejects what compress/flate rejects (inflate_test.go). libdeflate,
// which inflates the 64×64 probes of the scan benchmark in 30 µs against
// zlib's 55, was used here for a while and given up: it reads the reserved
// length and distance symbols of RFC 1951 and oversized dynamic block headers
// that image/png refuses, so the scan would have accepted files that the
// viewer calls damaged.
func inflateC(src, dst []byte) (used int, ok bool) {
	if len(src) == 0 || len(dst) == 0 || cap(dst) == len(dst) {
		return 0, false
	}
	out := dst[:len(dst)+1]
	var in, n C.ulong
	r := C.fovea_inflate((*C.uchar)(unsafe.Pointer(&src[0])), C.ulong(len(src)),
		(*C.uchar)(unsafe.Pointer(&out[0])), C.ulong(len(out)), &in, &n)
	return int(in), r == C.Z_STREAM_END && int(n) == len(dst)
}
