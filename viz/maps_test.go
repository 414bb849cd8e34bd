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

func tensor(shape []int64, data ...float32) modelio.Tensor {
	return modelio.Tensor{Name: "act", Shape: shape, Data: data}
}

func TestMapGridStats(t *testing.T) {
	// Channel 0 = [[1, −2], [0, 3]]: max 3, min −2, mean 2/4 = 0.5, two of
	// four positions > 0 (zero does not fire). Channel 1 all zero.
	tt := tensor([]int64{1, 2, 2, 2}, 1, -2, 0, 3, 0, 0, 0, 0)
	_, st, err := MapGrid(tt, "nchw", GridOptions{})
	if err != nil {
		t.Fatal(err)
	}
	want := []ChannelStats{{Channel: 0, Min: -2, Max: 3, Mean: 0.5, Fires: 0.5}, {Channel: 1}}
	for i, w := range want {
		g := st[i]
		if g.Channel != w.Channel || g.Min != w.Min || g.Max != w.Max || g.Mean != w.Mean || g.Fires != w.Fires {
			t.Errorf("channel %d stats %+v, want %+v", i, g, w)
		}
	}
	if lo, hi := MapRange(st); lo != -2 || hi != 3 {
		t.Errorf("MapRange = %v, %v, want -2, 3", lo, hi)
	}
}

// cellColour returns the colour of activation cell (y, x) of a MapGrid tile,
// checking that the zoom×zoom square is uniform.
func cellColour(t *testing.T, img *image.NRGBA, r image.Rectangle, zoom, y, x int) color.NRGBA {
	t.Helper()
	c := img.NRGBAAt(r.Min.X+x*zoom, r.Min.Y+y*zoom)
	for py := range zoom {
		for px := range zoom {
			if d := img.NRGBAAt(r.Min.X+x*zoom+px, r.Min.Y+y*zoom+py); d != c {
				t.Fatalf("cell (%d,%d) is not uniform: %v and %v", y, x, c, d)
			}
		}
	}
	return c
}

func TestMapGridScales(t *testing.T) {
	// Non-negative maps use Sequential(v / hi). Channel 0 = [0, 2],
	// channel 1 = [0, 1]. Shared: hi = 2, so channel 1's 1 is
	// Sequential(0.5); per tile: hi = 1, Sequential(1).
	tt := tensor([]int64{1, 2, 1, 2}, 0, 2, 0, 1)
	for _, c := range []struct {
		per  bool
		want color.NRGBA
	}{{false, Sequential(0.5)}, {true, Sequential(1)}} {
		img, st, err := MapGrid(tt, "nchw", GridOptions{Zoom: 3, PerTile: c.per})
		if err != nil {
			t.Fatal(err)
		}
		if got := cellColour(t, img, st[1].Rect, 3, 0, 1); got != c.want {
			t.Errorf("per tile %v: %v, want %v", c.per, got, c.want)
		}
		if got := cellColour(t, img, st[0].Rect, 3, 0, 1); got != Sequential(1) {
			t.Errorf("per tile %v: channel 0 max drawn %v, want Sequential(1)", c.per, got)
		}
		if got := cellColour(t, img, st[1].Rect, 3, 0, 0); got != Sequential(0) {
			t.Errorf("per tile %v: zero drawn %v, want Sequential(0)", c.per, got)
		}
	}
	// Signed maps use Diverging(v / max(|lo|, hi)): [−1, 4] → −0.25, 1.
	img, st, err := MapGrid(tensor([]int64{1, 1, 1, 2}, -1, 4), "nchw", GridOptions{Zoom: 2})
	if err != nil {
		t.Fatal(err)
	}
	if a, b := cellColour(t, img, st[0].Rect, 2, 0, 0), cellColour(t, img, st[0].Rect, 2, 0, 1); a != Diverging(-0.25) || b != Diverging(1) {
		t.Errorf("signed map drawn %v, %v, want Diverging(-0.25), Diverging(1)", a, b)
	}
}

func TestMapGridLayoutsAgree(t *testing.T) {
	// The same map stored NCHW and NHWC (transposed by hand) draws the same.
	// NCHW [1][2][2][3]: c0 = 0..5, c1 = 10..15.
	nchw := tensor([]int64{1, 2, 2, 3}, 0, 1, 2, 3, 4, 5, 10, 11, 12, 13, 14, 15)
	nhwc := tensor([]int64{1, 2, 3, 2}, 0, 10, 1, 11, 2, 12, 3, 13, 4, 14, 5, 15)
	a, sa, err := MapGrid(nchw, "nchw", GridOptions{Labels: true})
	if err != nil {
		t.Fatal(err)
	}
	b, sb, err := MapGrid(nhwc, "NHWC", GridOptions{Labels: true})
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(a.Pix, b.Pix) || !slices.Equal(sa, sb) {
		t.Error("NCHW and NHWC pictures or stats differ")
	}
	// By hand: mean of 10..15 is 12.5, max 15.
	if sa[1].Mean != 12.5 || sa[1].Max != 15 {
		t.Errorf("channel 1 stats %+v, want mean 12.5, max 15", sa[1])
	}
}

func TestMapGridBatchAndChannels(t *testing.T) {
	// Batch of 2, one channel 1×1: image 0 holds 1, image 1 holds 5.
	tt := tensor([]int64{2, 1, 1, 1}, 1, 5)
	_, st, err := MapGrid(tt, "nchw", GridOptions{Batch: 1})
	if err != nil {
		t.Fatal(err)
	}
	if st[0].Max != 5 {
		t.Errorf("batch 1 max %v, want 5", st[0].Max)
	}
	// Channel selection and order.
	tt = tensor([]int64{1, 3, 1, 1}, 7, 8, 9)
	_, st, err = MapGrid(tt, "nchw", GridOptions{Channels: []int{2, 0}})
	if err != nil {
		t.Fatal(err)
	}
	if len(st) != 2 || st[0].Channel != 2 || st[0].Max != 9 || st[1].Channel != 0 || st[1].Max != 7 {
		t.Errorf("selected stats %+v", st)
	}
	// Rank 2 (after pooling) is n maps of 1×1 per feature.
	_, st, err = MapGrid(tensor([]int64{1, 3}, -1, 0, 2), "nchw", GridOptions{})
	if err != nil || len(st) != 3 || st[2].Max != 2 {
		t.Errorf("rank 2: %v %+v", err, st)
	}
}

func TestMapGridErrors(t *testing.T) {
	for _, c := range []struct {
		name   string
		t      modelio.Tensor
		layout modelio.Layout
		o      GridOptions
		want   string
	}{
		{"layout", tensor([]int64{1, 1, 1, 1}, 0), "chw", GridOptions{}, "neither"},
		{"length", tensor([]int64{1, 2, 2, 2}, 0, 1), "nchw", GridOptions{}, "does not match its 2 values"},
		{"rank", tensor([]int64{4}, 0, 1, 2, 3), "nchw", GridOptions{}, "not an activation map"},
		{"zero dim", tensor([]int64{1, 0, 2, 2}), "nchw", GridOptions{}, "outside 1..2^31"},
		{"batch", tensor([]int64{1, 1, 1, 1}, 0), "nchw", GridOptions{Batch: 1}, "image 1 is outside the batch of 1"},
		{"channel", tensor([]int64{1, 1, 1, 1}, 0), "nchw", GridOptions{Channels: []int{3}}, "channel 3 is outside 0..0"},
		{"no channel", tensor([]int64{1, 1, 1, 1}, 0), "nchw", GridOptions{Channels: []int{}}, "no channel"},
		{"nan", tensor([]int64{1, 1, 1, 2}, 0, float32(math.Inf(1))), "nchw", GridOptions{}, "non-finite"},
		{"huge", tensor([]int64{1, 1, 1, 1}, 0), "nchw", GridOptions{Zoom: 1 << 13}, "exceeds the limit"},
		{"overflow", tensor([]int64{1 << 20, 1 << 20, 1 << 20, 1 << 20}, 0), "nchw", GridOptions{}, "does not match"},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, _, err := MapGrid(c.t, c.layout, c.o)
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("%s: error %v, want one containing %q", c.name, err, c.want)
			}
		})
	}
}

func TestLayerGeometry(t *testing.T) {
	// Centre of output cell i = Jump·i + (RF−1)/2 − P, P the padding before
	// the start carried to the input (Araujo, Norris & Sim, Distill 2019).
	// Without the layer's centre the offset is estimated as
	// (in − 1 − Jump·(out − 1))/2:
	//  - 3×3 stride-2 convolution without padding on 7 pixels: cells cover
	//    pixels 2i..2i+2, centre 2i+1 (by the definition of convolution);
	//    estimate (7 − 1 − 2·2)/2 = 1. Exact.
	//  - 7×7 stride-2 pad-3 convolution on 224 pixels, 112 cells: true
	//    centre 2i + 3 − 3 = 2i; estimate (223 − 222)/2 = 0.5 (documented).
	//  - no Jump: 4 cells on 8 pixels, jump 2, offset (7 − 6)/2 = 0.5, the
	//    centre of each 2-pixel block.
	// With the layer's centre (HasCenter) the geometry is the layer's:
	//  - the same 7×7 stride-2 pad-3 convolution: cell 0 covers pixels
	//    −3..3, centre 0 (by the definition of convolution), not 0.5.
	//  - a 7×3 kernel with strides 2×1 and pads 3 and 0: rows −3..3
	//    (centre 0), columns 0..2 (centre 1), jumps 2 and 1.
	for _, c := range []struct {
		l                  modelio.Layer
		in, out            int
		jy, jx, offY, offX float64
		exact              bool
	}{
		{modelio.Layer{RF: 3, Jump: 2}, 7, 3, 2, 2, 1, 1, false},
		{modelio.Layer{RF: 7, Jump: 2}, 224, 112, 2, 2, 0.5, 0.5, false},
		{modelio.Layer{}, 8, 4, 2, 2, 0.5, 0.5, false},
		{modelio.Layer{RF: 7, Jump: 2, RFY: 7, RFX: 7, JumpY: 2, JumpX: 2, HasCenter: true}, 224, 112, 2, 2, 0, 0, true},
		{modelio.Layer{RF: 7, Jump: 2, RFY: 7, RFX: 3, JumpY: 2, JumpX: 1, CenterX: 1, HasCenter: true}, 224, 112, 2, 1, 0, 1, true},
	} {
		g := LayerGeometry(c.l, c.in, c.in, c.out, c.out)
		want := Geometry{JumpY: c.jy, JumpX: c.jx, OffsetY: c.offY, OffsetX: c.offX, Exact: c.exact}
		if g != want {
			t.Errorf("%+v in %d out %d: %+v, want %+v", c.l, c.in, c.out, g, want)
		}
	}
}

func TestMapOverlayAlignment(t *testing.T) {
	// Geometry of a 3×3 stride-2 convolution without padding on a 7×7 image:
	// the centre of cell (i, j) is pixel (2j+1, 2i+1). One cell, (row 1,
	// col 2), is 1, the others 0, so by bilinear interpolation between
	// centres (by hand):
	//   pixel (x=5, y=3): the cell's centre, value 1
	//   pixel (x=4, y=3): halfway to cell (1,1), value 0.5
	//   pixel (x=5, y=2): halfway to cell (0,2), value 0.5
	//   pixel (x=4, y=2): 0.25 (¼ of the four corners)
	//   pixel (x=6, y=3): beyond the last centre, edge value 1
	//   pixel (x=2, y=3): between cells (1,0) and (1,1), value 0
	// The channel's range is [0, 1], so the colour is Sequential(v) with
	// weight smoothstep(min(1, 2v)); at opacity 1 a pixel is that colour
	// (from the map's definition, refSequential) composited over the grey
	// image with that weight (Porter–Duff over, refOver), within one 8-bit
	// step (the map's table holds v in steps of 1/255).
	data := make([]float32, 9)
	data[1*3+2] = 1
	tt := tensor([]int64{1, 1, 3, 3}, data...)
	base := image.NewNRGBA(image.Rect(0, 0, 7, 7))
	fill(base, base.Rect, color.NRGBA{90, 90, 90, 255})
	out, err := MapOverlay(base, tt, "nchw", 0, modelio.Layer{RF: 3, Jump: 2}, 1)
	if err != nil {
		t.Fatal(err)
	}
	grey := color.NRGBA{90, 90, 90, 255}
	smooth := func(t float64) float64 { return t * t * (3 - 2*t) } // smoothstep, by its definition
	for _, c := range []struct {
		x, y int
		v    float64
	}{{5, 3, 1}, {4, 3, 0.5}, {5, 2, 0.5}, {4, 2, 0.25}, {6, 3, 1}, {2, 3, 0}} {
		want := refOver(grey, refSequential(c.v), smooth(math.Min(1, 2*c.v)))
		if got := out.NRGBAAt(c.x, c.y); !nearColour(got, want, 1) {
			t.Errorf("pixel (%d,%d): %v, want %v (value %v)", c.x, c.y, got, want, c.v)
		}
	}
	if got := out.NRGBAAt(2, 3); got != grey {
		t.Errorf("silent pixel %v, want the grey image %v", got, grey)
	}
	if base.NRGBAAt(5, 3) != grey {
		t.Error("MapOverlay changed its input")
	}
}

func TestMapOverlayExactOffset(t *testing.T) {
	// A 3×3 stride-2 pad-1 convolution on an 8×8 image gives 4×4 cells;
	// cell i covers pixels 2i−1..2i+1, centre 2i (by the definition of
	// convolution; modelio: u = −1, RF 3, centre −1 + 1 = 0). The even-
	// padding estimate would put the centres at 2i + 0.5 ((8 − 1 − 2·3)/2).
	// One cell, (row 1, col 2), is 1, the others 0; by bilinear
	// interpolation between the exact centres (by hand):
	//   pixel (x=4, y=2): the cell's centre, value 1
	//   pixel (x=3, y=2), (5, 2), (4, 1), (4, 3): halfway to a neighbour, 0.5
	//   pixel (x=5, y=3): 0.25 (¼ of the four corners)
	//   pixel (x=1, y=2): between cells (1,0) and (1,1), value 0
	// With the estimate the centres are at 0.5, 2.5, 4.5, 6.5: pixel (4, 2)
	// is 3/4 of the way from row 0 to row 1 and from column 1 to column 2,
	// value 0.75·0.75 = 0.5625 instead of 1.
	data := make([]float32, 16)
	data[1*4+2] = 1
	tt := tensor([]int64{1, 1, 4, 4}, data...)
	grey := color.NRGBA{90, 90, 90, 255}
	base := image.NewNRGBA(image.Rect(0, 0, 8, 8))
	fill(base, base.Rect, grey)
	l := modelio.Layer{RF: 3, Jump: 2, RFY: 3, RFX: 3, JumpY: 2, JumpX: 2, HasCenter: true}
	out, err := MapOverlay(base, tt, "nchw", 0, l, 1)
	if err != nil {
		t.Fatal(err)
	}
	smooth := func(t float64) float64 { return t * t * (3 - 2*t) } // smoothstep, by its definition
	for _, c := range []struct {
		x, y int
		v    float64
	}{{4, 2, 1}, {3, 2, 0.5}, {5, 2, 0.5}, {4, 1, 0.5}, {4, 3, 0.5}, {5, 3, 0.25}, {1, 2, 0}} {
		want := refOver(grey, refSequential(c.v), smooth(math.Min(1, 2*c.v)))
		if got := out.NRGBAAt(c.x, c.y); !nearColour(got, want, 1) {
			t.Errorf("pixel (%d,%d): %v, want %v (value %v)", c.x, c.y, got, want, c.v)
		}
	}
	// The same map placed by the estimate differs at the cell's centre.
	est, err := MapOverlay(base, tt, "nchw", 0, modelio.Layer{RF: 3, Jump: 2}, 1)
	if err != nil {
		t.Fatal(err)
	}
	if want := refOver(grey, refSequential(0.5625), smooth(1)); !nearColour(est.NRGBAAt(4, 2), want, 1) {
		t.Errorf("estimated placement: pixel (4,2) %v, want %v (value 0.75·0.75)", est.NRGBAAt(4, 2), want)
	}

	// Per-axis geometry: a 1×3 kernel, strides 2×1, pads 0 on a 4×6 image
	// gives 2×4 cells centred at rows 0, 2 and columns 1..4. Cell (1, 0)
	// = 1: full at pixel (x=1, y=2), beyond the last row centre (y=3) and
	// before the first column centre (x=0); half at (x=1, y=1), halfway
	// between the rows; 0 at (x=2, y=2), the centre of cell (1, 1): along
	// x the cells are one pixel apart.
	tt = tensor([]int64{1, 1, 2, 4}, 0, 0, 0, 0, 1, 0, 0, 0)
	base = image.NewNRGBA(image.Rect(0, 0, 6, 4))
	fill(base, base.Rect, grey)
	l = modelio.Layer{RF: 3, Jump: 2, RFY: 1, RFX: 3, JumpY: 2, JumpX: 1, CenterY: 0, CenterX: 1, HasCenter: true}
	if out, err = MapOverlay(base, tt, "nchw", 0, l, 1); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		x, y int
		v    float64
	}{{1, 2, 1}, {1, 3, 1}, {0, 2, 1}, {2, 2, 0}, {1, 1, 0.5}, {3, 2, 0}, {1, 0, 0}} {
		want := refOver(grey, refSequential(c.v), smooth(math.Min(1, 2*c.v)))
		if got := out.NRGBAAt(c.x, c.y); !nearColour(got, want, 1) {
			t.Errorf("per axis: pixel (%d,%d): %v, want %v (value %v)", c.x, c.y, got, want, c.v)
		}
	}
}

func TestMapOverlayErrors(t *testing.T) {
	tt := tensor([]int64{1, 1, 3, 3}, 0, 0, 0, 0, 1, 0, 0, 0, 0)
	small := image.NewNRGBA(image.Rect(0, 0, 7, 7))
	big := image.NewNRGBA(image.Rect(0, 0, 640, 480))
	l := modelio.Layer{RF: 3, Jump: 2}
	for _, c := range []struct {
		name string
		base image.Image
		ch   int
		op   float64
		want string
	}{
		{"channel", small, 1, 0.5, "channel 1 is outside 0..0"},
		{"opacity", small, 0, 1.5, "opacity 1.5"},
		{"nil image", nil, 0, 0.5, "no image"},
		{"not input size", big, 0, 0.5, "pass the image at the model's input size"},
		{"empty image", image.NewNRGBA(image.Rect(0, 0, 0, 5)), 0, 0.5, "empty"},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := MapOverlay(c.base, tt, "nchw", c.ch, l, c.op)
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("%s: error %v, want one containing %q", c.name, err, c.want)
			}
		})
	}
}

// TestMapGridOneMapPerLayer: in a layer with negative values every tile
// uses the diverging map, with PerTile too, even a tile whose own values
// are all ≥ 0; and the overlay of a channel at the grid's range has its
// tile's colour where a cell's value is at full scale (opacity 1, weight 1).
// Channel 0 = [−2, 1], channel 1 = [0, 4] (one row of two cells each).
// Expected colours by the definition of each scale (common practice):
// shared range −2..4: channel 1's 4 is Diverging(4/4); per tile, channel
// 0's −2 is Diverging(−2/2) and channel 1's 4 is Diverging(4/4), never
// Sequential.
func TestMapGridOneMapPerLayer(t *testing.T) {
	tt := tensor([]int64{1, 2, 1, 2}, -2, 1, 0, 4)
	for _, per := range []bool{false, true} {
		img, st, err := MapGrid(tt, "nchw", GridOptions{Zoom: 2, PerTile: per})
		if err != nil {
			t.Fatal(err)
		}
		if got, want := cellColour(t, img, st[1].Rect, 2, 0, 1), Diverging(1); got != want {
			t.Errorf("per tile %v: channel 1's peak %v, want the diverging map's end %v", per, got, want)
		}
		if got, want := cellColour(t, img, st[1].Rect, 2, 0, 0), Diverging(0); got != want {
			t.Errorf("per tile %v: channel 1's zero %v, want the diverging map's white %v", per, got, want)
		}
		wantNeg := Diverging(-0.5) // shared: −2 / 4
		if per {
			wantNeg = Diverging(-1) // its own: −2 / 2
		}
		if got := cellColour(t, img, st[0].Rect, 2, 0, 0); got != wantNeg {
			t.Errorf("per tile %v: channel 0's −2 is %v, want %v", per, got, wantNeg)
		}
	}
	// Overlay of channel 1 at the shared range: the cell at value 4 lies at
	// x = 1 (centres 0 and 1 for jump 1); weight 1 at |v| = scale.
	base := image.NewNRGBA(image.Rect(0, 0, 2, 1))
	fill(base, base.Rect, color.NRGBA{90, 90, 90, 255})
	_, st, _ := MapGrid(tt, "nchw", GridOptions{})
	lo, hi := MapRange(st)
	for _, c := range []struct {
		lo, hi float64
		name   string
	}{{lo, hi, "shared"}} {
		ov, err := MapOverlayIn(base, tt, "nchw", 1, modelio.Layer{RF: 1, Jump: 1}, 1, c.lo, c.hi)
		if err != nil {
			t.Fatal(err)
		}
		if got, want := ov.NRGBAAt(1, 0), Diverging(1); got != want {
			t.Errorf("%s overlay at the peak %v, want its tile's colour %v", c.name, got, want)
		}
	}
	olo, ohi := OwnRange(lo, st[1])
	if !(olo < 0) || ohi != 4 {
		t.Errorf("OwnRange of a non-negative channel in a signed layer = %v, %v; want a negative lo (diverging map) and hi 4", olo, ohi)
	}
}
