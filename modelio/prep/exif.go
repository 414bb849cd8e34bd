package prep

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"image"
	"io"

	"github.com/disintegration/imaging"
)

// exifOrientation returns the EXIF orientation (1–8) of a JPEG stream, or 0 when it has
// none or it cannot be read. Damaged EXIF data is not an error: the picture is then used
// as stored, which is what most viewers do too.
//
// A JPEG is a sequence of segments (ITU-T T.81, Annex B): 0xFF, a marker byte, and for
// most markers a two-byte big-endian length that counts itself. EXIF lives in an APP1
// segment (marker 0xE1) whose body starts with "Exif\0" and a pad byte, followed by a
// TIFF structure (EXIF 2.32, CIPA DC-008, section 4.5.4). Only segments before the start
// of scan (0xDA) are read.
func exifOrientation(r io.Reader) int {
	br := bufio.NewReaderSize(r, 4096)
	var soi [2]byte
	if _, err := io.ReadFull(br, soi[:]); err != nil || soi != [2]byte{0xFF, 0xD8} {
		return 0
	}
	const maxSegments = 1024 // a real header has a handful; this only bounds the work
	for range maxSegments {
		c, err := br.ReadByte()
		if err != nil || c != 0xFF {
			return 0
		}
		for c == 0xFF { // fill bytes (T.81 B.1.1.2)
			if c, err = br.ReadByte(); err != nil {
				return 0
			}
		}
		switch {
		case c == 0x01 || c == 0xD8 || (c >= 0xD0 && c <= 0xD7):
			continue // markers without a length field
		case c == 0x00 || c == 0xD9 || c == 0xDA:
			return 0 // stuffed byte, end of image or start of scan: no EXIF before the pixels
		}
		var lb [2]byte
		if _, err := io.ReadFull(br, lb[:]); err != nil {
			return 0
		}
		n := int(binary.BigEndian.Uint16(lb[:])) - 2
		if n < 0 {
			return 0
		}
		if c == 0xE1 && n >= 6 {
			body := make([]byte, n) // at most 65533 bytes
			if _, err := io.ReadFull(br, body); err != nil {
				return 0
			}
			if bytes.HasPrefix(body, []byte("Exif\x00")) {
				if o := tiffOrientation(body[6:]); o != 0 {
					return o
				}
			}
			continue
		}
		if _, err := br.Discard(n); err != nil {
			return 0
		}
	}
	return 0
}

// tiffOrientation reads tag 0x0112 (Orientation) from the first IFD of a TIFF structure
// (TIFF 6.0, section 2: 8-byte header "II*\0" or "MM\0*" with the IFD offset; an IFD is a
// 2-byte count, 12-byte entries tag/type/count/value, and a next-IFD offset). It returns
// 0 unless the tag is present with a value 1–8. Every offset is checked against len(t).
func tiffOrientation(t []byte) int {
	if len(t) < 8 {
		return 0
	}
	var bo binary.ByteOrder
	switch string(t[:2]) {
	case "II":
		bo = binary.LittleEndian
	case "MM":
		bo = binary.BigEndian
	default:
		return 0
	}
	if bo.Uint16(t[2:]) != 42 {
		return 0
	}
	off := uint64(bo.Uint32(t[4:]))
	if off+2 > uint64(len(t)) {
		return 0
	}
	count := int(bo.Uint16(t[off:]))
	for i := range count {
		e := off + 2 + 12*uint64(i)
		if e+12 > uint64(len(t)) {
			return 0
		}
		if bo.Uint16(t[e:]) != 0x0112 {
			continue
		}
		var v uint32
		switch typ, n := bo.Uint16(t[e+2:]), bo.Uint32(t[e+4:]); {
		case n < 1:
			return 0
		case typ == 3: // SHORT, the type the standard prescribes; value in the first 2 bytes
			v = uint32(bo.Uint16(t[e+8:]))
		case typ == 4 && n == 1: // LONG, written by a few tools
			v = bo.Uint32(t[e+8:])
		default:
			return 0
		}
		if v >= 1 && v <= 8 {
			return int(v)
		}
		return 0
	}
	return 0
}

// orient turns a stored picture upright according to its EXIF orientation o (EXIF 2.32,
// tag 0x0112): o says where the stored rows and columns belong visually. imaging rotates
// counter-clockwise, so "rotate 90° clockwise to display" (o = 6) is Rotate270.
func orient(img image.Image, o int) image.Image {
	switch o {
	case 2: // stored mirrored left-right
		return imaging.FlipH(img)
	case 3: // stored upside down
		return imaging.Rotate180(img)
	case 4: // stored mirrored top-bottom
		return imaging.FlipV(img)
	case 5: // stored rows are the visual columns: transpose
		return imaging.Transpose(img)
	case 6: // stored rotated 90° counter-clockwise: turn 90° clockwise
		return imaging.Rotate270(img)
	case 7: // anti-diagonal mirror
		return imaging.Transverse(img)
	case 8: // stored rotated 90° clockwise: turn 90° counter-clockwise
		return imaging.Rotate90(img)
	}
	return img
}
