package analysis

import (
	"fmt"
	"math"
	"slices"

	"fovea/modelio"
)

// What the scan gathers besides firing rates, in the same pass over the
// probe images: each channel's strongest images (a bounded heap of k per
// channel, so memory does not grow with the images), its firing per probe
// class, and the largest value the activation's input reached (why a dead
// channel is dead: how far below zero it stays).

// PreActivationCapture returns the tensors a scan session should capture
// besides ScanCapture for ChannelScan.MaxPreActivation: the input of each
// scanned activation, where capturing it keeps the model's outputs exactly
// those of a plain run (modelio.CaptureEffect is not CaptureShifts). A
// tensor that is a graph input is left out.
func PreActivationCapture(m *modelio.Model) []string {
	var names []string
	for _, l := range m.ReluLayers() {
		if in, ok := preActivation(m, l); ok {
			names = append(names, in)
		}
	}
	return names
}

// preActivation returns the input of activation l when it may be captured.
func preActivation(m *modelio.Model, l modelio.Layer) (string, bool) {
	if len(l.Inputs) == 0 || l.Inputs[0] == "" {
		return "", false
	}
	in := l.Inputs[0]
	if slices.ContainsFunc(m.Inputs, func(v modelio.Value) bool { return v.Name == in }) {
		return "", false
	}
	if m.CaptureEffect(in) == modelio.CaptureShifts {
		return "", false
	}
	return in, true
}

// identityAbove0 are the activations that pass positive inputs unchanged,
// so that a channel's largest input, once it fired, is its largest output
// (ONNX operator definitions: Relu, LeakyRelu, PRelu, Elu, Celu are x for
// x > 0; ThresholdedRelu is x above its threshold, which is positive).
var identityAbove0 = map[string]bool{"Relu": true, "LeakyRelu": true, "PRelu": true, "Elu": true, "Celu": true, "ThresholdedRelu": true}

// batchInfo is what the statistics of a batch need besides its maps.
type batchInfo struct {
	n     int
	files []string // the n files, in order
	class []int    // per image, the index into the classes, -1 for none
}

// classAcc accumulates one channel's firing on one class.
type classAcc struct {
	fires int
	mean  float64 // sum over images of the image's mean value
}

// extras are a layer's accumulators beyond the firing statistics.
type extras struct {
	k          int    // strongest images kept per channel (0: none)
	classes    int    // number of probe classes (0: unlabelled)
	pre        string // the captured input of the activation, "" when none
	identity   bool   // the activation passes positive values unchanged: where it fired, its input's maximum is its own
	direct     bool   // the feeding Conv's output is the activation's input (no normalisation between)
	tops       []topHeap
	cls        [][]classAcc // [channel][class]
	preMax     []float64
	preSeen    bool
	mapH       int
	mapW       int
	bi         batchInfo      // the batch being added
	preT       modelio.Tensor // its pre-activation maps, or their summaries
	havePre    bool
	preSummary bool // preT holds the summaries (modelio.Summary) per image and channel
	preWidth   int  // their width: 1 (the largest value only) or modelio.SummaryWidth
}

// sizeExtras makes the accumulators for c channels (first batch).
func (a *layerAcc) sizeExtras(c int) {
	if a.k > 0 {
		a.tops = make([]topHeap, c)
		for i := range a.tops {
			a.tops[i] = make(topHeap, 0, min(a.k, 64)) // no growing while the first images fill it
		}
	}
	if a.classes > 0 {
		a.cls = make([][]classAcc, c)
		for i := range a.cls {
			a.cls[i] = make([]classAcc, a.classes)
		}
	}
	a.preMax = make([]float64, c)
	for i := range a.preMax {
		a.preMax[i] = math.Inf(-1)
	}
}

// startBatch records the batch's files and classes and checks its
// pre-activation maps (whole, or their largest values summarised in the
// graph), before the channels are added (on any number of goroutines).
func (a *layerAcc) startBatch(maps map[string]modelio.Tensor, bi batchInfo) error {
	a.bi = bi
	a.havePre = false
	if a.pre == "" {
		return nil
	}
	want := bi.n * len(a.channels) * a.spatial // whole maps, as the output's
	p, ok := maps[a.pre]
	a.preSummary = false
	if !ok {
		if p, ok = maps[modelio.SummaryName(a.pre)]; !ok {
			return nil // the session does not capture it: no MaxPreActivation
		}
		a.preSummary = true
		// The largest value per image and channel, or the whole summary
		// when the tensor is also scanned as a layer of its own
		// (ScanOptions.Layers): its first column.
		a.preWidth = 1
		if len(p.Data) == bi.n*len(a.channels)*modelio.SummaryWidth {
			a.preWidth = modelio.SummaryWidth
		}
		want = bi.n * len(a.channels) * a.preWidth
	}
	if len(p.Data) != want || (!a.preSummary && !a.summary && !slices.Equal(p.Shape, a.cur.Shape)) {
		return fmt.Errorf("viz: scan: the input of activation %q has shape %v; its output has %d channels of %d values", a.layer.Name, p.Shape, len(a.channels), a.spatial)
	}
	a.preT, a.havePre, a.preSeen = p, true, true
	return nil
}

// addExtras adds image img's map of channel ch (its largest value mx and
// sum) to the strongest images, the class rates and the pre-activations.
// m is the map, or nil when it was summarised in the graph and pos is the
// first position of mx. Like addChannels, it touches channel ch's
// accumulators only.
func (a *layerAcc) addExtras(img, ch int, m []float32, mx float32, sum float64, pos int) {
	if a.k > 0 && len(a.bi.files) > img && mx == mx {
		f := a.bi.files[img]
		if a.tops[ch].wants(a.k, mx, f) {
			if m != nil {
				pos = firstAt(m, mx)
			}
			a.tops[ch].push(a.k, topEntry{value: mx, file: f, pos: pos})
		}
	}
	if a.classes > 0 && len(a.bi.class) > img {
		if k := a.bi.class[img]; k >= 0 {
			c := &a.cls[ch][k]
			if mx > 0 {
				c.fires++
			}
			c.mean += sum / float64(a.spatial)
		}
	}
	// The input's maximum is read only while the channel has not fired:
	// once it has, the maximum is above zero and the channel is not dead,
	// and a healthy network costs no second pass over its maps.
	if a.havePre && a.channels[ch].fires == 0 {
		sp := a.spatial
		c := len(a.channels)
		var pm float32
		if a.preSummary {
			pm = a.preT.Data[(img*c+ch)*a.preWidth+modelio.SummaryMax]
		} else {
			pm, _ = mapStats(a.preT.Data[(img*c+ch)*sp : (img*c+ch+1)*sp])
		}
		if float64(pm) > a.preMax[ch] || pm != pm {
			a.preMax[ch] = float64(pm)
		}
	}
}

// scanExtras is the scan-wide part: the classes and how many images each
// has.
type scanExtras struct {
	classes []string
	index   map[string]int
	labels  map[string]string
	images  []int // per class
}

// setupExtras prepares the accumulators of every layer for o and returns
// the scan-wide part.
func setupExtras(m *modelio.Model, accs []*layerAcc, o ScanOptions) (*scanExtras, error) {
	xt := &scanExtras{labels: o.Labels, index: map[string]int{}}
	for _, c := range o.Labels {
		if _, ok := xt.index[c]; !ok {
			xt.index[c] = 0
			xt.classes = append(xt.classes, c)
		}
	}
	slices.Sort(xt.classes)
	for i, c := range xt.classes {
		xt.index[c] = i
	}
	xt.images = make([]int, len(xt.classes))
	k := o.TopK
	if k == 0 {
		k = DefaultTopK
	}
	if k > 100000 {
		return nil, fmt.Errorf("viz: scan: %d strongest images per channel: at most 100000", k)
	}
	for _, a := range accs {
		a.k = max(0, k)
		a.classes = len(xt.classes)
		if len(a.layer.Inputs) > 0 && a.conv >= 0 {
			a.direct = a.layer.Inputs[0] == m.Layers[a.conv].Output
		}
		if in, ok := preActivation(m, a.layer); ok && a.relu {
			a.pre = in
			a.identity = identityAbove0[a.layer.Op]
		}
	}
	return xt, nil
}

// batch returns the batchInfo of a batch of files and counts its images
// per class; called in file order.
func (xt *scanExtras) batch(n int, files []string) batchInfo {
	bi := batchInfo{n: n, files: files}
	if len(xt.classes) > 0 {
		bi.class = make([]int, n)
		for i, f := range files[:n] {
			c, ok := xt.labels[f]
			if !ok {
				bi.class[i] = -1
				continue
			}
			bi.class[i] = xt.index[c]
			xt.images[bi.class[i]]++
		}
	}
	return bi
}

// finish fills channel ch's extras into cs: the strongest images with
// their boxes for an inH×inW input and the class rates. (The bias and the
// input's maximum travel in the scan part: see why.)
func (xt *scanExtras) finish(a *layerAcc, ch int, cs *ChannelScan, inH, inW int) {
	if a.k > 0 {
		top := a.tops[ch].sorted()
		if len(top) > 0 {
			cs.Top = make([]Patch, 0, len(top))
		}
		for _, e := range top {
			y, x := e.pos/a.mapW, e.pos%a.mapW
			r := PatchBox(a.layer, inH, inW, a.mapH, a.mapW, y, x)
			cs.Top = append(cs.Top, Patch{File: e.file, Value: float64(e.value), Y: y, X: x, Box: [4]int{r.Min.X, r.Min.Y, r.Max.X, r.Max.Y}})
		}
	}
	if a.classes > 0 {
		cs.PerClass = make([]ClassRate, 0, len(xt.classes))
		for k, name := range xt.classes {
			r := ClassRate{Class: name, Images: xt.images[k]}
			if r.Images > 0 {
				c := a.cls[ch][k]
				r.Fires = float64(c.fires) / float64(r.Images)
				r.Mean = c.mean / float64(r.Images)
			}
			cs.PerClass = append(cs.PerClass, r)
		}
		if best, sel := Selectivity(cs.PerClass); best >= 0 && finite(sel) {
			cs.SelectiveFor, cs.Selectivity = xt.classes[best], sel
		}
	}
}

// why returns channel ch's bias (when its Conv feeds the activation
// directly) and the maximum of the activation's input: measured while the
// channel never fired, its peak once it fired after an activation that
// passes positive values unchanged, else nil.
func (a *layerAcc) why(ch int, kernels map[int]convFlags) (bias, pre *jfloat) {
	if kf, ok := kernels[a.conv]; ok && kf.m == len(a.channels) && a.direct && ch < len(kf.bias) {
		v := jfloat(kf.bias[ch])
		bias = &v
	}
	switch {
	case !a.preSeen:
	case a.channels[ch].fires == 0:
		v := jfloat(a.preMax[ch])
		pre = &v
	case a.identity:
		v := jfloat(a.channels[ch].max)
		pre = &v
	}
	return bias, pre
}

// convBias returns the bias of the Conv at index i of m.Layers (its third
// input, ONNX Conv's B), nil when it has none or it cannot be read.
func convBias(m *modelio.Model, i int) []float32 {
	in := m.Layers[i].Inputs
	if len(in) < 3 || in[2] == "" {
		return nil
	}
	b, _, err := m.Weights(in[2])
	if err != nil {
		return nil
	}
	return b
}
