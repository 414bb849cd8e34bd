package viz

import (
	"fmt"
	"image"
	"image/color"
	"math"
	"strconv"
	"strings"

	"fovea/modelio"
)

// GridOptions are the knobs of [MapGrid]; the zero value draws every channel
// of the first image with one shared scale.
type GridOptions struct {
	// Zoom is the side in pixels of one activation cell (nearest-neighbour
	// enlargement); 0 picks one so that a tile is about 48 pixels, at least 1.
	Zoom int
	// Gap is the space in pixels between tiles; 0 means 4.
	Gap int
	// PerTile scales each channel by its own range instead of one range shared
	// by all drawn channels (shared is the default: strengths compare).
	PerTile bool
	// Batch selects the image when the tensor holds several.
	Batch int
	// Channels selects and orders the channels to draw; nil draws all.
	Channels []int
	// Columns is the number of tiles per row; 0 makes the grid about square.
	Columns int
	// Labels writes the channel index under each tile.
	Labels bool
	// Background is the colour between tiles; the zero value means [Dark].
	Background color.NRGBA
}

// ChannelStats describes one channel of one image's activation map.
type ChannelStats struct {
	Channel int
	// Min, Max and Mean are over the channel's positions.
	Min, Max, Mean float64
	// Fires is the fraction of positions whose value is > 0 on this one
	// image. (The dead-filter scan's "fires" is different: the fraction of
	// images on which any position is > 0.)
	Fires float64
	// Rect is where the channel's tile is in the MapGrid picture.
	Rect image.Rectangle
}

// MapRange returns the value range MapGrid uses for a shared scale over the
// given channels: lo = min(0, smallest Min), hi = max(0, largest Max). Pass it
// to [ColorBar] with the map [MapColor] names.
func MapRange(stats []ChannelStats) (lo, hi float64) {
	for _, s := range stats {
		lo, hi = math.Min(lo, s.Min), math.Max(hi, s.Max)
	}
	return lo, hi
}

// MapColor is the colour of value v in an activation range [lo, hi] with
// lo ≤ 0 ≤ hi: Sequential(v / hi) when lo = 0 (activations after a ReLU, the
// usual case), otherwise Diverging(v / max(|lo|, hi)) so that zero stays
// neutral and the sign stays visible. A zero range maps everything to the
// bottom of the map.
func MapColor(v, lo, hi float64) color.NRGBA {
	if lo < 0 {
		return Diverging(v / math.Max(-lo, hi))
	}
	if hi <= 0 {
		return Sequential(0)
	}
	return Sequential(v / hi)
}

// ownRange is the range one channel is coloured with when it is scaled on
// its own inside a layer whose shared range starts at layerLo: the
// channel's own extent, kept signed (lo < 0, so [MapColor] takes the
// diverging map) whenever the layer is signed, so that the channel has the
// same colour map in the grid and over the image whichever scale is chosen.
// The divisor MapColor then uses is the channel's own largest |value|.
func ownRange(layerLo float64, s ChannelStats) (lo, hi float64) {
	lo, hi = math.Min(0, s.Min), math.Max(0, s.Max)
	if layerLo < 0 && lo == 0 {
		// A signed layer whose channel has no negative value: a tiny
		// negative lo selects the diverging map without changing the
		// divisor max(|lo|, hi) = hi.
		lo = -math.SmallestNonzeroFloat64
		if hi == 0 {
			hi = 1
		}
	}
	return lo, hi
}

// OwnRange is the range [MapOverlay] and a per-tile [MapGrid] colour
// channel s with inside a layer whose shared range ([MapRange]) starts at
// layerLo: the channel's own extent, with the layer's colour map.
func OwnRange(layerLo float64, s ChannelStats) (lo, hi float64) { return ownRange(layerLo, s) }

// mapMap returns the colour map ColorBar needs for the range.
func mapMap(lo float64) func(float64) color.NRGBA {
	if lo < 0 {
		return Diverging
	}
	return Sequential
}

// mapView is a checked view of an activation tensor.
type mapView struct {
	name       string
	n, c, h, w int
	nhwc       bool
	data       []float32
}

func (v *mapView) at(b, ch, y, x int) float64 {
	if v.nhwc {
		return float64(v.data[((b*v.h+y)*v.w+x)*v.c+ch])
	}
	return float64(v.data[((b*v.c+ch)*v.h+y)*v.w+x])
}

// viewTensor checks t against the layout. Rank 4 is [n][c][h][w] or
// [n][h][w][c]; rank 3 is the same without the batch; rank 2 ([n][features],
// after global pooling or Gemm) is taken as n maps of 1×1 per feature.
func viewTensor(t modelio.Tensor, layout modelio.Layout) (*mapView, error) {
	name := t.Name
	if name == "" {
		name = "activation"
	}
	v := &mapView{name: name, data: t.Data}
	switch modelio.Layout(strings.ToLower(string(layout))) {
	case modelio.LayoutNCHW:
	case modelio.LayoutNHWC:
		v.nhwc = true
	default:
		return nil, fmt.Errorf("viz: tensor %q: layout %q is neither \"nchw\" nor \"nhwc\"", name, layout)
	}
	for _, d := range t.Shape {
		if d <= 0 || d > 1<<31 {
			return nil, fmt.Errorf("viz: tensor %q: shape %v has a dimension outside 1..2^31", name, t.Shape)
		}
	}
	s := make([]int, len(t.Shape))
	for i, d := range t.Shape {
		s[i] = int(d)
	}
	switch len(s) {
	case 4:
		if v.nhwc {
			v.n, v.h, v.w, v.c = s[0], s[1], s[2], s[3]
		} else {
			v.n, v.c, v.h, v.w = s[0], s[1], s[2], s[3]
		}
	case 3:
		v.n = 1
		if v.nhwc {
			v.h, v.w, v.c = s[0], s[1], s[2]
		} else {
			v.c, v.h, v.w = s[0], s[1], s[2]
		}
	case 2:
		v.n, v.c, v.h, v.w = s[0], s[1], 1, 1
	default:
		return nil, fmt.Errorf("viz: tensor %q: shape %v is not an activation map (rank 2, 3 or 4)", name, t.Shape)
	}
	want := int64(1)
	for _, d := range s {
		want *= int64(d)
		if want > int64(len(t.Data)) {
			break
		}
	}
	if want != int64(len(t.Data)) {
		return nil, fmt.Errorf("viz: tensor %q: shape %v does not match its %d values", name, t.Shape, len(t.Data))
	}
	return v, nil
}

// stats computes one channel's statistics on image b and rejects
// non-finite values.
func (v *mapView) stats(b, ch int) (ChannelStats, error) {
	st := ChannelStats{Channel: ch, Min: math.Inf(1), Max: math.Inf(-1)}
	sum, pos := 0.0, 0
	for y := range v.h {
		for x := range v.w {
			a := v.at(b, ch, y, x)
			if math.IsNaN(a) || math.IsInf(a, 0) {
				return st, fmt.Errorf("viz: tensor %q: channel %d has a non-finite value (%v) at row %d, column %d", v.name, ch, a, y, x)
			}
			st.Min, st.Max = math.Min(st.Min, a), math.Max(st.Max, a)
			sum += a
			if a > 0 {
				pos++
			}
		}
	}
	n := float64(v.h * v.w)
	st.Mean, st.Fires = sum/n, float64(pos)/n
	if st.Min == 0 {
		st.Min = 0 // not -0 (a ReLU's output), which prints as "-0"
	}
	return st, nil
}

// MapGrid draws one tile per channel of one image's activation map and
// returns the picture with each drawn channel's statistics (in drawing
// order). layout is "nchw" or "nhwc".
//
// Values are coloured with [MapColor] over a range shared by all drawn
// channels ([MapRange] of the returned statistics) or, with PerTile, over
// each channel's own range. Each activation cell is a Zoom×Zoom square; the
// picture is never smoothed, so what is seen is what the layer computed.
func MapGrid(t modelio.Tensor, layout modelio.Layout, o GridOptions) (*image.NRGBA, []ChannelStats, error) {
	v, err := viewTensor(t, layout)
	if err != nil {
		return nil, nil, err
	}
	if o.Batch < 0 || o.Batch >= v.n {
		return nil, nil, fmt.Errorf("viz: tensor %q: image %d is outside the batch of %d", v.name, o.Batch, v.n)
	}
	if o.Zoom < 0 || o.Gap < 0 || o.Columns < 0 {
		return nil, nil, fmt.Errorf("viz: tensor %q: negative zoom %d, gap %d or columns %d", v.name, o.Zoom, o.Gap, o.Columns)
	}
	chans := o.Channels
	if chans == nil {
		chans = make([]int, v.c)
		for i := range chans {
			chans[i] = i
		}
	}
	if len(chans) == 0 {
		return nil, nil, fmt.Errorf("viz: tensor %q: no channel selected", v.name)
	}
	for _, ch := range chans {
		if ch < 0 || ch >= v.c {
			return nil, nil, fmt.Errorf("viz: tensor %q: channel %d is outside 0..%d", v.name, ch, v.c-1)
		}
	}
	zoom := o.Zoom
	if zoom == 0 {
		zoom = max(1, 48/max(v.h, v.w))
	}
	gap := o.Gap
	if gap == 0 {
		gap = 4
	}
	bg := o.Background
	if bg == (color.NRGBA{}) {
		bg = Dark
	}
	if int64(v.w)*int64(zoom)*int64(v.h)*int64(zoom) > MaxPixels {
		return nil, nil, fmt.Errorf("viz: tensor %q: a %d×%d tile at zoom %d exceeds the limit of %d pixels", v.name, v.w, v.h, zoom, MaxPixels)
	}
	tw, th := v.w*zoom, v.h*zoom

	stats := make([]ChannelStats, len(chans))
	for i, ch := range chans {
		if stats[i], err = v.stats(o.Batch, ch); err != nil {
			return nil, nil, err
		}
	}
	lo, hi := MapRange(stats)

	label := TextStyle{Color: inkFor(bg)}
	labelH, labelW := 0, 0
	if o.Labels {
		_, labelH = TextSize("0", label)
		labelW, _ = TextSize(strconv.Itoa(v.c-1), label)
	}
	boxW, boxH := max(tw, labelW), th
	if o.Labels {
		boxH += labelH + 1
	}
	cols := o.Columns
	if cols == 0 {
		cols = int(math.Ceil(math.Sqrt(float64(len(chans)))))
	}
	cols = min(cols, len(chans))
	rows := (len(chans) + cols - 1) / cols
	if int64(gap+cols*(boxW+gap))*int64(gap+rows*(boxH+gap)) > MaxPixels {
		return nil, nil, fmt.Errorf("viz: tensor %q: %d tiles of %d×%d exceed the limit of %d pixels", v.name, len(chans), boxW, boxH, MaxPixels)
	}
	img, err := newCanvas("activation grid of "+v.name, gap+cols*(boxW+gap), gap+rows*(boxH+gap), bg)
	if err != nil {
		return nil, nil, err
	}
	for i, ch := range chans {
		bx := gap + (i%cols)*(boxW+gap)
		by := gap + (i/cols)*(boxH+gap)
		tx := bx + (boxW-tw)/2
		r := image.Rect(tx, by, tx+tw, by+th)
		// One colour map for the whole grid, chosen by the layer's sign
		// (so that a tile never switches map); with PerTile only the
		// divisor is the tile's own.
		l, h := lo, hi
		if o.PerTile {
			l, h = ownRange(lo, stats[i])
		}
		for y := range v.h {
			for x := range v.w {
				c := MapColor(v.at(o.Batch, ch, y, x), l, h)
				fill(img, image.Rect(tx+x*zoom, by+y*zoom, tx+(x+1)*zoom, by+(y+1)*zoom), c)
			}
		}
		if o.Labels {
			drawTextCentered(img, bx+boxW/2, by+th+1, strconv.Itoa(ch), label)
		}
		stats[i].Rect = r
	}
	return img, stats, nil
}

// Geometry says where the activation cells of a layer sit on the input
// image: the centre of output cell (i, j) (row i, column j) is at
//
//	y = OffsetY + JumpY·i,  x = OffsetX + JumpX·j
//
// in input-pixel coordinates where the centre of pixel k (0-indexed from
// the top or left) is at k, so an image of n pixels spans −0.5 … n−0.5.
// Exact says the offsets are the layer's own (modelio.Layer.CenterY,
// CenterX: the start recurrence of Araujo, Norris & Sim, "Computing
// receptive fields of convolutional neural networks", Distill, 2019, with
// the layer's actual padding) rather than the estimate [LayerGeometry]
// falls back to.
type Geometry struct {
	JumpY, JumpX     float64
	OffsetY, OffsetX float64
	Exact            bool
}

// LayerGeometry returns the geometry of the layer's cells for an input of
// inH×inW pixels and a map of outH×outW cells.
//
// When the layer knows where its cell (0, 0) is (l.HasCenter), the offsets
// are l.CenterY and l.CenterX and the jumps l.JumpY and l.JumpX: exact,
// whatever the padding. Otherwise (auto_pad SAME on a size static inference
// did not know, a Layer made by hand with only RF and Jump) the offset is
// estimated assuming the padding is spread evenly on both sides of the
// image, so that the first and last cells' receptive fields overhang the
// image by the same amount:
//
//	Offset = (in − 1 − Jump·(out − 1)) / 2
//
// This is exact for "same"-style padding when the strides divide the input,
// and off by at most Jump/2 pixels otherwise (for example a 7×7 stride-2
// pad-3 convolution on 224 pixels: true offset 0, estimate 0.5). When the
// layer has no Jump (0), the map is taken to cover the image evenly:
// Jump = in/out, the same formula for the offset.
func LayerGeometry(l modelio.Layer, inH, inW, outH, outW int) Geometry {
	jy, jx := layerJumps(l)
	if l.HasCenter && jy > 0 && jx > 0 {
		return Geometry{JumpY: float64(jy), JumpX: float64(jx), OffsetY: l.CenterY, OffsetX: l.CenterX, Exact: true}
	}
	axis := func(j, in, out int) (jump, off float64) {
		jump = float64(j)
		if jump <= 0 {
			jump = float64(in) / float64(out)
		}
		return jump, (float64(in) - 1 - jump*float64(out-1)) / 2
	}
	g := Geometry{}
	g.JumpY, g.OffsetY = axis(jy, inH, outH)
	g.JumpX, g.OffsetX = axis(jx, inW, outW)
	return g
}

// layerJumps returns the layer's jump per axis (height, width): JumpY and
// JumpX, or Jump for both when the per-axis values are not set.
func layerJumps(l modelio.Layer) (jy, jx int) {
	if l.JumpY > 0 && l.JumpX > 0 {
		return l.JumpY, l.JumpX
	}
	return l.Jump, l.Jump
}

// layerRFs is layerJumps for the receptive field.
func layerRFs(l modelio.Layer) (ry, rx int) {
	if l.RFY > 0 && l.RFX > 0 {
		return l.RFY, l.RFX
	}
	return l.RF, l.RF
}

// sampler evaluates a grid of values, known at increasing centre positions
// along each axis, at any pixel by bilinear interpolation; outside the
// outermost centres the edge value continues (no extrapolation).
type sampler struct {
	cy, cx []float64 // centres, increasing
	val    func(i, j int) float64
}

// locate returns the interval index i and the weight f of the upper end:
// position p lies between c[i] and c[i+1] at fraction f.
func locate(c []float64, p float64) (int, float64) {
	n := len(c)
	if n == 1 || p <= c[0] {
		return 0, 0
	}
	if p >= c[n-1] {
		return n - 2, 1
	}
	lo, hi := 0, n-1 // c[lo] <= p < c[hi]
	for hi-lo > 1 {
		mid := (lo + hi) / 2
		if c[mid] <= p {
			lo = mid
		} else {
			hi = mid
		}
	}
	return lo, (p - c[lo]) / (c[lo+1] - c[lo])
}

func (s *sampler) at(y, x float64) float64 {
	i, fy := locate(s.cy, y)
	j, fx := locate(s.cx, x)
	i1, j1 := min(i+1, len(s.cy)-1), min(j+1, len(s.cx)-1)
	top := s.val(i, j)*(1-fx) + s.val(i, j1)*fx
	bot := s.val(i1, j)*(1-fx) + s.val(i1, j1)*fx
	return top*(1-fy) + bot*fy
}

// overlay returns base turned grey (ITU-R BT.601 luma, so that every colour
// in the result belongs to the map) with each pixel blended with the map's
// colour at its sample: out = (1−a)·grey + a·colour, a = opacity·weight,
// where colour and weight in [0, 1] come from paint. Weight is the sample's
// strength (|v| relative to the scale), so that where the map says nothing
// the image shows through unchanged.
func overlay(base image.Image, s *sampler, paint func(float64) (color.NRGBA, float64), opacity float64) *image.NRGBA {
	out := flatten(base, Light)
	b := out.Rect
	for y := range b.Dy() {
		for x := range b.Dx() {
			i := out.PixOffset(x, y)
			g := greyByte(out.Pix[i], out.Pix[i+1], out.Pix[i+2])
			c, w := paint(s.at(float64(y), float64(x)))
			m := blend(color.NRGBA{g, g, g, 255}, c, opacity*w)
			out.Pix[i], out.Pix[i+1], out.Pix[i+2] = m.R, m.G, m.B
		}
	}
	return out
}

// greyByte is the BT.601 luma 0.299 R + 0.587 G + 0.114 B, rounded.
func greyByte(r, g, b uint8) uint8 {
	return uint8(math.Round(0.299*float64(r) + 0.587*float64(g) + 0.114*float64(b)))
}

// mapWeight is the overlay weight of v in the range MapColor uses.
func mapWeight(v, lo, hi float64) float64 {
	d := hi
	if lo < 0 {
		d = math.Max(-lo, hi)
	}
	if d <= 0 {
		return 0
	}
	return strength(v / d)
}

// strength is the overlay weight of a normalised value n: the smoothstep
// 3t² − 2t³ of t = min(1, |n| / 0.5). Values at half the scale or beyond get
// the full opacity, weaker ones less. The colour maps already fade towards
// their neutral end, so a linear weight would fade weak values twice, and a
// weight with a kink at zero (|n|, √|n|) draws a visible crease wherever the
// values cross zero; the smoothstep has zero slope there.
func strength(n float64) float64 {
	t := math.Min(1, math.Abs(n)/0.5)
	return t * t * (3 - 2*t)
}

// MapOverlay draws one channel of an activation map over the input image:
// the map is upsampled bilinearly to image pixels with each cell's value
// placed at the centre of its receptive field (see [LayerGeometry]: exact
// when l.HasCenter, as for layers from modelio's table), coloured
// with [MapColor] over the channel's own range and blended with the image
// shown in grey:
//
//	out = (1 − a)·grey + a·colour,  a = opacity · smoothstep(min(1, 2|v| / d))
//
// (smoothstep(t) = 3t² − 2t³) where d is MapColor's divisor (hi, or
// max(|lo|, hi) for signed maps): where
// the channel is silent the image shows unchanged, where it is strongest the
// colour covers it at the given opacity (0: the image only).
//
// base must be the image as the model saw it (prep.Fit's result, at the
// model's input size): cells are placed in its pixel coordinates. Upscale
// the result, not the input, for display. The tensor's first image is used.
func MapOverlay(base image.Image, t modelio.Tensor, layout modelio.Layout, channel int, l modelio.Layer, opacity float64) (*image.NRGBA, error) {
	return MapOverlayIn(base, t, layout, channel, l, opacity, 0, 0)
}

// MapOverlayIn is [MapOverlay] coloured over the range lo..hi (as
// [MapColor] takes it) instead of the channel's own: pass the layer's
// shared range ([MapRange] over all channels) so that the overlay of a
// channel has exactly the colours of its tile in a shared [MapGrid], or
// [OwnRange] for those of a per-tile grid. lo = hi = 0 means the channel's
// own range.
func MapOverlayIn(base image.Image, t modelio.Tensor, layout modelio.Layout, channel int, l modelio.Layer, opacity, lo, hi float64) (*image.NRGBA, error) {
	v, err := viewTensor(t, layout)
	if err != nil {
		return nil, err
	}
	if base == nil {
		return nil, fmt.Errorf("viz: overlay of %q: no image", v.name)
	}
	if channel < 0 || channel >= v.c {
		return nil, fmt.Errorf("viz: tensor %q: channel %d is outside 0..%d", v.name, channel, v.c-1)
	}
	if !(opacity >= 0 && opacity <= 1) {
		return nil, fmt.Errorf("viz: overlay of %q: opacity %v is outside 0..1", v.name, opacity)
	}
	bb := base.Bounds()
	inH, inW := bb.Dy(), bb.Dx()
	if inH <= 0 || inW <= 0 || int64(inH)*int64(inW) > MaxPixels {
		return nil, fmt.Errorf("viz: overlay of %q: image size %d×%d is empty or above %d pixels", v.name, inW, inH, MaxPixels)
	}
	g := LayerGeometry(l, inH, inW, v.h, v.w)
	jy, jx := layerJumps(l)
	ry, rx := layerRFs(l)
	for _, c := range []struct {
		in, out, jump, rf int
	}{{inH, v.h, jy, ry}, {inW, v.w, jx, rx}} {
		covered := float64(c.jump) * float64(c.out)
		if c.jump > 0 && (float64(c.in) > 2*covered+float64(c.rf) || 2*float64(c.in) < covered) {
			return nil, fmt.Errorf("viz: overlay of %q: the image is %d×%d pixels but %d×%d cells %d pixels apart cover about %.0f: pass the image at the model's input size",
				v.name, inW, inH, v.w, v.h, c.jump, covered)
		}
	}
	st, err := v.stats(0, channel)
	if err != nil {
		return nil, err
	}
	if lo == 0 && hi == 0 {
		lo, hi = math.Min(0, st.Min), math.Max(0, st.Max)
	}
	s := &sampler{
		cy:  centres(v.h, g.JumpY, g.OffsetY),
		cx:  centres(v.w, g.JumpX, g.OffsetX),
		val: func(i, j int) float64 { return v.at(0, channel, i, j) },
	}
	paint := func(a float64) (color.NRGBA, float64) { return MapColor(a, lo, hi), mapWeight(a, lo, hi) }
	return overlay(base, s, paint, opacity), nil
}

func centres(n int, jump, off float64) []float64 {
	c := make([]float64, n)
	for i := range c {
		c[i] = jump*float64(i) + off
	}
	return c
}
