package analysis

import "fovea/modelio"

// Interval arithmetic along one image axis of a stage (modelio.Stage), for
// incremental occlusion. Cells are whole-map indices; an interval [lo, hi]
// is empty when lo > hi. Every function works on one axis a (0 = height,
// 1 = width) and follows the stage's steps: a window step reads, for output
// cell o, input cells o·S − PadBegin … o·S − PadBegin + (K−1)·D (ONNX
// Operators.md, Conv and MaxPool); a pointwise step maps cell i to cell i.

type span struct{ lo, hi int }

func (s span) empty() bool { return s.lo > s.hi }

func (s span) union(t span) span {
	switch {
	case s.empty():
		return t
	case t.empty():
		return s
	}
	return span{min(s.lo, t.lo), max(s.hi, t.hi)}
}

func (s span) meet(t span) span { return span{max(s.lo, t.lo), min(s.hi, t.hi)} }

func (s span) contains(t span) bool { return t.empty() || (!s.empty() && s.lo <= t.lo && t.hi <= s.hi) }

var nothing = span{0, -1}

func floorDiv(a, b int) int {
	q := a / b
	if (a%b != 0) && ((a < 0) != (b < 0)) {
		q--
	}
	return q
}

func ceilDiv(a, b int) int { return -floorDiv(-a, b) }

func axisSize(t modelio.StageTensor, a int) int {
	if a == 0 {
		return t.Height()
	}
	return t.Width()
}

// changedOut is the window of the stage's output that can differ when the
// cells in window in of its input differ.
func changedOut(st modelio.Stage, a int, in span) span {
	ch := make([]span, len(st.Tensors))
	for i := range ch {
		ch[i] = nothing
	}
	ch[0] = in
	for _, s := range st.Steps {
		w := nothing
		for _, k := range s.In {
			w = w.union(ch[k])
		}
		if !w.empty() && s.Window {
			ext := (s.K[a] - 1) * s.D[a]
			w = span{ceilDiv(w.lo+s.PadBegin[a]-ext, s.S[a]), floorDiv(w.hi+s.PadBegin[a], s.S[a])}
		}
		ch[s.Out] = w.meet(span{0, axisSize(st.Tensors[s.Out], a) - 1})
	}
	return ch[len(ch)-1]
}

// needIn is the window of the stage's input that the output cells out
// depend on, clamped to the map (cells beyond it are padding).
func needIn(st modelio.Stage, a int, out span) span {
	nd := make([]span, len(st.Tensors))
	for i := range nd {
		nd[i] = nothing
	}
	nd[len(nd)-1] = out
	for j := len(st.Steps) - 1; j >= 0; j-- {
		s := st.Steps[j]
		w := nd[s.Out]
		if w.empty() {
			continue
		}
		if s.Window {
			w = span{w.lo*s.S[a] - s.PadBegin[a], w.hi*s.S[a] - s.PadBegin[a] + (s.K[a]-1)*s.D[a]}
		}
		for _, k := range s.In {
			nd[k] = nd[k].union(w.meet(span{0, axisSize(st.Tensors[k], a) - 1}))
		}
	}
	return nd[0]
}

// alignment is the step the crop of the stage's input must start on so
// that every window step's input crop starts on a multiple of its stride:
// the least common multiple of the cumulative strides.
func alignment(st modelio.Stage, a int) int {
	cum := make([]int, len(st.Tensors))
	cum[0] = 1
	A := 1
	for _, s := range st.Steps {
		c := 1
		for _, k := range s.In {
			c = max(c, cum[k])
		}
		if s.Window {
			c *= s.S[a]
			A = lcm(A, c)
		}
		cum[s.Out] = c
	}
	return A
}

func lcm(a, b int) int {
	x, y := a, b
	for y != 0 {
		x, y = y, x%y
	}
	return a / x * b
}

// cropRun is what running the stage on a crop of its input gives along one
// axis: the whole-map cells the output crop covers (start, n) and those of
// them that equal the uncropped run (valid).
type cropRun struct {
	start, n int
	valid    span
}

// simulate follows a crop of n cells of the stage's input starting at cell
// start through the stage, as the runtime computes it: each window step
// pads the crop's borders with its own padding, which is right only where
// the crop's border is the map's border. ok is false when a window step's
// crop does not start on its stride or merged crops differ.
func simulate(st modelio.Stage, a int, start, n int) (cropRun, bool) {
	runs := make([]cropRun, len(st.Tensors))
	runs[0] = cropRun{start, n, span{start, start + n - 1}}
	for _, s := range st.Steps {
		in := runs[s.In[0]]
		for _, k := range s.In[1:] {
			r := runs[k]
			if r.start != in.start || r.n != in.n {
				return cropRun{}, false
			}
			in.valid = in.valid.meet(r.valid)
		}
		if !s.Window {
			runs[s.Out] = in
			continue
		}
		size := axisSize(st.Tensors[s.In[0]], a)
		outSize := axisSize(st.Tensors[s.Out], a)
		str, pb, pe := s.S[a], s.PadBegin[a], s.PadEnd[a]
		ext := (s.K[a]-1)*s.D[a] + 1
		if in.start%str != 0 || in.n+pb+pe < ext {
			return cropRun{}, false
		}
		out := cropRun{start: in.start / str, n: (in.n+pb+pe-ext)/str + 1}
		if in.start+in.n == size && out.start+out.n != outSize {
			return cropRun{}, false
		}
		v := span{0, outSize - 1}
		if in.valid.empty() {
			v = nothing
		} else {
			if in.valid.lo > 0 {
				v.lo = ceilDiv(in.valid.lo+pb, str)
			}
			if in.valid.hi < size-1 {
				v.hi = floorDiv(in.valid.hi+pb-ext+1, str)
			}
		}
		out.valid = v.meet(span{out.start, out.start + out.n - 1})
		runs[s.Out] = out
	}
	return runs[len(runs)-1], true
}

// axisPlan is how one stage runs on crops along one axis, for every patch
// position along that axis.
type axisPlan struct {
	n     int    // crop length of the stage's input, the same for every position
	outN  int    // crop length of the output
	start []int  // per position: first input cell of the crop
	out   []int  // per position: first output cell of the output crop
	win   []span // per position: the output cells that can change
}

// planAxis plans the crops of stage st along axis a for the changed input
// windows in (one per position). Every crop has the same length, so that
// the crops of many positions run as one batch: the longest any position
// needs, made congruent to the map's size modulo the alignment so that a
// crop pushed against the map's far border still starts aligned. ok is
// false when the crops cannot be made exact.
func planAxis(st modelio.Stage, a int, in []span) (axisPlan, bool) {
	size := axisSize(st.In(), a)
	A := alignment(st, a)
	p := axisPlan{start: make([]int, len(in)), out: make([]int, len(in)), win: make([]span, len(in))}
	need := make([]span, len(in))
	for i, w := range in {
		p.win[i] = changedOut(st, a, w)
		need[i] = needIn(st, a, p.win[i])
		if need[i].empty() {
			return p, false
		}
		p.n = max(p.n, need[i].hi-floorDiv(need[i].lo, A)*A+1)
	}
	if p.n >= size {
		p.n = size
	} else {
		p.n = size - floorDiv(size-p.n, A)*A
	}
	for i := range in {
		p.start[i] = min(floorDiv(need[i].lo, A)*A, size-p.n)
		r, ok := simulate(st, a, p.start[i], p.n)
		if !ok || !r.valid.contains(p.win[i]) || (i > 0 && r.n != p.outN) {
			return p, false
		}
		p.outN, p.out[i] = r.n, r.start
	}
	return p, true
}
