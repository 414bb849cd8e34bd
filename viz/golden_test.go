package viz

import (
	"image"
	"image/color"
	"math"
	"testing"

	"fovea/modelio"
	"fovea/modelio/testkit"
)

// goldens are this package's golden pictures, compared with no tolerance:
// pictures are deterministic by contract, so any difference is a change of
// behaviour. Rewrite them with
//
//	go test ./viz -run Golden -update
//
// and look at every rewritten picture before committing it.
var goldens = testkit.Goldens{Dir: "../testdata/golden", Failed: "../testdata/failed", Tol: 0,
	Rewrite: "go test ./viz -run Golden -update"}

// checkGolden compares img with testdata/golden/name (goldens.Check). On a
// mismatch the picture drawn is written to testdata/failed/name.
//
// Source: the golden pictures were drawn by this package and checked by eye
// (testdata/README.md), so they pin behaviour against regressions; they are
// not an outside reference. The outside checks of the same drawing (colour
// maps measured with the CIE formulas, tile and map colours and geometry by
// hand) are in colormap_test.go, tiles_test.go and maps_test.go.
func checkGolden(t *testing.T, name string, img *image.NRGBA) {
	t.Helper()
	goldens.Check(t, name, img)
}

// The inputs of the goldens are literal and described in testdata/README.md.

// goldenKernels: six 3×3 RGB filters. 0: vertical edge, bright right
// (−1, 0, +1 per column in all channels); 1: red centre on a cyan surround
// (R +1 at the centre, G and B −0.25 around); 2: horizontal edge in green
// only (rows −0.5, 0, +0.5); 3: all zero; 4: filter 0 with the top-left
// weight of R raised by 0.1 (a near-duplicate of 0); 5: a diagonal in blue
// (B +0.5 on the main diagonal, 0 elsewhere).
func goldenKernels() *modelio.Kernels {
	k := kernels(6, 3, 3, 3)
	set := func(m, c, y, x int, v float32) { k.W[((m*3+c)*3+y)*3+x] = v }
	for c := range 3 {
		for y := range 3 {
			for x := range 3 {
				set(0, c, y, x, float32(x-1))
				set(4, c, y, x, float32(x-1))
				set(2, 1, y, x, 0.5*float32(y-1))
				if y == 1 && x == 1 {
					if c == 0 {
						set(1, c, y, x, 1)
					}
				} else if c > 0 {
					set(1, c, y, x, -0.25)
				}
			}
		}
		set(5, 2, c, c, 0.5)
	}
	set(4, 0, 0, 0, -0.9)
	return k
}

func TestGoldenTiles(t *testing.T) {
	k := goldenKernels()
	img, _, err := Tiles(k, TileOptions{Slice: -1, Cell: 6, Labels: true, Columns: 3, Flags: map[int][]modelio.Flag{5: {modelio.FlagRare}}})
	if err != nil {
		t.Fatal(err)
	}
	checkGolden(t, "tiles_rgb.png", img)
	img, _, err = Tiles(k, TileOptions{Slice: 1, Cell: 6, Labels: true, SortByNorm: true, Background: Light})
	if err != nil {
		t.Fatal(err)
	}
	checkGolden(t, "tiles_slice_light.png", img)
}

// goldenMaps: one image, 4 channels of 5×5 (NCHW). Channel c at (y, x) is
// max(0, (c+1)·sin(0.9·x + c)·cos(0.7·y)), channel 3 is all zero (dead).
func goldenMaps() modelio.Tensor {
	d := make([]float32, 4*5*5)
	for c := range 3 {
		for y := range 5 {
			for x := range 5 {
				v := float64(c+1) * math.Sin(0.9*float64(x)+float64(c)) * math.Cos(0.7*float64(y))
				d[(c*5+y)*5+x] = float32(math.Max(0, v))
			}
		}
	}
	return modelio.Tensor{Name: "relu1", Shape: []int64{1, 4, 5, 5}, Data: d}
}

// goldenBase: a 40×40 picture: a horizontal blue-to-red gradient with a
// yellow disc of radius 9 centred at (24, 14) and a dark bar x 6..13,
// y 24..35.
func goldenBase() *image.NRGBA {
	img := image.NewNRGBA(image.Rect(0, 0, 40, 40))
	for y := range 40 {
		for x := range 40 {
			c := color.NRGBA{uint8(40 + 5*x), 70, uint8(220 - 5*x), 255}
			if dx, dy := x-24, y-14; dx*dx+dy*dy <= 81 {
				c = color.NRGBA{230, 200, 60, 255}
			}
			if x >= 6 && x < 14 && y >= 24 && y < 36 {
				c = color.NRGBA{30, 30, 40, 255}
			}
			img.SetNRGBA(x, y, c)
		}
	}
	return img
}

func TestGoldenMaps(t *testing.T) {
	img, _, err := MapGrid(goldenMaps(), "nchw", GridOptions{Zoom: 6, Labels: true})
	if err != nil {
		t.Fatal(err)
	}
	checkGolden(t, "mapgrid.png", img)
	img, _, err = MapGrid(goldenMaps(), "nchw", GridOptions{Zoom: 6, PerTile: true, Columns: 4})
	if err != nil {
		t.Fatal(err)
	}
	checkGolden(t, "mapgrid_pertile.png", img)
	// Channel 1 over the 40×40 picture as the output of a layer with jump 8
	// and receptive field 12 (5 cells: offset (39 − 32)/2 = 3.5).
	img, err = MapOverlay(goldenBase(), goldenMaps(), "nchw", 1, modelio.Layer{RF: 12, Jump: 8}, 0.8)
	if err != nil {
		t.Fatal(err)
	}
	checkGolden(t, "mapoverlay.png", img)
}

// goldenScores: occlusion-style scores of 16-pixel patches with stride 8 on
// the 40×40 picture (positions 0, 8, 16, 24; the last clamped to 24): a
// positive peak of 0.4 at row 1, column 2 and a negative −0.2 at row 3,
// column 0, zero elsewhere.
func goldenScores() ([][]float64, []int) {
	g := make([][]float64, 4)
	for i := range g {
		g[i] = make([]float64, 4)
	}
	g[1][2], g[3][0] = 0.4, -0.2
	return g, []int{0, 8, 16, 24}
}

func TestGoldenScores(t *testing.T) {
	g, pos := goldenScores()
	checkGolden(t, "scores.png", OverlayScores(goldenBase(), g, pos, pos, 16, 0, 0.85))
	checkGolden(t, "colorbar_diverging.png", ColorBar(260, 52, -0.4, 0.4, "drop in probability", Diverging))
	checkGolden(t, "colorbar_sequential.png", ColorBar(84, 220, 0, 2.7, "activation", Sequential))
}

func TestGoldenCompose(t *testing.T) {
	g, pos := goldenScores()
	sheet, err := Compose([]Panel{
		{goldenBase(), "input"},
		{OverlayScores(goldenBase(), g, pos, pos, 16, 0, 0.85), "scores, a longer caption that wraps"},
	}, ComposeOptions{Height: 80})
	if err != nil {
		t.Fatal(err)
	}
	checkGolden(t, "compose.png", sheet)
}
