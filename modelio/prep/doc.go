// Package prep turns image files into the input tensors of an image classifier.
//
// The path from a file to a tensor has four steps, each a plain function:
//
//	img, err := prep.Load(path)      // decode with limits, EXIF orientation applied
//	fit := prep.Fit(img, cfg)        // alpha composited, cropped/stretched to cfg.Width×cfg.Height
//	planes := prep.Planes(fit)       // [3][H][W] RGB in 0..1
//	cfg.Tensor(planes, dst)          // channel order, value range, mean/std, layout
//
// [Config.Batch] does the last three for several images at once. A [Decoder] does
// all four for one file after another, with the same values bit for bit, keeping
// its buffers between files and writing common PNGs (8 bits a sample or fewer, not
// interlaced, at the input size) straight into the tensor; folder scans use one
// per goroutine. [Guess] proposes a
// Config from the model's image input and its metadata, [Config.String] states the
// settings in force in one line, and [Settings] remembers per-model choices in the
// user's config folder.
//
// # Formats
//
// PNG, JPEG, GIF, BMP, TIFF and WebP are recognised by their content, not by the file
// name's extension. Palette, gray, 16-bit, CMYK and YCbCr images are converted to 8-bit
// RGB; transparent pixels are composited over [Config.Background] (the decoders'
// premultiplied or straight alpha is honoured). A GIF gives its first frame, placed on
// its logical screen. A JPEG's EXIF orientation (tag 0x0112, values 1–8) is applied so
// that the picture comes out upright, as a viewer would show it.
//
// # Tensors
//
// Tensors are []float32, row-major. NCHW means dst[c*H*W + y*W + x], NHWC means
// dst[(y*W+x)*C + c]; y = 0 is the top row, x = 0 the left column. Channel c is red,
// green, blue in that order, or blue, green, red when [Config.BGR] is set; Mean and Std
// are indexed by the tensor's channel, so they follow the same order. A one-channel
// model gets the luminance Y = 0.299 R + 0.587 G + 0.114 B (ITU-R BT.601).
//
// Each value is computed as
//
//	v = p            (Range "0-1",   p the 8-bit sample / 255)
//	v = 255 p        (Range "0-255")
//	v = 2 p - 1      (Range "-1-1")
//	out = (v - Mean[c]) / Std[c]
//
// # Security Considerations
//
// An image file states its own size, and a few hundred bytes can claim a picture of
// 100000×100000 pixels whose decoding would allocate tens of gigabytes. [Load] and
// [Decode] therefore read the header first (image.DecodeConfig) and refuse images over
// [MaxPixels] before any pixel buffer exists; [DecodeLimit] takes a lower limit.
// Decoder panics are turned into errors. File names appear in every error, and errors
// are classified ([ErrEmpty], [ErrFormat], [ErrTooLarge], [ErrCorrupt]) for errors.Is.
//
// Settings are written atomically (temporary file in the same folder, fsync, rename) and
// only into the folder the caller names, normally [SettingsDir]; never beside the model.
package prep
