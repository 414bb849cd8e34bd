package gui

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"fyne.io/fyne/v2"
)

// Percentages and measured values in tables. Expected strings worked out by
// hand. (Counts and sizes: core's TestNumbers.)
func TestNumberFormats(t *testing.T) {
	for _, c := range []struct {
		p    float64
		want string
	}{{0, "0.0 %"}, {0.0004, "<0.1 %"}, {0.67, "67.0 %"}, {1, "100.0 %"}} {
		if got := percent(c.p); got != c.want {
			t.Errorf("percent(%v) = %q, want %q", c.p, got, c.want)
		}
	}
	for _, c := range []struct {
		v    float64
		want string
	}{{0, "0"}, {3.6129, "3.61"}, {0.0234, "0.0234"}, {20.56, "20.6"}, {0.0002637, "2.6e-04"}, {-0.5, "-0.5"}} {
		if got := number(c.v); got != c.want {
			t.Errorf("number(%v) = %q, want %q", c.v, got, c.want)
		}
	}
}

// Dialog text is wrapped by hand: words stay whole, a word longer than the
// width (a long path) is cut, and line breaks already there stay.
func TestWrapText(t *testing.T) {
	cases := []struct {
		in   string
		w    int
		want string
	}{
		{"one two three", 7, "one two\nthree"},
		{"abcdefghij", 4, "abcd\nefgh\nij"},
		{"a\nb c", 10, "a\nb c"},
		{"", 5, ""},
	}
	for _, c := range cases {
		if got := wrapText(c.in, c.w); got != c.want {
			t.Errorf("wrapText(%q, %d) = %q, want %q", c.in, c.w, got, c.want)
		}
	}
}

// gridFit picks the columns and cell size that make a grid of tiles as large
// as the space allows. Worked by hand: 16 tiles of 5 cells plus 10 pixels in
// 400×400 → 4 columns of 100 pixels: (100 − 10) / 5 = 18 per cell.
func TestGridFit(t *testing.T) {
	cases := []struct {
		n, side, extra int
		area           fyne.Size
		max            int
		cols, cell     int
	}{
		{16, 5, 10, fyne.NewSize(400, 400), 40, 4, 18},
		{16, 5, 10, fyne.NewSize(800, 200), 40, 8, 18}, // 8 columns of 100, 2 rows of 100: (100 − 10) / 5 = 18
		{3, 64, 0, fyne.NewSize(192, 64), 40, 3, 1},
		{1, 3, 0, fyne.NewSize(300, 300), 40, 1, 40}, // 100 per cell, capped at 40
	}
	for _, c := range cases {
		cols, cell := gridFit(c.n, c.side, c.extra, c.area, c.max)
		if cols != c.cols || cell != c.cell {
			t.Errorf("gridFit(%d tiles of %d, +%d, %v) = %d columns of cell %d, want %d of %d", c.n, c.side, c.extra, c.area, cols, cell, c.cols, c.cell)
		}
	}
}

// openKind tells models from images by extension, then by content: the
// prep package's test images include PNG data under a .jpg name and with no
// extension (testdata/README.md), and a PNG signature is "\x89PNG\r\n\x1a\n"
// (PNG specification, section 5.2).
func TestOpenKind(t *testing.T) {
	images := filepath.Join("..", "..", "testdata", "images")
	dir := t.TempDir()
	other := filepath.Join(dir, "weights.bin")
	if err := os.WriteFile(other, []byte("\x08\x07\x12\x04"), 0o644); err != nil {
		t.Fatal(err)
	}
	cases := []struct{ path, want string }{
		{filepath.Join(images, "no-extension"), kindImage},
		{filepath.Join(images, "png-named.jpg"), kindImage},
		{filepath.Join(images, "one.png"), kindImage},
		{filepath.Join(dir, "model.ONNX"), kindModel},
		{other, kindModel},
		{dir, kindFolder},
		{filepath.Join(dir, "missing"), kindModel},
	}
	for _, c := range cases {
		if got := openKind(c.path); got != c.want {
			t.Errorf("openKind(%s) = %s, want %s", c.path, got, c.want)
		}
	}
}

// Bad options end Run with status 2 and a message, before any window opens.
func TestRunRefusesBadOptions(t *testing.T) {
	for _, o := range []Options{{View: "gallery"}, {Theme: "sepia"}} {
		if got := Run(o); got != 2 {
			t.Errorf("Run(%+v) = %d, want 2", o, got)
		}
	}
	if !strings.Contains(viewNames(), "health") {
		t.Errorf("view names %q", viewNames())
	}
}

// Dialogs drop the package prefixes and a file named twice.
func TestPlainError(t *testing.T) {
	cases := []struct{ in, want string }{
		{"/tmp/a/broken.onnx: modelio: broken.onnx: not an ONNX model", "/tmp/a/broken.onnx: not an ONNX model"},
		{"core: /x/labels.txt: 6 labels, but model m.onnx has 7 classes", "/x/labels.txt: 6 labels, but model m.onnx has 7 classes"},
		{"/x/y.png: other.png: mismatch", "/x/y.png: other.png: mismatch"},
		{"open a model first", "Open a model first"},
	}
	for _, c := range cases {
		if got := plainError(errors.New(c.in)); got != c.want {
			t.Errorf("plainError(%q) = %q, want %q", c.in, got, c.want)
		}
	}
}

// The probe folder is shown relative to the home folder or by its name,
// never as a full path of this machine (the full path only on hover).
func TestHomePath(t *testing.T) {
	home := t.TempDir()
	t.Setenv("HOME", home)
	for _, c := range []struct{ in, want string }{
		{filepath.Join(home, "probes", "set 1"), "~/probes/set 1"},
		{home, "~"},
		{"/nonexistent/checkout/assets/demo/probe", "probe"},
		{home + "x/elsewhere", "elsewhere"}, // a sibling whose name starts like home's
	} {
		if got := homePath(c.in); got != c.want {
			t.Errorf("homePath(%q) = %q, want %q", c.in, got, c.want)
		}
	}
}
