package analysis

import (
	"context"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"runtime"
	"slices"
	"sync"
	"sync/atomic"
	"time"

	"fovea/modelio"
	"fovea/modelio/infer"
	"fovea/modelio/prep"
)

// FlagNotFinite marks a channel whose maps held NaN or infinite values: a
// broken model rather than a dead filter. Its Max and Mean are reported as
// 0 (JSON has no NaN).
const FlagNotFinite modelio.Flag = "not_finite"

// DefaultRare is the fraction of probe images under which a channel that
// does fire is flagged rare.
const DefaultRare = 0.01

// ScanOptions are the knobs of a dead-filter scan. The zero value is usable.
type ScanOptions struct {
	// Rare: a channel firing on a fraction of the images below this (but
	// above 0) is flagged rare. 0 means DefaultRare.
	Rare float64
	// SkipUnreadable: a probe file that cannot be loaded is recorded in
	// ScanReport.Skipped and the scan goes on. By default the scan stops with
	// an error naming the file.
	SkipUnreadable bool
	// Workers is the number of goroutines decoding and preparing the probe
	// images (FeedOptions.Workers); a quarter as many, each taking whole
	// channels, gather the statistics of a batch. 0 means one per
	// GOMAXPROCS. The report does not depend on it.
	Workers int
	// FS, when not nil, holds the probe files: Scan's file names are io/fs
	// paths inside it (the embedded demo's probe images, for example).
	// nil means the names are paths of the operating system's files.
	FS fs.FS
	// TopK is the number of strongest probe images kept per channel
	// (ChannelScan.Top); 0 means DefaultTopK, below 0 none.
	TopK int
	// Layers names further layers to scan besides the ReLU-like
	// activations (node or output tensor names): any layer whose output
	// carries channels on axis 1, e.g. a pooling, a Conv or a Sigmoid, for
	// the strongest patches of a layer the default scan does not cover. Their
	// firing counts values above 0 as for the activations, and they get no
	// kernel flags, bias or pre-activation. The session must read their
	// outputs too (ScanSession's extra argument).
	Layers []string
	// Labels, when not nil, gives the class of each probe file (by the
	// name in the file list); the report then has each channel's firing
	// per class (ChannelScan.PerClass). Files without an entry count in
	// no class.
	Labels map[string]string
}

// ScanReport is the result of a dead-filter scan. Its JSON form is the one
// the command line documents:
//
//	{"images": 200, "layers": [{"name": "relu1", "channels": [{"index": 0,
//	  "fires": 1, "max": 3.2, "mean": 0.41, "flags": []}, ...]}, ...]}
type ScanReport struct {
	Images  int      `json:"images"`            // probe images that went through the model
	Skipped []string `json:"skipped,omitempty"` // unreadable files passed over (ScanOptions.SkipUnreadable)
	Rare    float64  `json:"rare"`              // the rare threshold in force
	// Classes are the probe classes (ScanOptions.Labels), sorted, in the
	// order of every ChannelScan.PerClass.
	Classes []string    `json:"classes,omitempty"`
	Layers  []ScanLayer `json:"layers"`
	// FS is ScanOptions.FS: where the files named in the report (the
	// strongest images) are opened; nil for paths of the operating system.
	FS fs.FS `json:"-"`
	// Stages says where the scan's time went (for --verbose); it is not
	// part of the result and differs from run to run.
	Stages Stages    `json:"-"`
	part   *ScanPart // the counts behind the report (ScanReport.Part)
}

// ScanLayer is the scan of one activation layer.
type ScanLayer struct {
	Name     string        `json:"name"`           // the activation's node name
	Output   string        `json:"output"`         // its output tensor
	Conv     string        `json:"conv,omitempty"` // the Conv whose kernels feed it, when there is one
	Channels []ChannelScan `json:"channels"`
	// Layer is the layer's row of the model's table (its geometry gives the
	// patches' boxes); MapH, MapW the size of its maps (1×1 for vectors).
	Layer      modelio.Layer `json:"-"`
	MapH, MapW int           `json:"-"`
}

// ChannelScan is the scan of one channel: Fires is the fraction of images on
// which any value of the channel's map was > 0, Max and Mean are taken over
// all positions of all images. Flags, in this order, among:
//
//	FlagDead        fired on no image
//	FlagRare        fired, but on a fraction of the images below ScanOptions.Rare
//	FlagConstant    fired, and had one and the same value at every position of every image
//	                (a dead channel is constant too, at 0, but is flagged dead only)
//	FlagZeroKernel  the feeding Conv's filter is zero (KernelFlags)
//	FlagDuplicate   the feeding Conv's filter nearly repeats another one (KernelFlags)
//	FlagNotFinite   NaN or ±Inf values were seen: Max and Mean then read 0 and
//	                this flag replaces dead, rare and constant
//
// Flags is never nil, so that JSON shows [] for a healthy channel.
type ChannelScan struct {
	Index int            `json:"index"`
	Fires float64        `json:"fires"`
	Max   float64        `json:"max"`
	Mean  float64        `json:"mean"`
	Flags []modelio.Flag `json:"flags"`
	// Why a channel is dead or rare (see strongest_scan.go): the bias of
	// the Conv feeding the activation directly (absent with a
	// normalisation between, or no Conv), and the largest value the
	// activation's input reached on the probes: measured for a channel that
	// never fired, equal to Max for one that did after an activation that
	// passes positive values unchanged (Relu, LeakyRelu, ...), absent
	// otherwise and when the session did not capture the input
	// (PreActivationCapture).
	Bias             *float64 `json:"bias,omitempty"`
	MaxPreActivation *float64 `json:"max_preactivation,omitempty"`
	// PerClass is the firing per probe class (ScanOptions.Labels), in the
	// order of ScanReport.Classes; SelectiveFor and Selectivity the class
	// with the highest mean value and the Selectivity index.
	PerClass     []ClassRate `json:"per_class,omitempty"`
	SelectiveFor string      `json:"selective_for,omitempty"`
	Selectivity  float64     `json:"selectivity,omitempty"`
	// Top are the strongest probe images, best first (ScanOptions.TopK).
	Top []Patch `json:"-"`
}

// ScanCapture returns the tensors Scan reads: the outputs of the ReLU-like
// layers (modelio.Model.ReluLayers). A session returns them whole when
// they are captured (infer.Options.Capture) or as per-channel figures when
// they are summarised in the graph (infer.Options.Summarise); ScanSession
// chooses.
func ScanCapture(m *modelio.Model) []string {
	return modelio.OutputsOf(m.ReluLayers())
}

// LayerOutputs returns the output tensors of the named layers (node or
// output names, as ScanOptions.Layers), or an error naming the first that
// the model does not have.
func LayerOutputs(m *modelio.Model, names []string) ([]string, error) {
	var outs []string
	for _, name := range names {
		i := slices.IndexFunc(m.Layers, func(l modelio.Layer) bool { return l.Name == name || l.Output == name })
		if i < 0 {
			return nil, fmt.Errorf("viz: scan: %s has no layer %q", m.Name, name)
		}
		outs = append(outs, m.Layers[i].Output)
	}
	return outs, nil
}

// channelAcc accumulates one channel's statistics over images.
type channelAcc struct {
	fires  int      // images on which some value was > 0
	max    float64  // largest value so far
	sum    exactSum // sum of all values so far, exact (shards merge to the same sum)
	first  float32  // the first value seen
	varies bool     // some value differed from first
}

// layerAcc accumulates one layer: the channel axis is 1 (ONNX's NCHW
// convention for every op after a Conv), the rest after it are positions.
type layerAcc struct {
	layer    modelio.Layer
	conv     int  // index into m.Layers, -1 when none
	relu     bool // a ReLU-like activation (not one of ScanOptions.Layers only)
	channels []channelAcc
	spatial  int            // positions per channel map, fixed by the first batch
	summary  bool           // the maps come summarised in the graph, not whole
	cur      modelio.Tensor // the batch being added: its maps or their summaries
	values   int            // values seen per channel
	extras                  // strongest images, per-class firing, pre-activations
}

// check validates the maps of a batch of n images against the layer and,
// on the first batch, sizes the accumulators; it returns the number of
// channels and the positions per channel map. The maps come whole, or
// summarised in the graph (modelio.SummaryName, see ScanSession): then
// the layer's dimensions are the model's (modelio.Model.SummaryDims).
func (a *layerAcc) check(m *modelio.Model, maps map[string]modelio.Tensor, n int) (c, sp int, err error) {
	t, whole := maps[a.layer.Output]
	if !whole {
		var ok bool
		if t, ok = maps[modelio.SummaryName(a.layer.Output)]; !ok {
			return 0, 0, fmt.Errorf("viz: scan: the session does not capture %q (create it with ScanSession)", a.layer.Output)
		}
	}
	if len(t.Shape) < 2 || t.Shape[0] != int64(n) {
		return 0, 0, fmt.Errorf("viz: scan: activation %q has shape %v for a batch of %d images; want [N][C]...", a.layer.Output, t.Shape, n)
	}
	c = int(t.Shape[1])
	var shape []int64 // per image, after the channels
	if whole {
		shape = t.Shape[2:]
	} else {
		var dims []int64
		ok := m != nil
		if ok {
			dims, ok = m.SummaryDims(a.layer.Output)
		}
		if !ok || len(t.Shape) != 3 || t.Shape[2] != modelio.SummaryWidth || dims[0] != int64(c) {
			return 0, 0, fmt.Errorf("viz: scan: the summary of %q has shape %v; want [%d][C][%d]", a.layer.Output, t.Shape, n, modelio.SummaryWidth)
		}
		shape = dims[1:]
	}
	sp = 1
	for _, d := range shape {
		sp *= int(d)
	}
	width := sp
	if !whole {
		width = modelio.SummaryWidth
	}
	if c <= 0 || sp <= 0 || len(t.Data) != n*c*width {
		return 0, 0, fmt.Errorf("viz: scan: activation %q: shape %v does not match its %d values", a.layer.Output, t.Shape, len(t.Data))
	}
	if a.channels == nil {
		a.channels = make([]channelAcc, c)
		for i := range a.channels {
			// Whole maps: the first value; summaries: the first image's
			// largest value (equal to the first value for a constant channel).
			a.channels[i] = channelAcc{max: math.Inf(-1), first: t.Data[i*width]}
		}
		a.spatial, a.summary = sp, !whole
		a.mapH, a.mapW = 1, 1
		switch len(shape) {
		case 1:
			a.mapW = int(shape[0])
		case 2:
			a.mapH, a.mapW = int(shape[0]), int(shape[1])
		}
		a.sizeExtras(c)
	} else if c != len(a.channels) || sp != a.spatial || whole == a.summary {
		return 0, 0, fmt.Errorf("viz: scan: activation %q changed shape between batches (%v)", a.layer.Output, t.Shape)
	}
	a.cur = t
	return c, sp, nil
}

// addChannels adds channels [lo, hi) of a checked batch of n images, image
// after image. Each channel's accumulator is touched by one call only, so
// disjoint ranges may run at once and give the same sums, in the same
// order, as one call over all channels.
func (a *layerAcc) addChannels(n, lo, hi int) {
	if a.summary {
		a.addSummaries(n, lo, hi)
		return
	}
	t := a.cur
	c, sp := len(a.channels), a.spatial
	for img := 0; img < n; img++ {
		for ch := lo; ch < hi; ch++ {
			m := t.Data[(img*c+ch)*sp : (img*c+ch+1)*sp]
			mx, sum := mapStats(m)
			acc := &a.channels[ch]
			if mx > 0 {
				acc.fires++
			}
			if float64(mx) > acc.max || mx != mx {
				acc.max = float64(mx)
			}
			acc.sum.add(sum)
			a.addExtras(img, ch, m, mx, sum, 0)
			if !acc.varies {
				// Only channels that have looked constant so far are
				// compared value by value; most stop at the first value.
				for _, v := range m {
					if v != acc.first {
						acc.varies = true
						break
					}
				}
			}
		}
	}
}

// addSummaries is addChannels for maps summarised in the graph: the same
// figures, read from four numbers per channel. The sum is the runtime's
// float32 sum of the map (whole maps: float32 over blocks of 256 values,
// then float64), so means may differ in their last digits between the two.
func (a *layerAcc) addSummaries(n, lo, hi int) {
	const w = modelio.SummaryWidth
	t := a.cur
	c := len(a.channels)
	for img := 0; img < n; img++ {
		for ch := lo; ch < hi; ch++ {
			row := t.Data[(img*c+ch)*w : (img*c+ch+1)*w]
			mx, mn, sum := row[modelio.SummaryMax], row[modelio.SummaryMin], float64(row[modelio.SummarySum])
			acc := &a.channels[ch]
			if mx > 0 {
				acc.fires++
			}
			if float64(mx) > acc.max || mx != mx {
				acc.max = float64(mx)
			}
			acc.sum.add(sum)
			a.addExtras(img, ch, nil, mx, sum, int(row[modelio.SummaryArg]))
			if !acc.varies && (mn != mx || mx != acc.first || sum != sum) {
				acc.varies = true
			}
		}
	}
}

// statParts is the number of goroutines that gather a batch's statistics
// in a scan with the given decoding workers: one per four. The statistics
// are a small share of a scan's work (2-10 % of the wall time of the demo
// scan on 2 cores), so splitting them pays only where many cores would
// otherwise wait for one goroutine; on 2 cores two goroutines made the demo
// scan slower (median scan/plain 0.70 against 0.79 over six interleaved
// runs of BenchmarkScanCores/cores2/demo on a loaded machine), taking the
// cores from the model.
func statParts(workers int) int { return max(1, workers/4) }

// statPart is one share of a batch's statistics: channels [lo, hi) of one
// layer.
type statPart struct {
	acc    *layerAcc
	lo, hi int
}

// addParallel adds the maps of a batch of n images to the layers'
// statistics on up to parts goroutines, each taking whole channels (see
// addChannels), so the result does not depend on parts.
func addParallel(m *modelio.Model, accs []*layerAcc, maps map[string]modelio.Tensor, n, parts int) error {
	return addBatch(m, accs, maps, batchInfo{n: n}, parts)
}

// addBatch is addParallel with the files and classes of the batch, for the
// strongest images and the per-class firing.
func addBatch(m *modelio.Model, accs []*layerAcc, maps map[string]modelio.Tensor, bi batchInfo, parts int) error {
	n := bi.n
	total := 0
	for _, a := range accs {
		c, sp, err := a.check(m, maps, n)
		if err != nil {
			return err
		}
		if err := a.startBatch(maps, bi); err != nil {
			return err
		}
		total += c * sp
	}
	if parts <= 1 {
		for _, a := range accs {
			a.addChannels(n, 0, len(a.channels))
			a.values += n * a.spatial
		}
		return nil
	}
	// Cut the channels into about parts shares of equal size in values; a
	// share does not cross a layer.
	share := max(1, (total+parts-1)/parts)
	var work []statPart
	for _, a := range accs {
		per := max(1, share/a.spatial) // channels per share in this layer
		for lo := 0; lo < len(a.channels); lo += per {
			work = append(work, statPart{a, lo, min(lo+per, len(a.channels))})
		}
	}
	var wg sync.WaitGroup
	next := atomic.Int64{}
	for range min(parts, len(work)) {
		wg.Go(func() {
			for {
				i := int(next.Add(1)) - 1
				if i >= len(work) {
					return
				}
				w := work[i]
				w.acc.addChannels(n, w.lo, w.hi)
			}
		})
	}
	wg.Wait()
	for _, a := range accs {
		a.values += n * a.spatial
	}
	return nil
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// convFlags are the kernel flags of one Conv with M filters.
type convFlags struct {
	m     int
	flags map[int][]modelio.Flag
	bias  []float32 // nil when the Conv has none
}

// kernelFlags returns the kernel flags of every Conv feeding a scanned layer, by
// layer index, checking ctx between convolutions. A Conv whose kernels
// cannot be read is left out (its layer gets no Conv).
func kernelFlags(ctx context.Context, m *modelio.Model, accs []*layerAcc) map[int]convFlags {
	out := map[int]convFlags{}
	for _, a := range accs {
		if a.conv < 0 {
			continue
		}
		if _, ok := out[a.conv]; ok {
			continue
		}
		if ctx.Err() != nil {
			return out
		}
		// Kept with the model (modelio.Model.KernelFlags): a rescan reads them back.
		if flags, filters, err := m.KernelFlags(m.Layers[a.conv].Name); err == nil {
			out[a.conv] = convFlags{m: filters, flags: flags, bias: convBias(m, a.conv)}
		}
	}
	return out
}

// statJob is a run's result waiting for its statistics.
type statJob struct {
	res *infer.Result
	n   int
	bi  batchInfo
}

// accumulate adds the maps of each job to the layers' statistics and hands
// the result back for the next run, adding the time it took to *busy. It
// stops at the end of jobs, at the first error (sent on errc) or when ctx is
// cancelled.
func accumulate(ctx context.Context, m *modelio.Model, accs []*layerAcc, parts int, gate *coreGate, jobs <-chan statJob, results chan<- *infer.Result, errc chan<- error, busy *time.Duration) {
	for {
		var j statJob
		var ok bool
		select {
		case j, ok = <-jobs:
			if !ok {
				return
			}
		case <-ctx.Done():
			return
		}
		var err error
		gate.work(func() {
			t0 := time.Now()
			err = addBatch(m, accs, j.res.Maps, j.bi, parts)
			*busy += time.Since(t0)
		})
		if err != nil {
			errc <- err
			return
		}
		results <- j.res // never blocks: at most two results circulate
	}
}

// Scan runs the probe files through the model and reports, for each channel
// of each ReLU-like activation layer (modelio.Model.ReluLayers), how often it fires, its
// largest and mean value, and flags: dead, rare, constant, and from the Conv
// kernels feeding it (KernelFlags) zero_kernel and duplicate.
//
// s must read the activations: create it with ScanSession(m, dims), which
// has them summarised in the graph where it can (or with
// infer.Options{Capture: ScanCapture(m)}, which returns them whole for the
// statistics to be gathered in Go). Files are decoded and prepared by
// a Feed (o.Workers goroutines) in batches of s.BatchSize() while the model
// runs on an earlier batch and the statistics of the batch before are
// gathered meanwhile (on o.Workers/4 goroutines, at least one, each
// taking whole channels); another goroutine compares the Conv kernels. The
// batches are handled in file order, so the report is the same, bit for bit,
// whatever the number of workers. Memory does not depend on the number of
// files: a few batches of images and two of activation maps exist at any
// time. progress, when not nil, gets the number of files done and the
// total. A cancelled ctx makes Scan return ctx.Err() promptly (after the
// batch in the model, and at most one Conv's kernel comparison), with all
// its goroutines finished.
//
// A file that cannot be loaded stops the scan with an error naming it,
// unless o.SkipUnreadable is set, in which case it is listed in
// ScanReport.Skipped and does not count as an image.
func Scan(ctx context.Context, s *infer.Session, m *modelio.Model, c prep.Config, files []string, o ScanOptions,
	progress func(done, total int)) (*ScanReport, error) {
	start := time.Now()
	rare := o.Rare
	if rare == 0 {
		rare = DefaultRare
	}
	if !(rare > 0 && rare <= 1) {
		return nil, fmt.Errorf("viz: scan: rare threshold %g: must be in (0, 1]", o.Rare)
	}
	if len(files) == 0 {
		return nil, errors.New("viz: scan: no probe images")
	}
	if err := c.Validate(); err != nil {
		return nil, fmt.Errorf("viz: scan: %w", err)
	}
	if o.Workers < 0 {
		return nil, fmt.Errorf("viz: scan: %d decoding workers: want 0 (automatic) or more", o.Workers)
	}
	var accs []*layerAcc
	scanned := ScanCapture(m)
	extra, err := LayerOutputs(m, o.Layers)
	if err != nil {
		return nil, err
	}
	for i, l := range m.Layers {
		switch {
		case slices.Contains(scanned, l.Output):
			accs = append(accs, &layerAcc{layer: l, conv: m.FeedingConv(i), relu: true})
		case slices.Contains(extra, l.Output):
			accs = append(accs, &layerAcc{layer: l, conv: -1})
		}
	}
	if len(accs) == 0 {
		return nil, fmt.Errorf("viz: scan: %s has no ReLU-like activation layer to scan", m.Name)
	}
	xt, err := setupExtras(m, accs, o)
	if err != nil {
		return nil, err
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}

	// A pipeline: the Feed's workers fill input batches, this goroutine
	// runs the model, the statistics goroutine reads the maps of the
	// previous batch meanwhile. Results (two: one being run, one being
	// read) circulate, so memory does not grow with the files.
	size := c.Len()
	bs := max(1, min(s.BatchSize(), len(files)))
	ctx2, cancel := context.WithCancel(ctx)
	// When the runtime's threads take every core, the model and the Go
	// work take turns (coreGate), and one result circulates: the
	// statistics of a batch are gathered before the next run starts.
	var gate *coreGate
	circulating := 2
	if s.Threads() >= runtime.GOMAXPROCS(0) {
		gate, circulating = &coreGate{}, 1
	}
	feed := NewFeed(ctx2, files, c, FeedOptions{FS: o.FS, Batch: bs, Workers: o.Workers, SkipUnreadable: o.SkipUnreadable, gate: gate})
	results := make(chan *infer.Result, 2)
	for range circulating {
		results <- nil // RunInto allocates them
	}
	jobs := make(chan statJob, 1)
	statErr := make(chan error, 1)
	statsDone := make(chan struct{})
	var summarise time.Duration // written by the statistics goroutine, read after statsDone

	var wg sync.WaitGroup
	defer func() {
		cancel()
		feed.Close()
		wg.Wait()
	}()
	wg.Add(1)
	go func() {
		defer wg.Done()
		defer close(statsDone)
		accumulate(ctx2, m, accs, statParts(feed.Workers()), gate, jobs, results, statErr, &summarise)
	}()
	// The kernel flags depend on the weights only; on large convolutions
	// the pairwise comparison takes a while, so it runs beside the images.
	var kernels map[int]convFlags
	kernelsDone := make(chan struct{})
	wg.Add(1)
	go func() {
		defer wg.Done()
		defer close(kernelsDone)
		kernels = kernelFlags(ctx2, m, accs)
	}()

	rep := &ScanReport{Rare: rare, Classes: xt.classes}
	st := &rep.Stages
	st.Workers = feed.Workers()
	if progress != nil {
		progress(0, len(files))
	}
	fail := func(err error) (*ScanReport, error) {
		if ctx.Err() != nil {
			return nil, ctx.Err()
		}
		return nil, err
	}
	for {
		t0 := time.Now()
		b, err := feed.Next()
		st.Wait += time.Since(t0)
		if err == io.EOF {
			break
		}
		if err != nil {
			return fail(fmt.Errorf("viz: scan: %w", err))
		}
		for _, sk := range b.Skipped {
			rep.Skipped = append(rep.Skipped, sk.File)
		}
		if b.N > 0 {
			var dst *infer.Result
			select {
			case dst = <-results:
			case err := <-statErr:
				return fail(err)
			case <-ctx.Done():
				return nil, ctx.Err()
			}
			t1 := time.Now()
			var res *infer.Result
			gate.run(func() { res, err = s.RunInto(ctx, b.Data[:b.N*size], b.N, dst) })
			st.Run += time.Since(t1)
			if err != nil {
				return fail(fmt.Errorf("viz: scan: %w", err))
			}
			select {
			case jobs <- statJob{res: res, n: b.N, bi: xt.batch(b.N, b.Files)}:
			case err := <-statErr:
				return fail(err)
			case <-ctx.Done():
				return nil, ctx.Err()
			}
			rep.Images += b.N
		}
		feed.Release(b)
		if progress != nil {
			progress(b.Done, len(files))
		}
	}
	close(jobs)
	for _, done := range []chan struct{}{statsDone, kernelsDone} {
		select {
		case <-done:
		case <-ctx.Done():
			return nil, ctx.Err()
		}
	}
	select {
	case err := <-statErr:
		return fail(err)
	default:
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	if rep.Images == 0 {
		return nil, fmt.Errorf("viz: scan: none of the %d probe files could be read", len(files))
	}
	st.Decode, st.Prepare = feed.Stages()
	st.Summarise = summarise
	out, err := scanPart(m, accs, kernels, rep.Images, rep.Skipped, rare).Report()
	if err != nil {
		return nil, err
	}
	// What a scan part does not carry (the strongest images, the class
	// rates, why a channel is dead): added here, from the accumulators.
	out.Classes = xt.classes
	out.FS = o.FS
	for li, a := range accs {
		l := &out.Layers[li]
		l.Layer, l.MapH, l.MapW = a.layer, a.mapH, a.mapW
		for i := range l.Channels {
			xt.finish(a, i, &l.Channels[i], c.Height, c.Width)
		}
	}
	out.Stages = rep.Stages
	out.Stages.Wall = time.Since(start)
	return out, nil
}

// OpenScanSession opens a session with opt, the options of ScanSession.
// When the runtime refuses the graph with the summaries added (a model it
// can run but not extend that way), it opens one that captures those maps
// whole instead: slower, the same report (up to the rounding of the means).
func OpenScanSession(m *modelio.Model, opt infer.Options) (*infer.Session, error) {
	s, err := infer.NewSession(m, opt)
	if err == nil || len(opt.Summarise) == 0 {
		return s, err
	}
	whole := opt
	whole.Summarise = nil
	whole.Capture = slices.Clone(opt.Capture)
	for _, sm := range opt.Summarise {
		whole.Capture = append(whole.Capture, sm.Tensor)
	}
	if s, err2 := infer.NewSession(m, whole); err2 == nil {
		return s, nil
	}
	return nil, err
}

// ScanSession returns the session options a scan of m wants: the maps it
// reads (ScanCapture, the extra layer outputs of ScanOptions.Layers, and
// PreActivationCapture). dims are the per-image input dimensions for a
// model whose input size is symbolic (infer.Options.Dims), else nil.
//
// The runtime's worker threads keep spinning between operators (no
// infer.Options.NoSpin): with one thread per core the scan takes turns with
// the model (coreGate), so no decoder competes with the spinning threads,
// and their quicker hand-over between operators matters most on a light
// model. Measured on 2 cores with BenchmarkScanRatio/demo, two interleaved
// runs each: scan/plain 0.71 and 0.73 spinning, 0.56 and 0.58 sleeping.
// Sleeping workers paid only while decoders ran beside the model, before
// the scan took turns.
//
// A map whose dimensions the model fixes is summarised in the graph
// (infer.Options.Summarise: largest value, its position, smallest value
// and sum per channel; only the largest for a pre-activation) instead of
// returned whole: the scan reads the same figures, the runtime reads the
// maps on its own threads, and no map is copied out. Measured on 2 cores
// with BenchmarkScanRatio/resnet18: the Go statistics of whole maps took
// about 2.3 ms of CPU per 224×224 image (15 ms of inference), during
// which the model waits (coreGate). Other maps are captured whole.
func ScanSession(m *modelio.Model, dims []int64, extra ...string) infer.Options {
	opt := infer.Options{Dims: dims}
	for _, t := range append(ScanCapture(m), extra...) {
		if _, ok := m.SummaryDims(t); ok {
			opt.Summarise = append(opt.Summarise, modelio.Summary{Tensor: t})
		} else {
			opt.Capture = append(opt.Capture, t)
		}
	}
	for _, t := range PreActivationCapture(m) {
		if slices.ContainsFunc(opt.Summarise, func(s modelio.Summary) bool { return s.Tensor == t }) {
			continue // scanned as a layer too: its summary has the largest value
		}
		if _, ok := m.SummaryDims(t); ok {
			opt.Summarise = append(opt.Summarise, modelio.Summary{Tensor: t, MaxOnly: true})
		} else {
			opt.Capture = append(opt.Capture, t)
		}
	}
	return opt
}
