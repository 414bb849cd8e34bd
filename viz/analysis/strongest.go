package analysis

import (
	"image"
	"math"
	"slices"
	"strings"

	"fovea/modelio"
	"fovea/viz"
)

// DefaultTopK is the number of strongest probe images kept per channel: nine,
// the number Zeiler and Fergus show per feature map ("Visualizing and
// Understanding Convolutional Networks", ECCV 2014).
const DefaultTopK = 9

// Patch is one of a channel's strongest responses over the probe images: the
// image, the channel's largest value on it and where, and the input region
// that position sees.
type Patch struct {
	File  string  `json:"file"`
	Value float64 `json:"value"`
	// Y, X are the position of the value in the layer's own map (row,
	// column); the first position in row-major order when the largest value
	// occurs more than once.
	Y int `json:"y"`
	X int `json:"x"`
	// Box is the receptive field of (Y, X) in pixels of the model's input
	// (the probe image after fitting to the input size), as [x0, y0, x1,
	// y1] with x1 and y1 exclusive, clipped to the image. A layer without
	// spatial geometry (after a Gemm or a global pooling) gives the whole
	// image.
	Box [4]int `json:"box"`
}

// Rect is the Box as an image.Rectangle.
func (p Patch) Rect() image.Rectangle { return image.Rect(p.Box[0], p.Box[1], p.Box[2], p.Box[3]) }

// ClassRate is a channel's firing on the probe images of one class.
type ClassRate struct {
	Class  string  `json:"class"`
	Images int     `json:"images"` // probe images of the class
	Fires  float64 `json:"fires"`  // fraction of them on which the channel fired
	// Mean is the channel's mean value over the class's images (each
	// image's map averaged over its positions, then over the images).
	Mean float64 `json:"mean"`
}

// Selectivity is the class-selectivity index of Morcos, Barrett,
// Rabinowitz and Botvinick ("On the importance of single directions for
// generalization", ICLR 2018, section 2.3):
//
//	(μmax − μrest) / (μmax + μrest)
//
// where μmax is the largest of the per-class mean values (ClassRate.Mean)
// and μrest the mean of the other classes' means. It is 0 when the channel
// responds equally to every class and 1 when it responds to one class only;
// it is defined for non-negative values (after a ReLU), and reported as 0
// when both means are 0 or fewer than two classes have images. It returns
// the index of the best class (-1 when none) and the index.
func Selectivity(rates []ClassRate) (best int, index float64) {
	best = -1
	n := 0
	for i, r := range rates {
		if r.Images == 0 {
			continue
		}
		n++
		if best < 0 || r.Mean > rates[best].Mean {
			best = i
		}
	}
	if n < 2 {
		return best, 0
	}
	var rest float64
	for i, r := range rates {
		if i != best && r.Images > 0 {
			rest += r.Mean
		}
	}
	rest /= float64(n - 1)
	top := rates[best].Mean
	if top+rest <= 0 {
		return best, 0
	}
	return best, (top - rest) / (top + rest)
}

// topEntry is a candidate of a channel's strongest images.
type topEntry struct {
	value float32
	file  string
	pos   int // index into the channel's map
}

// better orders candidates: higher value first, then the file name, so
// that the kept set does not depend on the order images arrive in.
func (a topEntry) better(b topEntry) bool {
	if a.value != b.value {
		return a.value > b.value
	}
	return a.file < b.file
}

// topHeap keeps the k best entries, the worst at the root.
type topHeap []topEntry

// wants reports whether an entry of value v from file would be kept.
func (h topHeap) wants(k int, v float32, file string) bool {
	if len(h) < k {
		return true
	}
	return topEntry{v, file, 0}.better(h[0])
}

// push adds e, dropping the worst entry when k are kept already.
func (h *topHeap) push(k int, e topEntry) {
	s := *h
	if len(s) < k {
		s = append(s, e)
		for i := len(s) - 1; i > 0; {
			p := (i - 1) / 2
			if !s[p].better(s[i]) {
				break
			}
			s[p], s[i] = s[i], s[p]
			i = p
		}
		*h = s
		return
	}
	s[0] = e
	for i := 0; ; {
		l, r, w := 2*i+1, 2*i+2, i
		if l < len(s) && s[w].better(s[l]) {
			w = l
		}
		if r < len(s) && s[w].better(s[r]) {
			w = r
		}
		if w == i {
			break
		}
		s[i], s[w] = s[w], s[i]
		i = w
	}
}

// sorted returns the entries best first.
func (h topHeap) sorted() []topEntry {
	out := slices.Clone([]topEntry(h))
	slices.SortFunc(out, func(a, b topEntry) int {
		switch {
		case a.better(b):
			return -1
		case b.better(a):
			return 1
		}
		return strings.Compare(a.file, b.file)
	})
	return out
}

// firstAt returns the first index of m holding mx (the map's largest value).
func firstAt(m []float32, mx float32) int {
	for i, v := range m {
		if v == mx {
			return i
		}
	}
	return 0
}

// PatchBox returns the input region, in pixels of an inH×inW input, that
// cell (y, x) of layer l's outH×outW map sees: its receptive field, centred
// where viz.LayerGeometry puts the cell (exact when l.HasCenter, from the
// layer table), RFY×RFX pixels, clipped to the image. The receptive field
// of cell i along an axis covers input pixels u + i·j … u + i·j + r − 1,
// r, j and u as Araujo, Norris and Sim derive them ("Computing Receptive
// Fields of Convolutional Neural Networks", Distill, 2019); the centre is
// u + i·j + (r − 1)/2. A layer without a receptive field (0) or a map of
// one cell gives the whole image.
func PatchBox(l modelio.Layer, inH, inW, outH, outW, y, x int) image.Rectangle {
	ry, rx := l.RFY, l.RFX
	if ry <= 0 || rx <= 0 {
		ry, rx = l.RF, l.RF
	}
	whole := image.Rect(0, 0, inW, inH)
	if ry <= 0 || rx <= 0 || outH <= 0 || outW <= 0 || (outH == 1 && outW == 1 && ry >= inH && rx >= inW) {
		return whole
	}
	g := viz.LayerGeometry(l, inH, inW, outH, outW)
	lo := func(off, jump float64, i, r int) int {
		return int(math.Floor(off + float64(i)*jump - float64(r-1)/2 + 0.5))
	}
	y0, x0 := lo(g.OffsetY, g.JumpY, y, ry), lo(g.OffsetX, g.JumpX, x, rx)
	return image.Rect(x0, y0, x0+rx, y0+ry).Intersect(whole)
}
