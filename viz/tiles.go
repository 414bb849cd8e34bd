package viz

import (
	"fmt"
	"image"
	"image/color"
	"math"
	"slices"
	"sort"
	"strings"

	"fovea/modelio"
)

// TileOptions are the knobs of [Tiles]. The zero value gives a useful
// picture for a 3-channel first layer except that Slice 0 selects input
// channel 0: set Slice to -1 for the RGB rendering.
type TileOptions struct {
	// Cell is the side in pixels of the square drawn for one weight
	// (nearest-neighbour enlargement). 0 picks one so that a tile is about
	// 48 pixels wide, at least 2 per weight.
	Cell int
	// Gap is the space in pixels between tiles; 0 means 6.
	Gap int
	// PerFilter scales each filter by its own largest |weight| instead of one
	// scale shared by all filters (shared is the default: strengths compare).
	PerFilter bool
	// SortByNorm orders the tiles by decreasing L2 norm (ties by index).
	SortByNorm bool
	// Flags adds flags per filter index (from a scan: "dead", "rare",
	// "constant"); they are merged with KernelFlags of the kernels.
	Flags map[int][]modelio.Flag
	// Slice selects the input channel to draw with the Diverging map.
	// -1 draws 3-channel kernels as RGB and 1-channel kernels with the
	// Diverging map; for other channel counts -1 is an error.
	Slice int
	// BGR says that input channel 0 is blue (the model reads BGR images):
	// the RGB rendering then swaps channels 0 and 2.
	BGR bool
	// Columns is the number of tiles per row; 0 makes the grid about square.
	Columns int
	// Labels writes the filter index and L2 norm under each tile, and the
	// letters of its flags.
	Labels bool
	// Background is the colour between tiles; the zero value means [Dark].
	Background color.NRGBA
}

// TileInfo describes one tile of the picture.
type TileInfo struct {
	Index int             // filter index m in the kernels
	Norm  float64         // L2 norm of the whole filter (all input channels)
	Rect  image.Rectangle // where the weights are drawn (without frame and label)
	Flags []modelio.Flag  // merged flags, sorted
}

// flagLetter is the one-letter mark of a flag in tile labels.
var flagLetter = map[modelio.Flag]string{
	modelio.FlagZeroKernel: "Z", modelio.FlagDuplicate: "D", modelio.FlagDead: "X", modelio.FlagRare: "R", modelio.FlagConstant: "C",
}

// frameRing is the space reserved around every tile: a 1-pixel outline that
// keeps pale tiles apart from a light background, then a 2-pixel frame when
// the filter is flagged.
const frameRing = 3

// Tiles draws the kernels as a grid of tiles, one per filter, and returns the
// picture and where each filter went (in drawing order).
//
// A weight becomes a Cell×Cell square. With Slice -1 and C = 3, the three
// input channels become R, G and B with zero at mid-grey:
//
//	byte = round(v / s · 127 + 128)
//
// where s is the largest |weight| (over all filters, or over the filter when
// PerFilter), so +s is 255, −s is 1 and 0 is 128 (s = 0 draws everything at
// 128). Otherwise the selected input channel (C = 1: the only one) is drawn
// with Diverging(v / s).
//
// Flagged filters get a frame in the ring around the tile: solid magenta-red
// for zero_kernel and dead, dashed amber for duplicate, rare and constant.
// With Labels, the line under the tile reads "#index |w|=norm" (the L2 norm
// of the whole filter, all input channels, even when one is drawn) followed
// by the
// flag letters (Z zero kernel, D duplicate, X dead, R rare, C constant).
func Tiles(k *modelio.Kernels, o TileOptions) (*image.NRGBA, []TileInfo, error) {
	if err := checkKernels(k); err != nil {
		return nil, nil, err
	}
	rgb := false
	slice := o.Slice
	switch {
	case slice == -1 && k.C == 3:
		rgb = true
	case slice == -1 && k.C == 1:
		slice = 0
	case slice == -1:
		return nil, nil, fmt.Errorf("viz: kernels of %s have %d input channels: choose a slice 0..%d (RGB needs 3)", kname(k), k.C, k.C-1)
	case slice < -1 || slice >= k.C:
		return nil, nil, fmt.Errorf("viz: kernels of %s: slice %d is outside 0..%d", kname(k), slice, k.C-1)
	}
	if o.Cell < 0 || o.Gap < 0 || o.Columns < 0 {
		return nil, nil, fmt.Errorf("viz: kernels of %s: negative cell %d, gap %d or columns %d", kname(k), o.Cell, o.Gap, o.Columns)
	}
	cell := o.Cell
	if cell == 0 {
		cell = max(2, (48+max(k.KH, k.KW)-1)/max(k.KH, k.KW))
	}
	gap := o.Gap
	if gap == 0 {
		gap = 6
	}
	bg := o.Background
	if bg == (color.NRGBA{}) {
		bg = Dark
	}

	norms := k.Norms()
	flags := k.Flags()
	for m, fs := range o.Flags {
		if m >= 0 && m < k.M {
			flags[m] = append(flags[m], fs...)
		}
	}
	order := make([]int, k.M)
	for i := range order {
		order[i] = i
	}
	if o.SortByNorm {
		sort.SliceStable(order, func(a, b int) bool { return norms[order[a]] > norms[order[b]] })
	}

	// Scales: the largest |weight| of what is drawn.
	drawn := func(m, c, y, x int) float64 { return float64(k.W[((m*k.C+c)*k.KH+y)*k.KW+x]) }
	scale := make([]float64, k.M)
	shared := 0.0
	for m := range k.M {
		s := 0.0
		for c := range k.C {
			if !rgb && c != slice {
				continue
			}
			for y := range k.KH {
				for x := range k.KW {
					s = math.Max(s, math.Abs(drawn(m, c, y, x)))
				}
			}
		}
		scale[m] = s
		shared = math.Max(shared, s)
	}
	if !o.PerFilter {
		for m := range scale {
			scale[m] = shared
		}
	}

	// Layout.
	tw, th := k.KW*cell, k.KH*cell
	if int64(tw)*int64(th) > MaxPixels {
		return nil, nil, fmt.Errorf("viz: kernels of %s: a %d×%d tile exceeds the limit of %d pixels", kname(k), tw, th, MaxPixels)
	}
	labelStyle := TextStyle{Color: inkFor(bg)}
	labels := make([]string, k.M)
	labelW, labelH := 0, 0
	if o.Labels {
		for m := range k.M {
			labels[m] = tileLabel(m, norms[m], flags[m])
			w, h := TextSize(labels[m], labelStyle)
			labelW, labelH = max(labelW, w), h
		}
	}
	boxW := tw + 2*frameRing
	if o.Labels {
		boxW = max(boxW, labelW+8) // labels of neighbours stay 8 + Gap pixels apart
	}
	boxH := th + 2*frameRing
	if o.Labels {
		boxH += labelH + 1
	}
	cols := o.Columns
	if cols == 0 {
		cols = int(math.Ceil(math.Sqrt(float64(k.M))))
	}
	cols = min(cols, k.M)
	rows := (k.M + cols - 1) / cols
	W := gap + cols*(boxW+gap)
	H := gap + rows*(boxH+gap)
	img, err := newCanvas("filter tiles of "+kname(k), W, H, bg)
	if err != nil {
		return nil, nil, err
	}

	infos := make([]TileInfo, 0, k.M)
	for pos, m := range order {
		bx := gap + (pos%cols)*(boxW+gap)
		by := gap + (pos/cols)*(boxH+gap)
		tx := bx + (boxW-tw)/2
		ty := by + frameRing
		r := image.Rect(tx, ty, tx+tw, ty+th)
		s := scale[m]
		for y := range k.KH {
			for x := range k.KW {
				var c color.NRGBA
				if rgb {
					ch := [3]int{0, 1, 2}
					if o.BGR {
						ch = [3]int{2, 1, 0}
					}
					c = color.NRGBA{
						symByte(drawn(m, ch[0], y, x), s),
						symByte(drawn(m, ch[1], y, x), s),
						symByte(drawn(m, ch[2], y, x), s), 255}
				} else {
					v := 0.0
					if s > 0 {
						v = drawn(m, slice, y, x) / s
					}
					c = Diverging(v)
				}
				fill(img, image.Rect(tx+x*cell, ty+y*cell, tx+(x+1)*cell, ty+(y+1)*cell), c)
			}
		}
		frame(img, r.Inset(-1), 1, outlineFor(bg), false)
		fs := uniqueSorted(flags[m])
		if len(fs) > 0 {
			severe := slices.Contains(fs, modelio.FlagZeroKernel) || slices.Contains(fs, modelio.FlagDead)
			fc := flagMild
			if severe {
				fc = flagSevere
			}
			frame(img, r.Inset(-frameRing), frameRing-1, fc, !severe)
		}
		if o.Labels {
			drawTextCentered(img, bx+boxW/2, ty+th+frameRing+1, labels[m], labelStyle)
		}
		infos = append(infos, TileInfo{Index: m, Norm: norms[m], Rect: r, Flags: fs})
	}
	return img, infos, nil
}

// symByte is round(v/s·127 + 128), 128 when s is 0.
func symByte(v, s float64) uint8 {
	if s <= 0 {
		return 128
	}
	return uint8(math.Round(math.Max(-1, math.Min(1, v/s))*127 + 128))
}

// tileLabel is the line under a tile: "#index |w|=norm" (the filter's L2
// norm over all its input channels) and the flag letters.
func tileLabel(m int, norm float64, flags []modelio.Flag) string {
	s := fmt.Sprintf("#%d |w|=%s", m, fmtG(norm))
	var letters []string
	for _, f := range uniqueSorted(flags) {
		if l, ok := flagLetter[f]; ok {
			letters = append(letters, l)
		}
	}
	if len(letters) > 0 {
		s += " " + strings.Join(letters, "")
	}
	return s
}

func uniqueSorted(s []modelio.Flag) []modelio.Flag {
	if len(s) == 0 {
		return nil
	}
	out := slices.Clone(s)
	slices.Sort(out)
	return slices.Compact(out)
}

func kname(k *modelio.Kernels) string {
	if k.Node == "" {
		return "the first layer"
	}
	return fmt.Sprintf("%q", k.Node)
}

// checkKernels is Kernels.Check with this package's prefix.
func checkKernels(k *modelio.Kernels) error {
	if err := k.Check(); err != nil {
		return fmt.Errorf("viz: %w", err)
	}
	return nil
}

// TileLegend draws the colour bar of a [Tiles] picture drawn with the same
// kernels and options, w×h pixels (ColorBar's limits apply): the weights
// from −s to +s, s the largest |weight| drawn (TileOptions.PerFilter: −1 to
// 1, each filter divided by its own), with the tiles' own colours — for the
// RGB rendering the grey ramp that a weight equal in the three channels
// gives (each channel alone runs the same way from dark to its full
// colour), otherwise the diverging map of the drawn input channel — and a
// unit that says which input channel is drawn.
func TileLegend(k *modelio.Kernels, o TileOptions, w, h int) (*image.NRGBA, error) {
	if err := checkKernels(k); err != nil {
		return nil, err
	}
	rgb := o.Slice == -1 && k.C == 3
	slice := o.Slice
	if slice == -1 && k.C != 3 {
		slice = 0
	}
	if slice < -1 || slice >= k.C {
		return nil, fmt.Errorf("viz: kernels of %s: slice %d is outside 0..%d", kname(k), slice, k.C-1)
	}
	s := 0.0
	for m := range k.M {
		for c := range k.C {
			if !rgb && c != slice {
				continue
			}
			for i := range k.KH * k.KW {
				s = math.Max(s, math.Abs(float64(k.W[(m*k.C+c)*k.KH*k.KW+i])))
			}
		}
	}
	unit := "weight per colour channel, mid-grey = 0"
	if !rgb {
		unit = fmt.Sprintf("weight of input channel %d of %d", slice, k.C)
	}
	if o.PerFilter || !(s > 0) {
		s = 1
		unit += " ÷ the filter's largest |weight|"
	}
	cmap := Diverging
	if rgb {
		cmap = func(v float64) color.NRGBA {
			b := symByte(v, 1)
			return color.NRGBA{b, b, b, 255}
		}
	}
	return ColorBar(w, h, -s, s, unit, cmap), nil
}
