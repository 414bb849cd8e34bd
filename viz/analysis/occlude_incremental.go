package analysis

import (
	"context"
	"errors"
	"fmt"
	"runtime"
	"slices"
	"sync"
	"time"

	"fovea/modelio"
	"fovea/modelio/infer"
	"fovea/viz"
)

// Incremental occlusion: the same scores as running every occluded image,
// for a fraction of the work (Nakandala, Kumar & Papakonstantinou,
// "Incremental and Approximate Inference for Faster Occlusion-based Deep
// CNN Explanations", SIGMOD 2019). A patch changes only the activations
// whose receptive field overlaps it. The network's convolutional front is
// cut into stages at tensors every path passes through (modelio.Stages);
// the clean image runs through them once, and for each position each early
// stage runs, as a sub-model cut from the model's own graph, on a crop of
// its input: the changed window plus the margin its windows need, clamped
// to the map so that real borders keep their real padding, aligned to the
// stage's stride. Only the output cells whose every input was real (or real
// padding) are kept and pasted into a copy of the clean output
// (occlude_geometry.go proves which). Once the changed window covers most
// of the map, the rest of the network runs on the pasted full tensors.
// Crops of many positions go to the runtime as one batch, which hides its
// per-call overhead. Where to switch from crops to full tensors is chosen
// from the measured cost of each stage on this machine: the first chunk of
// positions runs on crops through every stage that can be cropped, the
// second on full tensors through the same stages.

// incStage is one stage of the chain: its sub-model, its clean output and
// its crops for the positions of the run.
type incStage struct {
	st    modelio.Stage
	sess  *infer.Session
	clean []float32
	ax    [2]axisPlan
	buf   []float32 // the crops of a chunk, reused from chunk to chunk
}

// incremental runs the occluded images of one Occlude call.
type incremental struct {
	main    *infer.Session
	stages  []*incStage // the stages that can run on crops
	rest    *infer.Session
	restIn  string
	ys, xs  []int
	patch   int
	in      modelio.StageTensor // the image input
	base    []float32
	fill    []float32
	batch   int       // full tensors per call
	fullBuf []float32 // the full tensors of a batch, reused
	// fixedBatch is true when the model's input has a fixed batch size,
	// which its graph may rely on (a reshape to [1, -1]).
	fixedBatch bool
	chunk      int // positions per chunk

	k    int    // stages run on crops, once chosen (-1 before)
	why  string // why that k
	cost struct {
		crop, full []time.Duration // per stage, per position, 0 = not measured
		n          [2]int          // positions measured on crops, on full tensors
	}
}

// incrementalMinGain is how much cheaper cropping must be predicted to be
// before a stage runs on crops, against the noise of the measurement.
const incrementalMinGain = 0.97

// incrementalMinSaved is the least number of multiply-accumulates the crops
// must be predicted to save before the sub-models are cut and opened (a
// variable for tests of the measured choice on small networks).
var incrementalMinSaved = 4e9

// incrementalForce, when not negative, skips the measurement and runs that
// many stages (at most all) on crops: for tests, which must exercise the
// crops whatever this machine's timings say.
var incrementalForce = -1

// newIncremental prepares incremental occlusion for the positions ys × xs,
// or says why it cannot help (nil, reason). An error is returned only for a
// failure of the runtime or a cancellation.
func newIncremental(ctx context.Context, s *infer.Session, set viz.OcclusionSettings, base, fill []float32,
	ys, xs []int) (*incremental, string, error) {
	m := s.Model()
	if m == nil {
		return nil, "no model behind the session", nil
	}
	stages, why := m.Stages()
	if len(stages) == 0 {
		return nil, "the graph has no stage to cut before the first operator that is not tracked: " + why, nil
	}
	inc := &incremental{main: s, ys: ys, xs: xs, patch: set.Patch, in: stages[0].In(), base: base, fill: fill, k: -1}
	if !layoutOK(inc.in) {
		return nil, "the input's layout is neither NCHW nor NHWC", nil
	}
	var wins [2][]span
	for a, ps := range [2][]int{ys, xs} {
		for _, p := range ps {
			wins[a] = append(wins[a], span{p, p + set.Patch - 1})
		}
	}
	for _, st := range stages {
		if !layoutOK(st.Out()) {
			break
		}
		var ax [2]axisPlan
		ok := true
		for a := range 2 {
			if ax[a], ok = planAxis(st, a, wins[a]); !ok {
				break
			}
		}
		if !ok || (ax[0].n == st.In().Height() && ax[1].n == st.In().Width()) {
			break // the crops would be the whole map
		}
		inc.stages = append(inc.stages, &incStage{st: st, ax: ax})
		wins = [2][]span{ax[0].win, ax[1].win}
	}
	if len(inc.stages) == 0 {
		return nil, "the patch's changed window covers the whole map already in the first stage", nil
	}
	// Opening the sub-models' sessions costs about as much as a few
	// hundred million multiply-accumulates on a laptop core: a model
	// whose crops would save less runs every occluded image.
	var saved, total float64
	npos := float64(len(ys) * len(xs))
	for _, l := range m.Layers {
		total += float64(max(l.MACs, 0)) * npos
	}
	for _, is := range inc.stages {
		out := is.st.Out()
		frac := float64(is.ax[0].outN*is.ax[1].outN) / float64(out.Height()*out.Width())
		saved += float64(is.st.MACs) * npos * (1 - frac)
	}
	if saved < incrementalMinSaved && incrementalForce < 0 {
		return nil, fmt.Sprintf("too little to gain: crops would save %.2g of %.2g multiply-accumulates, less than opening the sub-models costs", saved, total), nil
	}
	// Sessions: one per stage with open spatial sizes, and the rest of
	// the network from the last stage's output.
	fail := func(err error) (*incremental, string, error) {
		inc.close()
		if ctx.Err() != nil {
			return nil, "", ctx.Err()
		}
		return nil, "the graph could not be cut: " + err.Error(), nil
	}
	// The sub-models' sessions are kept with s (infer.Session.Keep): cutting
	// them and opening them costs seconds on a large network, and the next
	// heatmap on the same session needs the same ones.
	for _, is := range inc.stages {
		in, out := is.st.In(), is.st.Out()
		var err error
		if is.sess, err = keptSession(s, "occlusion stage "+in.Name+" -> "+out.Name, func() (*modelio.Model, infer.Options, error) {
			sub, err := m.SubModel([]modelio.SubInput{{Name: in.Name, Symbolic: []int{in.HAxis, in.WAxis}}}, []string{out.Name})
			return sub, infer.Options{NoSpin: true, Release: true}, err
		}); err != nil {
			return fail(err)
		}
	}
	inc.restIn = inc.stages[len(inc.stages)-1].st.Out().Name
	var err error
	if inc.rest, err = keptSession(s, "occlusion rest "+inc.restIn, func() (*modelio.Model, infer.Options, error) {
		var outs []string
		for _, v := range m.Outputs {
			if v.ElemType == "" || v.ElemType == "float32" {
				outs = append(outs, v.Name)
			}
		}
		sub, err := m.SubModel([]modelio.SubInput{{Name: inc.restIn}}, outs)
		// The rest returns what the model's own session returns: its
		// outputs and the logits behind a final softmax (OcclusionCapture).
		return sub, infer.Options{NoSpin: true, Release: true, Capture: OcclusionCapture(m)}, err
	}); err != nil {
		return fail(err)
	}
	// The clean pass.
	prev := base
	for _, is := range inc.stages {
		res, err := runOne(ctx, is.sess, is.st.In(), 1, prev)
		if err != nil {
			return fail(err)
		}
		is.clean = res
		prev = res
	}
	inc.batch = max(1, s.BatchSize())
	inc.fixedBatch = m.Image.BatchFixed > 0
	// A chunk of positions: enough crops per call to hide the runtime's
	// per-call overhead, few enough that their crops stay small.
	var perPos int
	for _, is := range inc.stages {
		perPos += 4 * (volume(is.st.In(), is.ax[0].n, is.ax[1].n) + volume(is.st.Out(), is.ax[0].outN, is.ax[1].outN))
	}
	inc.chunk = max(inc.batch, min(64, (256<<20)/max(1, perPos)))
	inc.chunk = (inc.chunk + inc.batch - 1) / inc.batch * inc.batch
	inc.cost.crop = make([]time.Duration, len(inc.stages))
	inc.cost.full = make([]time.Duration, len(inc.stages))
	return inc, "", nil
}

// fullBatch is how many positions run through the full maps from stage k
// on (and the rest of the network) in one call. More than the model's own
// batch when memory allows: a VGG-16-sized network opens with a batch of
// 1 (its first maps are large), but from its last cropped stage on the maps
// are small, and its fully connected layers, 0.5 GB of weights, cost
// mostly reading those weights, once per call whatever the batch: 21 ms
// per position in calls of 1 position. A model whose batch is fixed keeps
// it.
func (inc *incremental) fullBatch(k int) int {
	if inc.fixedBatch {
		return inc.batch
	}
	K := len(inc.stages)
	t := inc.stages[K-1].st.Out()
	if k < K {
		t = inc.stages[k].st.In()
	}
	vol := volume(t, t.Height(), t.Width())
	for i := k; i < K; i++ {
		o := inc.stages[i].st.Out()
		vol = max(vol, volume(o, o.Height(), o.Width()))
	}
	// The input, the largest map and one more, in float32, within the
	// memory one chunk of a session may use (infer's chunk budget).
	return max(inc.batch, min(inc.chunk, (64<<20)/max(1, 12*vol)))
}

func layoutOK(t modelio.StageTensor) bool {
	return (t.HAxis == 1 && t.WAxis == 2) || (t.HAxis == 0 && t.WAxis == 1)
}

// volume is the per-image element count of t with its image axes h × w.
func volume(t modelio.StageTensor, h, w int) int {
	s := slices.Clone(t.Shape)
	s[t.HAxis], s[t.WAxis] = int64(h), int64(w)
	return int(s[0] * s[1] * s[2])
}

// close releases what one Occlude call holds; the sessions stay with the
// model's session (keptSession).
func (inc *incremental) close() {}

// keptSession returns the session kept with s under key, opening it (the
// model and options from open) on first use.
func keptSession(s *infer.Session, key string, open func() (*modelio.Model, infer.Options, error)) (*infer.Session, error) {
	v, err := s.Keep(key, func() (any, error) {
		m, opt, err := open()
		if err != nil {
			return nil, err
		}
		return infer.NewSession(m, opt)
	})
	if err != nil {
		return nil, err
	}
	return v.(*infer.Session), nil
}

// runOne runs sess on n tensors shaped like t (its image axes as data's
// size implies) and returns its only output.
func runOne(ctx context.Context, sess *infer.Session, t modelio.StageTensor, n int, data []float32) ([]float32, error) {
	shape := append([]int64{int64(n)}, t.Shape...)
	per := len(data) / n
	// Image axes: whatever the caller cropped; the channel axis is fixed.
	other := 3 - t.HAxis - t.WAxis
	hw := per / int(t.Shape[other])
	if h, w := int(t.Shape[t.HAxis]), int(t.Shape[t.WAxis]); h*w != hw {
		return nil, fmt.Errorf("internal: crop of %d cells for a %d×%d map without its sizes", hw, h, w)
	}
	res, err := sess.RunTensors(ctx, []modelio.Tensor{{Name: t.Name, Shape: shape, Data: data}})
	if err != nil {
		return nil, err
	}
	return res.Outputs[0].Data, nil
}

// runShaped runs sess on n tensors of t's layout with image axes h × w.
func runShaped(ctx context.Context, sess *infer.Session, t modelio.StageTensor, n, h, w int, data []float32) ([]float32, error) {
	s := slices.Clone(t.Shape)
	s[t.HAxis], s[t.WAxis] = int64(h), int64(w)
	res, err := sess.RunTensors(ctx, []modelio.Tensor{{Name: t.Name, Shape: append([]int64{int64(n)}, s...), Data: data}})
	if err != nil {
		return nil, err
	}
	return res.Outputs[0].Data, nil
}

// view is one image's tensor, or a crop of it, in CHW or HWC layout: cell
// (y, x) of the view is whole-map cell (oy + y, ox + x).
type view struct {
	data    []float32
	c, h, w int
	hwc     bool
	oy, ox  int
}

func newView(t modelio.StageTensor, data []float32, h, w, oy, ox int) view {
	if t.HAxis == 0 {
		return view{data: data, c: int(t.Shape[2]), h: h, w: w, hwc: true, oy: oy, ox: ox}
	}
	return view{data: data, c: int(t.Shape[0]), h: h, w: w, oy: oy, ox: ox}
}

// copyRect copies the whole-map cells [y0, y1] × [x0, x1] (inside both
// views) from src to dst.
func copyRect(dst, src view, ry, rx span) {
	if ry.empty() || rx.empty() {
		return
	}
	nw := rx.hi - rx.lo + 1
	if dst.hwc {
		for y := ry.lo; y <= ry.hi; y++ {
			d := ((y-dst.oy)*dst.w + rx.lo - dst.ox) * dst.c
			s := ((y-src.oy)*src.w + rx.lo - src.ox) * src.c
			copy(dst.data[d:d+nw*dst.c], src.data[s:s+nw*src.c])
		}
		return
	}
	for ch := 0; ch < dst.c; ch++ {
		for y := ry.lo; y <= ry.hi; y++ {
			d := (ch*dst.h+y-dst.oy)*dst.w + rx.lo - dst.ox
			s := (ch*src.h+y-src.oy)*src.w + rx.lo - src.ox
			copy(dst.data[d:d+nw], src.data[s:s+nw])
		}
	}
}

// rows computes the class scores of every position (row-major over ys ×
// xs) and calls done after each chunk with the number of positions done.
func (inc *incremental) rows(ctx context.Context, score func(p int, res *infer.Result, i int) error, done func(int)) error {
	npos := len(inc.ys) * len(inc.xs)
	K := len(inc.stages)
	chunkNo := 0
	if incrementalForce >= 0 && inc.k < 0 {
		inc.k, inc.why = min(incrementalForce, K), "forced"
	}
	for start := 0; start < npos; {
		if err := ctx.Err(); err != nil {
			return err
		}
		// The measurement on full maps costs as much per position as
		// running every image: it takes one batch of the model's own size,
		// not a whole chunk.
		size := inc.chunk
		if inc.k < 0 && chunkNo == 1 {
			size = inc.batch
		}
		pos := make([]int, 0, size)
		for p := start; p < min(npos, start+size); p++ {
			pos = append(pos, p)
		}
		start += len(pos)
		k := inc.k
		switch {
		case k >= 0:
		case chunkNo == 0:
			k = K // measure the crops
		case chunkNo == 1:
			k = 0 // measure the full tensors
		}
		if k < 0 {
			k = K
		}
		measure := inc.k < 0
		var err error
		if k == 0 && !measure {
			err = inc.reference(ctx, pos, score)
		} else {
			err = inc.chunkRun(ctx, pos, k, measure, score)
		}
		if err != nil {
			return err
		}
		if measure && chunkNo == 1 {
			inc.choose()
		}
		chunkNo++
		done(start)
	}
	if inc.k < 0 {
		inc.k, inc.why = K, fmt.Sprintf("all positions fit in one chunk; %d stages on crops", K)
	}
	return nil
}

// choose picks the number of stages run on crops from the measured costs
// per position: the first k stages on crops and the others on full maps
// cost crop_1 + … + crop_k + full_k+1 + … + full_K (the rest of the network
// costs the same whatever k). Cropping must win by a margin.
func (inc *incremental) choose() {
	cost := func(k int) time.Duration {
		var c time.Duration
		for i := range inc.stages {
			if i < k {
				c += inc.cost.crop[i]
			} else {
				c += inc.cost.full[i]
			}
		}
		return c
	}
	best := 0
	for k := 1; k <= len(inc.stages); k++ {
		if cost(k) < cost(best) {
			best = k
		}
	}
	if float64(cost(best)) >= incrementalMinGain*float64(cost(0)) {
		best = 0
	}
	inc.k = best
	if best == 0 {
		inc.why = fmt.Sprintf("measured: the stages cost %s per position on crops against %s on full maps; running every occluded image",
			cost(len(inc.stages)).Round(time.Microsecond), cost(0).Round(time.Microsecond))
		return
	}
	inc.why = fmt.Sprintf("measured: %d of %d stages on crops, %s per position against %s on full maps",
		best, len(inc.stages), cost(best).Round(time.Microsecond), cost(0).Round(time.Microsecond))
}

func sumD(ds []time.Duration) time.Duration {
	var t time.Duration
	for _, d := range ds {
		t += d
	}
	return t.Round(time.Microsecond)
}

// reference runs the positions as Occlude's reference method does: every
// occluded image through the model's own session.
func (inc *incremental) reference(ctx context.Context, pos []int, score func(int, *infer.Result, int) error) error {
	size := len(inc.base)
	for i := 0; i < len(pos); i += inc.batch {
		part := pos[i:min(len(pos), i+inc.batch)]
		buf := make([]float32, len(part)*size)
		for j, p := range part {
			inc.occluded(buf[j*size:(j+1)*size], p)
		}
		res, err := inc.main.Run(ctx, buf, len(part))
		if err != nil {
			return err
		}
		for j, p := range part {
			if err := score(p, res, j); err != nil {
				return err
			}
		}
	}
	return nil
}

// occluded writes the occluded image of position p into dst.
func (inc *incremental) occluded(dst []float32, p int) {
	copy(dst, inc.base)
	h, w := inc.in.Height(), inc.in.Width()
	y, x := inc.ys[p/len(inc.xs)], inc.xs[p%len(inc.xs)]
	copyRect(newView(inc.in, dst, h, w, 0, 0), newView(inc.in, inc.fill, h, w, 0, 0),
		span{y, y + inc.patch - 1}, span{x, x + inc.patch - 1})
}

// chunkRun runs the positions pos with the first k stages on crops and the
// rest on full tensors, timing each stage when measure.
func (inc *incremental) chunkRun(ctx context.Context, pos []int, k int, measure bool, score func(int, *infer.Result, int) error) error {
	n := len(pos)
	nx := len(inc.xs)
	// Crops: prev holds, per position, the view of the previous stage's
	// output crop and the window that differs from the clean map.
	h0, w0 := inc.in.Height(), inc.in.Width()
	prev := make([]view, n)
	pwin := make([][2]span, n)
	for j, p := range pos {
		prev[j] = newView(inc.in, inc.fill, h0, w0, 0, 0)
		y, x := inc.ys[p/nx], inc.xs[p%nx]
		pwin[j] = [2]span{{y, y + inc.patch - 1}, {x, x + inc.patch - 1}}
	}
	clean, cleanT := inc.base, inc.in
	for i := 0; i < k; i++ {
		t0 := time.Now()
		is := inc.stages[i]
		in, out := is.st.In(), is.st.Out()
		ch, cw := is.ax[0].n, is.ax[1].n
		per := volume(in, ch, cw)
		buf := grow(&is.buf, n*per)
		full := newView(cleanT, clean, cleanT.Height(), cleanT.Width(), 0, 0)
		parallel(n, per, func(j int) {
			p := pos[j]
			yi, xi := p/nx, p%nx
			crop := newView(in, buf[j*per:(j+1)*per], ch, cw, is.ax[0].start[yi], is.ax[1].start[xi])
			ry, rx := span{crop.oy, crop.oy + ch - 1}, span{crop.ox, crop.ox + cw - 1}
			copyRect(crop, full, ry, rx)
			copyRect(crop, prev[j], pwin[j][0].meet(ry), pwin[j][1].meet(rx))
		})
		res, err := runShaped(ctx, is.sess, in, n, ch, cw, buf)
		if err != nil {
			return err
		}
		oh, ow := is.ax[0].outN, is.ax[1].outN
		operN := volume(out, oh, ow)
		if len(res) != n*operN {
			return fmt.Errorf("viz: occlusion: stage output of %d values, expected %d", len(res), n*operN)
		}
		for j, p := range pos {
			yi, xi := p/nx, p%nx
			prev[j] = newView(out, res[j*operN:(j+1)*operN], oh, ow, is.ax[0].out[yi], is.ax[1].out[xi])
			pwin[j] = [2]span{is.ax[0].win[yi], is.ax[1].win[xi]}
		}
		clean, cleanT = is.clean, out
		if measure {
			inc.cost.crop[i] = time.Since(t0) / time.Duration(n)
		}
	}
	// Full tensors, in batches as large as memory allows (fullBatch).
	var durs []time.Duration
	if measure && k == 0 {
		durs = make([]time.Duration, len(inc.stages))
	}
	fh, fw := cleanT.Height(), cleanT.Width()
	per := len(clean)
	fb := inc.fullBatch(k)
	for b := 0; b < n; b += fb {
		m := min(fb, n-b)
		buf := grow(&inc.fullBuf, m*per)
		parallel(m, per, func(j int) {
			dst := newView(cleanT, buf[j*per:(j+1)*per], fh, fw, 0, 0)
			copy(dst.data, clean)
			copyRect(dst, prev[b+j], pwin[b+j][0], pwin[b+j][1])
		})
		data, t := buf, cleanT
		for i := k; i < len(inc.stages); i++ {
			t0 := time.Now()
			res, err := runOne(ctx, inc.stages[i].sess, t, m, data)
			if err != nil {
				return err
			}
			if durs != nil {
				durs[i] += time.Since(t0)
			}
			data, t = res, inc.stages[i].st.Out()
		}
		res, err := inc.rest.RunTensors(ctx, []modelio.Tensor{{Name: inc.restIn, Shape: append([]int64{int64(m)}, t.Shape...), Data: data}})
		if err != nil {
			return err
		}
		if res.N != m {
			return errors.New("viz: occlusion: the rest of the network returned a different batch")
		}
		for j := range m {
			if err := score(pos[b+j], res, j); err != nil {
				return err
			}
		}
	}
	if durs != nil {
		for i, d := range durs {
			inc.cost.full[i] = d / time.Duration(n)
		}
	}
	return nil
}

// grow returns (*buf)[:n], allocating only when the buffer is too small:
// fresh memory for every chunk costs page faults and collections that
// showed as a third of the crops' time on a VGG-16-sized network.
func grow(buf *[]float32, n int) []float32 {
	if cap(*buf) < n {
		*buf = make([]float32, n)
	}
	return (*buf)[:n]
}

// parallel calls f(0) … f(n-1), spread over the cores when the n items of
// per values each are worth it. The runtime waits meanwhile, so the copies
// have the cores to themselves.
func parallel(n, per int, f func(j int)) {
	w := min(runtime.GOMAXPROCS(0), n)
	if w < 2 || n*per < 1<<16 {
		for j := range n {
			f(j)
		}
		return
	}
	var wg sync.WaitGroup
	for g := range w {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for j := g; j < n; j += w {
				f(j)
			}
		}()
	}
	wg.Wait()
}
