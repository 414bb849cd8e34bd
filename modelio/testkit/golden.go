package testkit

import (
	"bytes"
	"flag"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"os"
	"path/filepath"
	"testing"

	"fovea/modelio/atomicfile"
)

// Update is the one -update flag of every test binary that imports testkit:
// golden pictures (Goldens.Check) and other stored files made by the tests
// are rewritten instead of compared. Look at every changed file before
// committing it.
var Update = flag.Bool("update", false, "rewrite golden pictures and generated test files instead of comparing")

// Goldens is a folder of golden PNG pictures.
type Goldens struct {
	Dir    string // the golden pictures
	Failed string // where a picture that differs is saved for inspection (git-ignored)
	// Tol is the largest difference per 8-bit channel that still matches.
	// Say at the declaration why it is not 0.
	Tol int
	// Rewrite is the command that rewrites the goldens, for messages
	// ("go test ./viz -run Golden -update").
	Rewrite string
}

// Check compares img with the golden picture name: same size, and every
// pixel's non-premultiplied colour within g.Tol per channel. With -update it
// writes img as the golden instead (atomically). On a mismatch the test
// fails naming the first differing pixel and the count, and img is saved
// under g.Failed.
func (g Goldens) Check(t testing.TB, name string, img *image.NRGBA) {
	t.Helper()
	path := filepath.Join(g.Dir, name)
	if *Update {
		if err := SavePNG(path, img); err != nil {
			t.Fatal(err)
		}
		return
	}
	f, err := os.Open(path)
	if err != nil {
		t.Fatalf("golden %s: %v (make it with: %s)", name, err, g.Rewrite)
	}
	defer f.Close()
	want, err := png.Decode(f)
	if err != nil {
		t.Fatalf("golden %s: %v", name, err)
	}
	if diff := Compare(want, img, g.Tol); diff != "" {
		failed := filepath.Join(g.Failed, name)
		if err := SavePNG(failed, img); err != nil {
			t.Logf("could not save the picture drawn: %v", err)
		}
		t.Errorf("golden %s: %s (picture drawn saved as %s)", name, diff, failed)
	}
}

// Compare returns "" when the pictures have the same size and, at every
// pixel, non-premultiplied colours within tol per 8-bit channel; otherwise
// a description of the first difference and the number of differing
// pixels.
func Compare(want image.Image, got *image.NRGBA, tol int) string {
	wb, gb := want.Bounds(), got.Bounds()
	if wb.Size() != gb.Size() {
		return fmt.Sprintf("size %v, want %v", gb.Size(), wb.Size())
	}
	off := func(a, b uint8) bool { return int(a)-int(b) > tol || int(b)-int(a) > tol }
	n, first := 0, ""
	for y := range wb.Dy() {
		for x := range wb.Dx() {
			w := color.NRGBAModel.Convert(want.At(wb.Min.X+x, wb.Min.Y+y)).(color.NRGBA)
			g := got.NRGBAAt(gb.Min.X+x, gb.Min.Y+y)
			if off(w.R, g.R) || off(w.G, g.G) || off(w.B, g.B) || off(w.A, g.A) {
				if n == 0 {
					first = fmt.Sprintf("pixel (%d,%d) is %v, want %v", x, y, g, w)
				}
				n++
			}
		}
	}
	if n == 0 {
		return ""
	}
	return fmt.Sprintf("%d pixels differ by more than %d; first: %s", n, tol, first)
}

// SavePNG writes img as a PNG file at path atomically, creating its folder.
func SavePNG(path string, img image.Image) error {
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return err
	}
	var buf bytes.Buffer
	if err := png.Encode(&buf, img); err != nil {
		return err
	}
	return atomicfile.WriteBytes(path, buf.Bytes(), 0o644)
}
