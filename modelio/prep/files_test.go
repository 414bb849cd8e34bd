package prep

import (
	"fmt"
	"os"
	"path/filepath"
	"testing"

	"fovea/modelio/atomicfile"
	"fovea/modelio/testkit"
)

// imagesDir holds the stored test images (see testdata/README.md, section "images").
var imagesDir = filepath.Join("..", "..", "testdata", "images")

// update (testkit.Update, -update) rewrites testdata/images from the generators.
var update = testkit.Update

// exifFiles are stored JPEGs with EXIF orientations 3, 6 and 8 (little-endian "II" for 6,
// big-endian "MM" for 3 and 8) of the 32×16 quadrant picture.
var exifFiles = []struct {
	name string
	o    int
	be   bool
}{{"exif-3.jpg", 3, true}, {"exif-6.jpg", 6, false}, {"exif-8.jpg", 8, true}}

// TestStoredImages checks every file in testdata/images against the case it was made
// from, so the stored files stay what the README says. With -update it first rewrites
// them from the generators.
func TestStoredImages(t *testing.T) {
	if *update {
		if err := os.MkdirAll(imagesDir, 0o755); err != nil {
			t.Fatal(err)
		}
		for _, tc := range hostileCases() {
			t.Run(tc.name, func(t *testing.T) {
				if err := atomicfile.WriteBytes(filepath.Join(imagesDir, tc.name), tc.data(t), 0o644); err != nil {
					t.Fatal(err)
				}
			})
		}
		for _, e := range exifFiles {
			data := withExif(encJPEG(t, storedFor(visualQuadrants(), e.o)), uint16(e.o), e.be)
			if err := atomicfile.WriteBytes(filepath.Join(imagesDir, e.name), data, 0o644); err != nil {
				t.Fatal(err)
			}
		}
	}
	known := map[string]bool{}
	for _, tc := range hostileCases() {
		known[tc.name] = true
		t.Run(tc.name, func(t *testing.T) {
			checkHostile(t, tc, filepath.Join(imagesDir, tc.name))
		})
	}
	upright := visualQuadrants()
	for _, e := range exifFiles {
		known[e.name] = true
		t.Run(e.name, func(t *testing.T) {
			img, err := Load(filepath.Join(imagesDir, e.name))
			if err != nil {
				t.Fatal(err)
			}
			for _, p := range [][2]int{{8, 4}, {24, 4}, {8, 12}, {24, 12}} {
				if got, want := colourAt(img, p[0], p[1]), upright.NRGBAAt(p[0], p[1]); !closeTo(got, want, 24) {
					t.Errorf("at %v: %v, want %v (orientation %d)", p, got, want, e.o)
				}
			}
		})
	}
	entries, err := os.ReadDir(imagesDir)
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range entries {
		if !known[e.Name()] {
			t.Errorf("testdata/images/%s is not checked by any case: add one or remove the file", e.Name())
		}
	}
	if len(entries) < len(known) {
		t.Errorf("testdata/images has %d entries, want %d: run go test -run TestStoredImages -update", len(entries), len(known))
	}
}

func ExampleConfig_String() {
	c := Default()
	c.Set("preset", "imagenet")
	c.Set("resize", "crop")
	fmt.Println(c)
	// Output: 224x224 RGB, crop, range 0-1, mean 0.485,0.456,0.406, std 0.229,0.224,0.225, NCHW [imagenet]
}
