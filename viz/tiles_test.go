package viz

import (
	"image"
	"image/color"
	"math"
	"slices"
	"strings"
	"testing"

	"fovea/modelio"
)

var grey128 = color.NRGBA{128, 128, 128, 255}

// kernels builds an M×C×KH×KW kernel set from its weights.
func kernels(m, c, kh, kw int, w ...float32) *modelio.Kernels {
	if len(w) == 0 {
		w = make([]float32, m*c*kh*kw)
	}
	return &modelio.Kernels{Node: "conv", M: m, C: c, KH: kh, KW: kw, Group: 1, W: w}
}

// tilePixels returns the colour of each weight square of a tile, checking
// that every pixel of a square has the same colour.
func tilePixels(t *testing.T, img *image.NRGBA, r image.Rectangle, kh, kw int) [][]color.NRGBA {
	t.Helper()
	cell := r.Dx() / kw
	if r.Dx() != cell*kw || r.Dy() != cell*kh {
		t.Fatalf("tile %v is not %d×%d squares of %d pixels", r, kw, kh, cell)
	}
	out := make([][]color.NRGBA, kh)
	for y := range kh {
		out[y] = make([]color.NRGBA, kw)
		for x := range kw {
			first := img.NRGBAAt(r.Min.X+x*cell, r.Min.Y+y*cell)
			for py := range cell {
				for px := range cell {
					if c := img.NRGBAAt(r.Min.X+x*cell+px, r.Min.Y+y*cell+py); c != first {
						t.Fatalf("weight (%d,%d): pixel (%d,%d) is %v, the square's first is %v", y, x, px, py, c, first)
					}
				}
			}
			out[y][x] = first
		}
	}
	return out
}

func TestTilesZeroKernelIsMidGrey(t *testing.T) {
	// Issue 6: an all-zero kernel renders mid-grey (zero maps to 128).
	k := kernels(1, 3, 3, 3)
	img, info, err := Tiles(k, TileOptions{Slice: -1, Cell: 4})
	if err != nil {
		t.Fatal(err)
	}
	r := info[0].Rect
	for y := r.Min.Y; y < r.Max.Y; y++ {
		for x := r.Min.X; x < r.Max.X; x++ {
			if c := img.NRGBAAt(x, y); c != grey128 {
				t.Fatalf("pixel (%d,%d) = %v, want %v", x, y, c, grey128)
			}
		}
	}
	if !slices.Equal(info[0].Flags, []modelio.Flag{modelio.FlagZeroKernel}) {
		t.Errorf("flags %v, want [zero_kernel]", info[0].Flags)
	}
}

func TestTilesSingleRedWeight(t *testing.T) {
	// Issue 6: a kernel whose only non-zero weight is positive, in the red
	// channel at (row 1, col 2), renders a red square at that place and grey
	// elsewhere, pixel by pixel. Red = v/maxabs·127 + 128 = 255 there, G and
	// B stay 128.
	for _, cell := range []int{1, 3, 8} {
		k := kernels(1, 3, 3, 4)
		k.W[(0*3+1)*4+2] = 0.7 // channel 0 (red), row 1, col 2
		img, info, err := Tiles(k, TileOptions{Slice: -1, Cell: cell})
		if err != nil {
			t.Fatal(err)
		}
		r := info[0].Rect
		if r.Dx() != 4*cell || r.Dy() != 3*cell {
			t.Fatalf("cell %d: tile %v, want %d×%d", cell, r, 4*cell, 3*cell)
		}
		red := color.NRGBA{255, 128, 128, 255}
		for y := r.Min.Y; y < r.Max.Y; y++ {
			for x := r.Min.X; x < r.Max.X; x++ {
				want := grey128
				if (y-r.Min.Y)/cell == 1 && (x-r.Min.X)/cell == 2 {
					want = red
				}
				if c := img.NRGBAAt(x, y); c != want {
					t.Fatalf("cell %d: pixel (%d,%d) = %v, want %v", cell, x-r.Min.X, y-r.Min.Y, c, want)
				}
			}
		}
	}
}

func TestTilesSymmetricScaling(t *testing.T) {
	// byte = round(v/s·127 + 128) with s the largest |weight| (common
	// practice for signed weights; the formula of the issue). Filter 0 has
	// s = 1; filter 1 has weights 0.5, −0.5, 0.25, 0.
	// Shared scale s = 1: 0.5 → 191.5 → 192 (round half away from zero),
	// −0.5 → 64.5 → 65, 0.25 → 159.75 → 160, 0 → 128.
	// Per filter s = 0.5: 0.5 → 255, −0.5 → 1, 0.25 → 191.5 → 192.
	k := kernels(2, 3, 1, 4,
		1, 0, 0, 0 /* f0 R */, 0, 0, 0, 0 /* G */, 0, 0, 0, 0, /* B */
		0.5, -0.5, 0.25, 0 /* f1 R */, 0, 0, 0, 0, 0, 0, 0, 0)
	for _, c := range []struct {
		per  bool
		want [4]uint8
	}{
		{false, [4]uint8{192, 65, 160, 128}},
		{true, [4]uint8{255, 1, 192, 128}},
	} {
		img, info, err := Tiles(k, TileOptions{Slice: -1, Cell: 2, PerFilter: c.per})
		if err != nil {
			t.Fatal(err)
		}
		px := tilePixels(t, img, info[1].Rect, 1, 4)
		for x := range 4 {
			if got := px[0][x]; got != (color.NRGBA{c.want[x], 128, 128, 255}) {
				t.Errorf("per filter %v: weight %d = %v, want R %d", c.per, x, got, c.want[x])
			}
		}
	}
}

func TestTilesBGR(t *testing.T) {
	// With BGR, input channel 0 is blue: a positive weight there draws blue.
	k := kernels(1, 3, 1, 1, 1, 0, 0)
	img, info, err := Tiles(k, TileOptions{Slice: -1, Cell: 2, BGR: true})
	if err != nil {
		t.Fatal(err)
	}
	if c := img.NRGBAAt(info[0].Rect.Min.X, info[0].Rect.Min.Y); c != (color.NRGBA{128, 128, 255, 255}) {
		t.Errorf("BGR weight drawn %v, want blue (128,128,255)", c)
	}
}

func TestTilesSliceDiverging(t *testing.T) {
	// A 1-channel kernel (and a slice of a deeper one) uses Diverging(v/s).
	k := kernels(1, 1, 2, 2, 1, -1, 0, 0.5)
	img, info, err := Tiles(k, TileOptions{Slice: -1, Cell: 3})
	if err != nil {
		t.Fatal(err)
	}
	px := tilePixels(t, img, info[0].Rect, 2, 2)
	want := [][]color.NRGBA{{Diverging(1), Diverging(-1)}, {Diverging(0), Diverging(0.5)}}
	for y := range 2 {
		for x := range 2 {
			if px[y][x] != want[y][x] {
				t.Errorf("(%d,%d) = %v, want %v", y, x, px[y][x], want[y][x])
			}
		}
	}
	// Slice 1 of a 2-channel kernel: only channel 1's weights count, and
	// the scale is that slice's largest |weight| (4, not channel 0's 100).
	k2 := kernels(1, 2, 1, 2, 100, 100, 4, -2)
	img, info, err = Tiles(k2, TileOptions{Slice: 1, Cell: 2})
	if err != nil {
		t.Fatal(err)
	}
	px = tilePixels(t, img, info[0].Rect, 1, 2)
	if px[0][0] != Diverging(1) || px[0][1] != Diverging(-0.5) {
		t.Errorf("slice 1 = %v, want Diverging(1), Diverging(-0.5)", px[0])
	}
}

func TestTilesSortByNorm(t *testing.T) {
	// Norms by hand (3-4-5 and 5-12-13 triangles): f0 = 5, f1 = 1, f2 = 13.
	// Sorted by decreasing norm: 2, 0, 1; unsorted: 0, 1, 2.
	k := kernels(3, 1, 1, 2, 3, 4, 1, 0, 12, 5)
	for _, c := range []struct {
		sort bool
		want []int
	}{{false, []int{0, 1, 2}}, {true, []int{2, 0, 1}}} {
		_, info, err := Tiles(k, TileOptions{Slice: -1, SortByNorm: c.sort, Columns: 3})
		if err != nil {
			t.Fatal(err)
		}
		var got []int
		for i, ti := range info {
			got = append(got, ti.Index)
			if i > 0 && ti.Rect.Min.X <= info[i-1].Rect.Min.X {
				t.Errorf("tile %d is not right of tile %d", i, i-1)
			}
		}
		if !slices.Equal(got, c.want) {
			t.Errorf("sort %v: order %v, want %v", c.sort, got, c.want)
		}
	}
	_, info, _ := Tiles(k, TileOptions{Slice: -1})
	for _, ti := range info {
		want := map[int]float64{0: 5, 1: 1, 2: 13}[ti.Index]
		if math.Abs(ti.Norm-want) > 1e-12 {
			t.Errorf("filter %d norm %v, want %v", ti.Index, ti.Norm, want)
		}
	}
}

func TestTilesFlagFrames(t *testing.T) {
	// Flagged tiles get a frame in the ring around the tile: solid
	// magenta-red for zero_kernel/dead, dashed amber for the others. Scan
	// flags passed in Flags are merged with KernelFlags; the caller's map is
	// not modified.
	k := kernels(3, 1, 2, 2, 1, 0, 0, 1, 0, 0, 0, 0, 0, 1, 1, 0)
	scan := map[int][]modelio.Flag{2: {modelio.FlagRare}}
	img, info, err := Tiles(k, TileOptions{Slice: -1, Cell: 4, Flags: scan, Columns: 3})
	if err != nil {
		t.Fatal(err)
	}
	if len(scan) != 1 || !slices.Equal(scan[2], []modelio.Flag{modelio.FlagRare}) {
		t.Errorf("caller's flags changed: %v", scan)
	}
	corner := func(r image.Rectangle) color.NRGBA { return img.NRGBAAt(r.Min.X-frameRing, r.Min.Y-frameRing) }
	if c := corner(info[0].Rect); c != Dark {
		t.Errorf("unflagged tile has frame colour %v", c)
	}
	if c := corner(info[1].Rect); c != flagSevere || !slices.Equal(info[1].Flags, []modelio.Flag{modelio.FlagZeroKernel}) {
		t.Errorf("zero filter: frame %v flags %v", c, info[1].Flags)
	}
	if c := corner(info[2].Rect); c != flagMild || !slices.Equal(info[2].Flags, []modelio.Flag{modelio.FlagRare}) {
		t.Errorf("rare filter: frame %v flags %v", c, info[2].Flags)
	}
	// Dashed: 4 on, 3 off along the top edge.
	r := info[2].Rect.Inset(-frameRing)
	for i := range 14 {
		on := img.NRGBAAt(r.Min.X+i, r.Min.Y) == flagMild
		if on != (i%7 < 4) {
			t.Errorf("dash pixel %d: on=%v", i, on)
		}
	}
}

func TestTilesLabels(t *testing.T) {
	// Labels add a line under every tile; the tile's weights are unchanged.
	k := kernels(2, 1, 2, 2, 1, 0, 0, 0, 0, 0, 0, 0)
	plain, pi, err := Tiles(k, TileOptions{Slice: -1, Cell: 5})
	if err != nil {
		t.Fatal(err)
	}
	lab, li, err := Tiles(k, TileOptions{Slice: -1, Cell: 5, Labels: true})
	if err != nil {
		t.Fatal(err)
	}
	if lab.Rect.Dy() <= plain.Rect.Dy() {
		t.Errorf("labelled picture %v is not taller than %v", lab.Rect, plain.Rect)
	}
	a := tilePixels(t, plain, pi[0].Rect, 2, 2)
	b := tilePixels(t, lab, li[0].Rect, 2, 2)
	if !slices.Equal(a[0], b[0]) || !slices.Equal(a[1], b[1]) {
		t.Error("labels changed the tile")
	}
	if got := tileLabel(7, 0.4567, []modelio.Flag{modelio.FlagDuplicate, modelio.FlagDead, modelio.FlagDuplicate}); got != "#7 |w|=0.457 XD" {
		t.Errorf("label %q, want %q", got, "#7 |w|=0.457 XD")
	}
}

func TestTilesErrors(t *testing.T) {
	for _, c := range []struct {
		name string
		k    *modelio.Kernels
		o    TileOptions
		want string
	}{
		{"nil", nil, TileOptions{}, "no kernels"},
		{"short data", kernels(2, 3, 3, 3, 1, 2, 3), TileOptions{Slice: -1}, "needs 54 weights, have 3"},
		{"zero dim", &modelio.Kernels{M: 0, C: 3, KH: 3, KW: 3}, TileOptions{}, "non-positive"},
		{"rgb needs 3", kernels(2, 4, 3, 3), TileOptions{Slice: -1}, "choose a slice 0..3"},
		{"slice range", kernels(2, 4, 3, 3), TileOptions{Slice: 4}, "slice 4 is outside 0..3"},
		{"nan", kernels(2, 1, 1, 1, 1, float32(math.NaN())), TileOptions{}, "filter 1 has a non-finite weight"},
		{"negative cell", kernels(1, 1, 1, 1, 1), TileOptions{Cell: -2}, "negative"},
		{"huge", kernels(1, 1, 3, 3, 1, 1, 1, 1, 1, 1, 1, 1, 1), TileOptions{Cell: 1 << 14}, "exceeds the limit"},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, _, err := Tiles(c.k, c.o)
			if err == nil || !strings.Contains(err.Error(), c.want) || !strings.HasPrefix(err.Error(), "viz: ") {
				t.Errorf("%s: error %v, want one containing %q", c.name, err, c.want)
			}
		})
	}
}

func TestTilesDoNotMutateInput(t *testing.T) {
	k := kernels(2, 3, 2, 2)
	for i := range k.W {
		k.W[i] = float32(i%7) - 3
	}
	before := slices.Clone(k.W)
	if _, _, err := Tiles(k, TileOptions{Slice: -1, SortByNorm: true, PerFilter: true, Labels: true}); err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(before, k.W) {
		t.Error("Tiles changed the weights")
	}
}
