package core

import (
	"errors"
	"image"
	"image/color"
	"image/png"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// WriteFile must leave either the old file or the complete new one, and no
// temporary file behind (house rule: writes are atomic, temp file in the
// same folder + rename).
func TestWriteFileAtomic(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "résumé ü folder", "out file.txt")
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	write := func(s string) func(io.Writer) error {
		return func(w io.Writer) error { _, err := io.WriteString(w, s); return err }
	}
	if err := WriteFile(path, write("first")); err != nil {
		t.Fatal(err)
	}
	// A writer that fails half-way must not touch the old content.
	boom := errors.New("disk full (simulated)")
	err := WriteFile(path, func(w io.Writer) error {
		io.WriteString(w, "half")
		return boom
	})
	if !errors.Is(err, boom) {
		t.Fatalf("error %v does not wrap the writer's error", err)
	}
	got, _ := os.ReadFile(path)
	if string(got) != "first" {
		t.Errorf("after a failed write the file holds %q, want the old %q", got, "first")
	}
	if err := WriteFile(path, write("second")); err != nil {
		t.Fatal(err)
	}
	got, _ = os.ReadFile(path)
	if string(got) != "second" {
		t.Errorf("file holds %q, want %q", got, "second")
	}
	entries, _ := os.ReadDir(filepath.Dir(path))
	if len(entries) != 1 {
		var names []string
		for _, e := range entries {
			names = append(names, e.Name())
		}
		t.Errorf("folder holds %v, want only the output (no temporary files)", names)
	}
}

func TestWriteFileErrorsNameThePath(t *testing.T) {
	dir := t.TempDir()
	for _, path := range []string{
		filepath.Join(dir, "no such folder", "x.png"), // folder missing
		dir, // a folder, not a file
	} {
		err := WriteFile(path, func(io.Writer) error { return nil })
		if err == nil {
			t.Errorf("WriteFile(%q): no error", path)
			continue
		}
		if !IsInput(err) {
			t.Errorf("WriteFile(%q): %v is not an input error", path, err)
		}
		if want := filepath.Base(path); !strings.Contains(err.Error(), want) {
			t.Errorf("WriteFile(%q): %q does not name %q", path, err, want)
		}
	}
}

// SavePNG's file decodes to the same pixels (PNG is lossless: PNG
// specification, ISO/IEC 15948).
func TestSavePNGRoundTrip(t *testing.T) {
	img := image.NewNRGBA(image.Rect(0, 0, 2, 2))
	img.Set(0, 0, color.NRGBA{255, 0, 0, 255})
	img.Set(1, 0, color.NRGBA{0, 255, 0, 255})
	img.Set(0, 1, color.NRGBA{0, 0, 255, 255})
	img.Set(1, 1, color.NRGBA{10, 20, 30, 255})
	path := filepath.Join(t.TempDir(), "tiny.png")
	if err := SavePNG(path, img); err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	got, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	for y := 0; y < 2; y++ {
		for x := 0; x < 2; x++ {
			if color.NRGBAModel.Convert(got.At(x, y)) != img.At(x, y) {
				t.Errorf("pixel (%d,%d) = %v, want %v", x, y, got.At(x, y), img.At(x, y))
			}
		}
	}
}

// Enlarge by 3 turns each pixel into a 3×3 block (nearest neighbour, by hand).
func TestEnlarge(t *testing.T) {
	img := image.NewNRGBA(image.Rect(5, 7, 7, 8)) // non-zero origin, 2×1
	img.Set(5, 7, color.NRGBA{1, 2, 3, 255})
	img.Set(6, 7, color.NRGBA{4, 5, 6, 255})
	out := Enlarge(img, 3)
	if out.Bounds() != image.Rect(0, 0, 6, 3) {
		t.Fatalf("bounds %v, want (0,0)-(6,3)", out.Bounds())
	}
	for y := 0; y < 3; y++ {
		for x := 0; x < 6; x++ {
			want := color.NRGBA{1, 2, 3, 255}
			if x >= 3 {
				want = color.NRGBA{4, 5, 6, 255}
			}
			if out.NRGBAAt(x, y) != want {
				t.Errorf("(%d,%d) = %v, want %v", x, y, out.NRGBAAt(x, y), want)
			}
		}
	}
}

func TestProbeFiles(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "probe ü")
	os.Mkdir(dir, 0o755)
	for _, n := range []string{"b.PNG", "a.jpg", ".hidden.png", "notes.txt"} {
		os.WriteFile(filepath.Join(dir, n), []byte("x"), 0o644)
	}
	os.Mkdir(filepath.Join(dir, "sub.png"), 0o755)
	files, err := ProbeFiles(dir)
	if err != nil {
		t.Fatal(err)
	}
	want := []string{filepath.Join(dir, "a.jpg"), filepath.Join(dir, "b.PNG")}
	if len(files) != len(want) || files[0] != want[0] || files[1] != want[1] {
		t.Errorf("ProbeFiles = %q, want %q", files, want)
	}
	for _, bad := range []string{filepath.Join(dir, "missing"), filepath.Join(dir, "notes.txt"), t.TempDir()} {
		_, err := ProbeFiles(bad)
		if err == nil || !IsInput(err) || !strings.Contains(err.Error(), filepath.Base(bad)) {
			t.Errorf("ProbeFiles(%q) = %v, want an input error naming it", bad, err)
		}
	}
}
