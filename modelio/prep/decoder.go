package prep

import (
	"bytes"
	"fmt"
	"image"
	"io"
	"io/fs"
	"os"
	"time"
)

// A Decoder turns image files into tensor values, one file after another, with
// exactly the result of [Load] (or [LoadFS]), [Fit] and [Config.TensorFromImage]:
// the same values bit for bit, or the same error. It keeps what those allocate
// for every file (the file's bytes, the inflate window and tables, the rows) and
// reuses them for the next one, and for the common PNG (not interlaced, 8 bits a
// sample or fewer, already the model's size or a plain centre cut of it) it
// writes the values straight from the inflated rows, without an image in
// between. Any other file takes the general path from the bytes in memory.
//
// A folder scan spends as much time decoding small probe images as running the
// model on them; this is the part of that time that does not depend on the
// picture.
//
// The zero value is ready to use. A Decoder is not safe for concurrent use: give
// each goroutine its own.
//
// # Memory
//
// A file of up to 8 MiB is read into the Decoder's buffer, which it keeps; a
// larger one is decoded as [Load] does, from the file. The fast PNG path keeps
// the inflated rows when they take up to 16 MiB (a 2048×2048 RGBA picture);
// beyond that the general path runs. So a Decoder holds at most about 24 MiB
// between files, usually far less (a 224×224 PNG: about 200 KiB).
type Decoder struct {
	file []byte        // the last file's bytes
	idat []byte        // the pixel data of a PNG whose IDAT chunks had to be joined
	raw  []byte        // inflated and unfiltered rows, each with its filter byte
	zero []byte        // a row of zeros: the row above the first
	rgba []byte        // one flattened row, 4 bytes a pixel
	br   bytes.Reader  // reads the pixel data for zr
	zr   io.ReadCloser // zlib reader, Reset for each file (zlib.Resetter)

	png pngRows // the PNG being read on the fast path
	run []int   // its IDAT chunks: offset, length, ...
	tw  *tensorWriter

	goInflate bool // inflate with compress/zlib even where C zlib is linked (tests)

	decode, prepare time.Duration
}

// Limits of what a Decoder keeps between files.
const (
	decoderMaxFile = 8 << 20  // bytes of a file read into the buffer
	decoderMaxRaw  = 16 << 20 // bytes of inflated rows on the fast path
)

// LoadInto reads the image file path and writes its tensor values for c into dst
// (len c.Len()): what c.TensorFromImage(Fit(img, c), dst) writes for the img that
// Load(path) returns. On error dst is not written and the error is Load's own. It
// panics when c is invalid or dst has the wrong length, like TensorFromImage.
func (d *Decoder) LoadInto(path string, c Config, dst []float32) error {
	return d.loadInto(nil, path, c, dst)
}

// LoadIntoFS is [Decoder.LoadInto] for the file name inside fsys, as [LoadFS] reads it.
func (d *Decoder) LoadIntoFS(fsys fs.FS, name string, c Config, dst []float32) error {
	return d.loadInto(fsys, name, c, dst)
}

// Stages returns the time spent so far decoding (reading the files, inflating
// and unfiltering PNG rows, or the general decoders) and preparing (compositing,
// cutting, resizing and converting to values), summed over the calls. A file
// that could not be read counts as decoding.
func (d *Decoder) Stages() (decode, prepare time.Duration) { return d.decode, d.prepare }

func (d *Decoder) loadInto(fsys fs.FS, name string, c Config, dst []float32) error {
	if err := c.Validate(); err != nil {
		panic(fmt.Sprintf("prep: Decoder with %v", err))
	}
	if len(dst) != c.Len() {
		panic(fmt.Sprintf("prep: Decoder: dst has %d values, want %d×%d×%d = %d", len(dst), c.Channels, c.Height, c.Width, c.Len()))
	}
	t0 := time.Now()
	data, ok := d.read(fsys, name)
	if !ok {
		// Too large to keep, or not readable: Load says why, or decodes
		// it from the file.
		img, err := d.loadFile(fsys, name)
		t1 := time.Now()
		d.decode += t1.Sub(t0)
		if err != nil {
			return err
		}
		c.TensorFromImage(Fit(img, c), dst)
		d.prepare += time.Since(t1)
		return nil
	}
	_, err := d.decodeInto(data, name, c, dst, MaxPixels, t0)
	return err
}

// decodeInto is the part of loadInto after reading the file (started at t0)
// into data; fast says whether the fast PNG path took it.
func (d *Decoder) decodeInto(data []byte, name string, c Config, dst []float32, maxPixels int, t0 time.Time) (fast bool, err error) {
	if p, ok := d.inflatePNG(data, c, maxPixels); ok {
		t1 := time.Now()
		d.decode += t1.Sub(t0)
		d.writePNG(p, c, dst)
		d.prepare += time.Since(t1)
		return true, nil
	}
	img, err := decode(bytes.NewReader(data), int64(len(data)), name, maxPixels)
	t1 := time.Now()
	d.decode += t1.Sub(t0)
	if err != nil {
		return false, err
	}
	c.TensorFromImage(Fit(img, c), dst)
	d.prepare += time.Since(t1)
	return false, nil
}

// loadFile is Load or LoadFS.
func (d *Decoder) loadFile(fsys fs.FS, name string) (image.Image, error) {
	if fsys == nil {
		return Load(name)
	}
	return LoadFS(fsys, name)
}

// read reads the whole file into d.file, as Load and LoadFS see it: the size
// the file states, read through io.ReaderAt. ok is false when the file cannot
// be opened, is a folder, is empty, is larger than decoderMaxFile, offers no
// io.ReaderAt (os.File, embedded and fstest files do), or a read fails: the
// caller then lets Load or LoadFS handle it, so that the error is theirs.
func (d *Decoder) read(fsys fs.FS, name string) (data []byte, ok bool) {
	if fsys == nil {
		if data, ok, tried := d.readRaw(name); tried {
			return data, ok
		}
	}
	var f fs.File
	var err error
	if fsys == nil {
		f, err = os.Open(name)
	} else {
		f, err = fsys.Open(name)
	}
	if err != nil {
		return nil, false
	}
	defer f.Close()
	ra, isRA := f.(io.ReaderAt)
	if !isRA {
		return nil, false
	}
	st, err := f.Stat()
	if err != nil || st.IsDir() || st.Size() <= 0 || st.Size() > decoderMaxFile {
		return nil, false
	}
	buf := d.fileBuf(int(st.Size()))
	size := len(buf)
	n, err := ra.ReadAt(buf, 0)
	if n != size || (err != nil && err != io.EOF) {
		return nil, false
	}
	return buf, true
}

// fileBuf returns d.file resized to size bytes, growing it when needed.
func (d *Decoder) fileBuf(size int) []byte {
	if cap(d.file) < size {
		d.file = make([]byte, size, max(size, min(2*cap(d.file), decoderMaxFile)))
	}
	return d.file[:size]
}
