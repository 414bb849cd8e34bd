package prep

import (
	"bytes"
	"errors"
	"fmt"
	"image"
	"image/draw"
	_ "image/gif"  // registers GIF
	_ "image/jpeg" // registers JPEG
	_ "image/png"  // registers PNG
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strings"

	_ "golang.org/x/image/bmp"  // registers BMP
	"golang.org/x/image/tiff"   // registers TIFF
	_ "golang.org/x/image/webp" // registers WebP
)

// MaxPixels is the largest image, in pixels, that [Load] and [Decode] decode:
// 64 Mi pixels (67,108,864), e.g. 8192×8192, above any camera's still photo. Decoding
// such an image takes up to 512 MiB (16-bit RGBA TIFF) and [Fit] another 256 MiB for
// its opaque copy; a larger claim is refused after reading the header, before any
// pixel buffer exists. Within the limit a decoder may still allocate the full picture
// before finding that the file is truncated: that cost is bounded by this number.
const MaxPixels = 1 << 26

// Extensions are the file name extensions (lower case, with the dot) of the
// formats [Load] decodes: the one list file dialogs and folder listings use.
// The format itself is recognised from the content, not from the name.
var Extensions = []string{".png", ".jpg", ".jpeg", ".gif", ".bmp", ".tif", ".tiff", ".webp"}

// Error classes, for errors.Is on the errors of [Load], [Decode] and [DecodeLimit].
var (
	ErrEmpty    = errors.New("empty file")
	ErrFormat   = errors.New("not an image in a supported format (PNG, JPEG, GIF, BMP, TIFF, WebP)")
	ErrTooLarge = errors.New("image too large")
	ErrCorrupt  = errors.New("damaged or truncated image")
)

// FileError is the error of a file that could not be read as an image. Its message is
// "prep: <file>: <class>: <detail>"; errors.Is matches its class (ErrEmpty, ...) and,
// through Err, the underlying cause (for example io.ErrUnexpectedEOF).
type FileError struct {
	File   string // file name as given
	Class  error  // one of ErrEmpty, ErrFormat, ErrTooLarge, ErrCorrupt, or nil for I/O errors
	Detail string // what was found, for people
	Err    error  // underlying error, may be nil
}

func (e *FileError) Error() string {
	msg := "prep: " + e.File + ": "
	if e.Class != nil {
		msg += e.Class.Error()
		if e.Detail != "" || e.Err != nil {
			msg += ": "
		}
	}
	msg += e.Detail
	if e.Err != nil {
		if e.Detail != "" {
			msg += ": "
		}
		msg += e.Err.Error()
	}
	return msg
}

// Unwrap gives both the class and the cause to errors.Is and errors.As.
func (e *FileError) Unwrap() []error {
	var errs []error
	if e.Class != nil {
		errs = append(errs, e.Class)
	}
	if e.Err != nil {
		errs = append(errs, e.Err)
	}
	return errs
}

// Load reads an image file, refusing images over [MaxPixels] before decoding them, and
// applies a JPEG's EXIF orientation. The format is recognised from the content; the
// extension is only used in messages. The result is never nil when err is nil.
func Load(path string) (image.Image, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("prep: %w", err) // *PathError already names the file
	}
	defer f.Close()
	return loadOpen(f, path)
}

// LoadFS is [Load] for the file name inside fsys (an io/fs path: forward slashes, no
// leading slash), for example the embedded demo images. A file that cannot be read at
// random offsets (io.ReaderAt) is read into memory, up to 1 GiB (twice the largest
// uncompressed picture [MaxPixels] allows); embedded files and os.DirFS files are not.
func LoadFS(fsys fs.FS, name string) (image.Image, error) {
	f, err := fsys.Open(name)
	if err != nil {
		return nil, fmt.Errorf("prep: %w", err) // *PathError already names the file
	}
	defer f.Close()
	return loadOpen(f, name)
}

// loadOpen is the part of [Load] and [LoadFS] after opening: refuse folders,
// decode through io.ReaderAt when the file offers it (an *os.File does), else
// read it into memory within a bound.
func loadOpen(f fs.File, name string) (image.Image, error) {
	st, err := f.Stat()
	if err != nil {
		return nil, fmt.Errorf("prep: %w", err)
	}
	if st.IsDir() {
		return nil, &FileError{File: name, Class: ErrFormat, Detail: "is a folder"}
	}
	if ra, ok := f.(io.ReaderAt); ok {
		return decode(ra, st.Size(), name, MaxPixels)
	}
	const maxInMemory = 1 << 30
	if st.Size() > maxInMemory {
		return nil, &FileError{File: name, Class: ErrTooLarge, Detail: fmt.Sprintf("%d bytes, more than %d", st.Size(), maxInMemory)}
	}
	b, err := io.ReadAll(io.LimitReader(f, maxInMemory))
	if err != nil {
		return nil, fmt.Errorf("prep: %s: %w", name, err)
	}
	return Decode(b, name)
}

// Decode is [Load] for an image already in memory; name is used in messages only.
func Decode(data []byte, name string) (image.Image, error) {
	return DecodeLimit(bytes.NewReader(data), int64(len(data)), name, MaxPixels)
}

// DecodeLimit decodes size bytes from r as an image of at most maxPixels pixels
// (maxPixels <= 0 means [MaxPixels]). It reads r in several passes (header, EXIF, pixels)
// through io.SectionReader and does not copy the file into memory.
func DecodeLimit(r io.ReaderAt, size int64, name string, maxPixels int) (image.Image, error) {
	if maxPixels <= 0 {
		maxPixels = MaxPixels
	}
	return decode(r, size, name, maxPixels)
}

func decode(r io.ReaderAt, size int64, name string, maxPixels int) (img image.Image, err error) {
	if size == 0 {
		return nil, &FileError{File: name, Class: ErrEmpty, Detail: "0 bytes"}
	}
	// The decoders are third-party code run on hostile input: a panic in one of them is
	// a damaged file, not a reason to take the program down.
	defer func() {
		if p := recover(); p != nil {
			img = nil
			err = &FileError{File: name, Class: ErrCorrupt, Detail: fmt.Sprintf("decoder failed: %v", p)}
		}
	}()
	// image.DecodeConfig and image.Decode wrap the reader in a bufio.Reader, and the TIFF
	// decoder copies a reader that is not an io.ReaderAt into memory, up to the furthest
	// offset it reads (the IFD may sit at the end of a large file): TIFF is read directly.
	var cfg image.Config
	var format string
	if sniff(r) == "tiff" {
		format = "tiff"
		cfg, err = tiff.DecodeConfig(io.NewSectionReader(r, 0, size))
	} else {
		cfg, format, err = image.DecodeConfig(io.NewSectionReader(r, 0, size))
	}
	if err != nil {
		return nil, classify(name, sniff(r), false, r, size, err)
	}
	if cfg.Width <= 0 || cfg.Height <= 0 {
		return nil, &FileError{File: name, Class: ErrCorrupt, Detail: fmt.Sprintf("%s header gives a size of %d×%d pixels", formatName(format), cfg.Width, cfg.Height)}
	}
	if int64(cfg.Width)*int64(cfg.Height) > int64(maxPixels) {
		return nil, &FileError{File: name, Class: ErrTooLarge, Detail: fmt.Sprintf("%s header claims %d×%d pixels (%s), over the limit of %s; not decoded",
			formatName(format), cfg.Width, cfg.Height, mpx(int64(cfg.Width)*int64(cfg.Height)), mpx(int64(maxPixels)))}
	}
	if format == "tiff" {
		img, err = tiff.Decode(io.NewSectionReader(r, 0, size))
	} else {
		img, _, err = image.Decode(io.NewSectionReader(r, 0, size))
	}
	if err != nil {
		return nil, classify(name, format, true, r, size, err)
	}
	b := img.Bounds()
	if b.Empty() || int64(b.Dx())*int64(b.Dy()) > int64(maxPixels) {
		return nil, &FileError{File: name, Class: ErrCorrupt, Detail: fmt.Sprintf("%s decoder gave %d×%d pixels", formatName(format), b.Dx(), b.Dy())}
	}
	if format == "gif" && b != image.Rect(0, 0, cfg.Width, cfg.Height) {
		// The first frame covers part of the logical screen; the rest is transparent
		// (composited over the background later), as a viewer shows the first frame.
		screen := image.NewNRGBA(image.Rect(0, 0, cfg.Width, cfg.Height))
		draw.Draw(screen, b, img, b.Min, draw.Src)
		img = screen
	}
	if format == "jpeg" {
		if o := exifOrientation(io.NewSectionReader(r, 0, size)); o > 1 {
			img = orient(img, o)
		}
	}
	return img, nil
}

// classify turns a decoder error into a FileError with a class and a readable detail.
// format is the format's name as image.RegisterFormat has it, or "" when unknown;
// pixels says whether the header had been read.
func classify(name, format string, pixels bool, r io.ReaderAt, size int64, err error) error {
	if errors.Is(err, image.ErrFormat) {
		var head [8]byte
		n, _ := r.ReadAt(head[:], 0)
		detail := fmt.Sprintf("content starts with % x", head[:n])
		if ext := filepath.Ext(name); ext != "" {
			detail += fmt.Sprintf(" (the name ends in %s, but the format comes from the content)", ext)
		}
		return &FileError{File: name, Class: ErrFormat, Detail: detail}
	}
	var pe *os.PathError
	if errors.As(err, &pe) {
		return &FileError{File: name, Err: err}
	}
	stage := "header"
	if pixels {
		stage = "pixel data"
	}
	detail := fmt.Sprintf("%s %s unreadable (%d bytes)", formatName(format), stage, size)
	if errors.Is(err, io.ErrUnexpectedEOF) || errors.Is(err, io.EOF) {
		detail = fmt.Sprintf("%s %s ends early after %d bytes (truncated file?)", formatName(format), stage, size)
	}
	return &FileError{File: name, Class: ErrCorrupt, Detail: detail, Err: err}
}

// sniff names the format by the signatures the decoders register, for messages about
// files whose header cannot be read; "" when none matches.
func sniff(r io.ReaderAt) string {
	var head [12]byte
	n, _ := r.ReadAt(head[:], 0)
	h := string(head[:n])
	switch {
	case strings.HasPrefix(h, "\x89PNG\r\n\x1a\n"):
		return "png"
	case strings.HasPrefix(h, "\xff\xd8"):
		return "jpeg"
	case strings.HasPrefix(h, "GIF8"):
		return "gif"
	case strings.HasPrefix(h, "BM"):
		return "bmp"
	case strings.HasPrefix(h, "II*\x00"), strings.HasPrefix(h, "MM\x00*"):
		return "tiff"
	case len(h) == 12 && h[:4] == "RIFF" && h[8:] == "WEBP":
		return "webp"
	}
	return ""
}

func formatName(format string) string {
	switch format {
	case "":
		return "image"
	case "webp":
		return "WebP"
	}
	return strings.ToUpper(format) // png, jpeg, gif, bmp, tiff
}

// mpx formats a pixel count in mebipixels ("64 Mpx") or plain pixels below one Mpx.
func mpx(n int64) string {
	if n >= 1<<20 {
		return fmt.Sprintf("%.4g Mpx", float64(n)/(1<<20))
	}
	return fmt.Sprintf("%d pixels", n)
}
