package infer

import (
	"context"
	"errors"
	"fmt"
	"runtime"
	"slices"
	"strings"
	"sync"

	ort "github.com/yalue/onnxruntime_go"

	"fovea/modelio"
)

// Options configure a Session. The zero value is useful: one thread per
// core, the model's outputs only, the batch size chosen from memory.
type Options struct {
	// Threads is the number of threads ONNX Runtime uses inside one
	// operator; 0 means one per core (runtime.NumCPU).
	Threads int
	// Capture names intermediate tensors to return besides the model's
	// outputs, in Result.Maps; modelio.OutputsOf(m.MapLayers()) lists every
	// activation map, modelio.OutputsOf(m.ActivationLayers()) every layer's
	// output. Names that are already
	// model outputs are returned from those. The model's outputs in a
	// Result are always those of a plain run, bit for bit: when a captured
	// tensor would stop a merge that rounds differently
	// (modelio.CaptureShifts, e.g. a Conv output read only by a
	// BatchNormalization), the session also runs the unchanged model on
	// each chunk for the outputs, which costs one plain run more.
	Capture []string
	// Summarise names tensors whose per-channel summary (largest value,
	// its first position, smallest value, sum: modelio.Summary) the graph
	// computes itself; each comes back in Result.Maps under
	// modelio.SummaryName(tensor), shaped [N][C][modelio.SummaryWidth]
	// ([N][C][1] with MaxOnly). Each tensor must pass
	// modelio.Model.SummaryDims. The model's outputs stay those of a plain
	// run, as with Capture.
	Summarise []modelio.Summary
	// Dims are the per-image dimensions (without the batch) of an image
	// input whose dimensions the model leaves symbolic, in the model's
	// layout: [3 224 224] for NCHW. Ignored when the model fixes them all.
	Dims []int64
	// Batch overrides the preferred chunk size for a model whose batch
	// dimension is symbolic; 0 chooses it from the memory budget.
	Batch int
	// NoSpin makes the runtime's worker threads sleep between operators
	// instead of spinning (its session.intra_op.allow_spinning = 0). A
	// session whose caller keeps Go goroutines busy meanwhile (a scan
	// decoding the next images while the model runs) wants it: spinning
	// workers take the cores those goroutines need, and a worker pre-empted
	// in the middle of an operator makes the other spin longer. Left off,
	// a lone run is a little faster.
	NoSpin bool
	// Output names the model output that holds the class scores
	// (Result.Score); "" lets the model decide (modelio.Model.ScoreOutput:
	// by shape, by which output is computed from which, by name). A name
	// that is not a float32 output of the model is an error of NewSession.
	Output string
	// Release makes the session let go of the model once it is open:
	// Model returns nil, and the model's bytes and parsed graph can be
	// collected. For sessions kept for a long time on a model made for
	// them (a sub-model cut by modelio.Model.SubModel): the runtime holds
	// its own copy of the weights, and the model would hold two more (its
	// bytes and its parsed graph), 1 GB for the fully connected part of a
	// VGG-16.
	Release bool
}

// Limits that keep a run away from sizes that only a broken or hostile
// model would ask for.
const (
	// maxImageElems bounds the values of one input image (1 GiB at float32).
	maxImageElems = 1 << 28
	// chunkBudget is the memory one chunk may occupy: its input, outputs,
	// captured maps and the runtime's working tensors. 64 MiB keeps a chunk
	// of a small CNN at 16 images and a large one at 1.
	chunkBudget = 64 << 20
	// maxBatch is the largest chunk chosen automatically: beyond it the
	// CPU kernels gain nothing measurable and the latency of a cancel grows.
	maxBatch = 16
)

// Session is an opened model ready to run. It is safe for concurrent use;
// runs are serialised.
type Session struct {
	mu     sync.Mutex
	file   string
	model  *modelio.Model
	ort    *ort.DynamicAdvancedSession
	runOpt *ort.RunOptions
	// twin runs the unchanged model for the model's outputs when the
	// captures would change them (see Options.Capture); nil otherwise.
	twin *ort.DynamicAdvancedSession

	feeds    []modelio.Value // the inputs the session is fed, in graph order
	image    int             // index in feeds of the input Run feeds; -1 when Run cannot be used
	imageErr error           // why Run cannot be used
	dims     []int64         // per-image dimensions of the image input
	imageLen int             // values per image
	fixed    int             // fixed batch size, 0 when symbolic
	threads  int             // the runtime's threads inside one operator
	batch    int             // preferred chunk size

	names    []string       // what the runtime returns: model outputs, then captures
	nOut     int            // how many of names are model outputs
	capIndex map[string]int // captured name -> index in names
	dropped  []string       // model outputs left out, with the reason
	score    string         // the output holding the class scores ("": by shape at run time)
	scoreSet bool           // score was named by Options.Output: used whatever its shape

	// Learned from the first run of each chunk size: the raw shape of every
	// returned tensor. With them the next runs of that size get
	// preallocated outputs that point into the Result.
	seen     map[int][][]int64
	perImage []int     // values per image of each returned tensor (0 = not yet known)
	imgShape [][]int64 // per-image shape of each returned tensor
	single   bool      // outputs do not carry the batch: run one image at a time
	estBytes int64     // estimated result bytes per image before the first run
	work     int64     // estimated working bytes per image inside the runtime
	pad      []float32 // zero-padded input chunk for a batch fixed above 1

	keptMu sync.Mutex
	kept   map[string]any // Keep's values, closed with the session

	// execHook, when set (by tests only), is called with the run's context
	// just before each runtime run, after the terminate flag is armed: a
	// test can cancel there and know the run is in flight.
	execHook func(ctx context.Context)
}

// NewSession opens m in ONNX Runtime (Init must have succeeded). With
// opt.Capture it runs the model rewritten by m.WithOutputs, so that one run
// returns the model's outputs and the captured maps. Declared shapes are
// checked against sane limits (m.CheckRunnable) before the runtime sees the
// model.
func NewSession(m *modelio.Model, opt Options) (*Session, error) {
	if m == nil {
		panic("infer: NewSession with a nil model")
	}
	file := m.Name
	if !Initialized() {
		return nil, fmt.Errorf("infer: %s: ONNX Runtime is not loaded (call infer.Init first)", file)
	}
	if err := checkRunnable(m); err != nil {
		return nil, err
	}
	s := &Session{file: file, model: m, image: -1, capIndex: map[string]int{}, seen: map[int][][]int64{}}

	// Inputs: every graph input that is not an initializer is fed.
	for _, v := range m.Inputs {
		if v.ElemType != "" && v.ElemType != "float32" {
			return nil, fmt.Errorf("infer: %s: input %q is %s; only float32 inputs are supported", file, v.Name, v.ElemType)
		}
		s.feeds = append(s.feeds, v)
	}
	if len(s.feeds) == 0 {
		return nil, fmt.Errorf("infer: %s: the model has no inputs to feed", file)
	}
	if err := s.pickImage(opt.Dims); err != nil {
		s.imageErr = err
	}

	// Outputs: the model's float32 outputs, then the captured tensors.
	for _, v := range m.Outputs {
		if v.ElemType != "" && v.ElemType != "float32" {
			s.dropped = append(s.dropped, fmt.Sprintf("%s (%s)", v.Name, v.ElemType))
			continue
		}
		s.names = append(s.names, v.Name)
	}
	if len(s.names) == 0 {
		return nil, fmt.Errorf("infer: %s: no float32 output (outputs: %s)", file, strings.Join(s.dropped, ", "))
	}
	s.nOut = len(s.names)
	if opt.Output != "" {
		if !slices.Contains(s.names[:s.nOut], opt.Output) {
			return nil, fmt.Errorf("infer: %s: no float32 output named %q to read the scores from (outputs: %s)", file, opt.Output, strings.Join(s.names[:s.nOut], ", "))
		}
		s.score, s.scoreSet = opt.Output, true
	} else if i, _ := m.ScoreOutput(); i < len(m.Outputs) {
		s.score = m.Outputs[i].Name
	}
	var extra []string
	for _, c := range opt.Capture {
		if _, dup := s.capIndex[c]; dup {
			continue
		}
		if j := slices.Index(s.names[:s.nOut], c); j >= 0 {
			s.capIndex[c] = j
			continue
		}
		s.capIndex[c] = len(s.names)
		s.names = append(s.names, c)
		extra = append(extra, c)
	}
	var sums []modelio.Summary
	for _, sm := range opt.Summarise {
		name := modelio.SummaryName(sm.Tensor)
		if _, dup := s.capIndex[name]; dup {
			continue
		}
		if _, ok := m.SummaryDims(sm.Tensor); !ok {
			return nil, fmt.Errorf("infer: %s: tensor %q cannot be summarised in the graph (unknown name, not float32, or dimensions not fixed)", file, sm.Tensor)
		}
		s.capIndex[name] = len(s.names)
		s.names = append(s.names, name)
		sums = append(sums, sm)
	}
	for _, v := range m.Outputs {
		if _, ok := s.capIndex[v.Name]; ok && !slices.Contains(s.names[:s.nOut], v.Name) {
			return nil, fmt.Errorf("infer: %s: cannot capture %q: it is a %s output; only float32 tensors are returned", file, v.Name, v.ElemType)
		}
	}

	data := m.Bytes()
	if len(extra) > 0 || len(sums) > 0 {
		var err error
		if data, err = m.WithSummaries(extra, sums); err != nil {
			return nil, err
		}
	}
	so, err := ort.NewSessionOptions()
	if err != nil {
		return nil, runtimeError(file, err)
	}
	defer so.Destroy()
	threads := opt.Threads
	if threads <= 0 {
		threads = runtime.NumCPU()
	}
	s.threads = threads
	for _, step := range []func() error{
		func() error { return so.SetIntraOpNumThreads(threads) },
		func() error { return so.SetInterOpNumThreads(1) },
		func() error { return so.SetExecutionMode(ort.ExecutionModeSequential) },
		func() error {
			if opt.NoSpin {
				return so.AddSessionConfigEntry("session.intra_op.allow_spinning", "0")
			}
			return nil
		},
		// Failures come back as errors; the runtime need not also print
		// them on standard error.
		func() error { return so.SetLogSeverityLevel(ort.LoggingLevelFatal) },
		func() error {
			// The model reaches the runtime as bytes, so it must be told
			// where the external data files are: the model's own folder
			// (modelio has already checked that every reference stays in it).
			if m.HasExternalData() && m.Dir() != "" {
				return so.AddSessionConfigEntry("session.model_external_initializers_file_folder_path", m.Dir())
			}
			return nil
		},
	} {
		if err := step(); err != nil {
			return nil, runtimeError(file, err)
		}
	}
	in := make([]string, len(s.feeds))
	for i, v := range s.feeds {
		in[i] = v.Name
	}
	s.ort, err = ort.NewDynamicAdvancedSessionWithONNXData(data, in, s.names, so)
	if err != nil {
		return nil, runtimeError(file, err)
	}
	// A summarised tensor gains readers as a captured one does: the same
	// merges stop.
	shifts := func(n string) bool { return m.CaptureEffect(n) == modelio.CaptureShifts }
	if slices.ContainsFunc(extra, shifts) || slices.ContainsFunc(sums, func(sm modelio.Summary) bool { return shifts(sm.Tensor) }) {
		if s.twin, err = ort.NewDynamicAdvancedSessionWithONNXData(m.Bytes(), in, s.names[:s.nOut], so); err != nil {
			s.ort.Destroy()
			return nil, runtimeError(file, err)
		}
	}
	if s.runOpt, err = ort.NewRunOptions(); err != nil {
		s.ort.Destroy()
		if s.twin != nil {
			s.twin.Destroy()
		}
		return nil, runtimeError(file, err)
	}
	s.perImage = make([]int, len(s.names))
	s.imgShape = make([][]int64, len(s.names))
	s.estimate()
	s.batch = s.chooseBatch(opt.Batch)
	if opt.Release {
		s.model = nil
	}
	return s, nil
}

// checkRunnable checks the declared shapes before the runtime sees them
// (m.CheckRunnable). A model that declares weights as inputs is refused by
// m.CheckRunnable as "architecture only"; the session still opens for it,
// because RunTensors can feed those inputs (the ONNX conformance models are
// made that way), so its shapes are checked here against the same limits.
// Run refuses such a model (it has more than one input).
func checkRunnable(m *modelio.Model) error {
	weights := false
	for _, v := range m.Inputs {
		weights = weights || v.Weight
	}
	if !weights {
		return m.CheckRunnable()
	}
	check := func(what string, sh modelio.Shape) error {
		total := int64(1)
		for i, d := range sh {
			if !d.Known() {
				continue
			}
			if d.Size > modelio.MaxRunDim {
				return fmt.Errorf("infer: %s: %s: dimension %d is %d, above the limit of %d", m.Name, what, i, d.Size, modelio.MaxRunDim)
			}
			if i > 0 || len(sh) == 1 {
				total *= d.Size
				if total > modelio.MaxRunElements {
					return fmt.Errorf("infer: %s: %s: %s is more than %d values per image", m.Name, what, sh, int64(modelio.MaxRunElements))
				}
			}
		}
		return nil
	}
	for _, v := range m.Inputs {
		if err := check(fmt.Sprintf("input %q", v.Name), v.Shape); err != nil {
			return err
		}
	}
	for _, l := range m.Layers {
		if l.ShapeSource != modelio.SourceUnknown {
			if err := check(fmt.Sprintf("layer %q output", l.Name), l.Shape); err != nil {
				return err
			}
		}
	}
	return nil
}

// pickImage finds the input Run feeds and its per-image dimensions.
func (s *Session) pickImage(dims []int64) error {
	if len(s.feeds) > 1 {
		var names []string
		for _, v := range s.feeds {
			n := fmt.Sprintf("%q", v.Name)
			if v.Weight {
				n += " (weights declared as an input, without data)"
			}
			names = append(names, n)
		}
		return fmt.Errorf("infer: %s: the model has %d inputs (%s); Run feeds exactly one image input", s.file, len(s.feeds), strings.Join(names, ", "))
	}
	v := s.feeds[0]
	if s.model.Image != nil && s.model.Image.Name != v.Name {
		return fmt.Errorf("infer: %s: image input %q is not the model's input %q", s.file, s.model.Image.Name, v.Name)
	}
	if v.Shape == nil {
		if len(dims) == 0 {
			return fmt.Errorf("infer: %s: input %q declares no shape; give the per-image dimensions (Options.Dims)", s.file, v.Name)
		}
		v.Shape = append(modelio.Shape{{Size: -1, Param: "N"}}, modelio.ShapeOf(dims...)...)
	}
	if len(v.Shape) < 2 {
		return fmt.Errorf("infer: %s: input %q has shape %s; Run needs a batch dimension and at least one more", s.file, v.Name, v.Shape)
	}
	per := v.Shape[1:]
	if len(dims) != 0 && len(dims) != len(per) {
		return fmt.Errorf("infer: %s: Options.Dims %v has %d dimensions; input %q has %d besides the batch (%s)", s.file, dims, len(dims), v.Name, len(per), v.Shape)
	}
	s.dims = make([]int64, len(per))
	n := int64(1)
	for i, d := range per {
		switch {
		case d.Known():
			s.dims[i] = d.Size
			if len(dims) != 0 && dims[i] != d.Size {
				return fmt.Errorf("infer: %s: Options.Dims %v disagrees with input %q's fixed shape %s", s.file, dims, v.Name, v.Shape)
			}
		case len(dims) != 0:
			s.dims[i] = dims[i]
		default:
			return fmt.Errorf("infer: %s: input %q has symbolic dimensions (%s); give the per-image dimensions (Options.Dims)", s.file, v.Name, v.Shape)
		}
		if s.dims[i] <= 0 || s.dims[i] > maxImageElems {
			return fmt.Errorf("infer: %s: input %q: dimension %d is %d", s.file, v.Name, i+1, s.dims[i])
		}
		n *= s.dims[i]
		if n > maxImageElems {
			return fmt.Errorf("infer: %s: input %q: one image of %v is more than %d values", s.file, v.Name, s.dims, maxImageElems)
		}
	}
	s.imageLen = int(n)
	if b := v.Shape[0]; b.Known() {
		if b.Size < 1 || b.Size > maxBatch*64 {
			return fmt.Errorf("infer: %s: input %q has a fixed batch of %d", s.file, v.Name, b.Size)
		}
		s.fixed = int(b.Size)
	}
	s.image = 0
	return nil
}

// estimate guesses, before any run, the bytes per image of the result and
// of the runtime's working tensors, from the layer table.
func (s *Session) estimate() {
	bytesOf := map[string]int64{}
	for _, l := range s.model.Layers {
		bytesOf[l.Output] = l.Bytes
	}
	for _, n := range s.names {
		s.estBytes += max(bytesOf[n], 0)
	}
	s.work = 4*int64(s.imageLen) + max(s.model.Total.Bytes, 0)
}

// chooseBatch picks the chunk size: the fixed batch when there is one,
// else as many images as fit the chunk budget, at most maxBatch.
func (s *Session) chooseBatch(want int) int {
	switch {
	case s.fixed > 0:
		return s.fixed
	case want > 0:
		return want
	}
	per := s.work + s.estBytes
	b := maxBatch
	if per > 0 {
		b = int(min(int64(maxBatch), max(1, chunkBudget/per)))
	}
	if avail := availableMemory(); avail > 0 && per > 0 {
		b = int(max(1, min(int64(b), avail/4/per)))
	}
	return b
}

// BatchSize is the number of images Run sends to the runtime in one call:
// the fixed batch when the model has one (1 means a loop over the images).
func (s *Session) BatchSize() int {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.single {
		return 1
	}
	return s.batch
}

// Threads is the number of threads the runtime uses inside one operator
// (Options.Threads, or one per core): an analysis that also keeps Go
// goroutines busy asks whether the runtime leaves it any core.
func (s *Session) Threads() int { return s.threads }

// ImageDims returns the per-image dimensions Run expects (without the
// batch), in the model's layout, or an error saying why Run cannot feed this
// model.
func (s *Session) ImageDims() ([]int64, error) {
	if s.imageErr != nil {
		return nil, s.imageErr
	}
	return slices.Clone(s.dims), nil
}

// Model returns the model the session runs (read-only: a session's
// analyses look up the graph, e.g. Model.ClassSoftmax).
// It is nil for a session opened with Options.Release.
func (s *Session) Model() *modelio.Model { return s.model }

// Dropped lists the model outputs the session does not return (not
// float32), with their type.
func (s *Session) Dropped() []string { return slices.Clone(s.dropped) }

// Keep returns the value kept under key, made by make on the first call
// (a failed make is not kept, and the next call tries again). Analyses keep
// there what belongs to this session and would cost much to make again on
// every call, such as the sessions of sub-models cut from its model. Values
// that have a Close method are closed when s is closed; until then they stay,
// memory included. After Close, Keep returns ErrClosed.
func (s *Session) Keep(key string, make func() (any, error)) (any, error) {
	s.keptMu.Lock()
	defer s.keptMu.Unlock()
	if s.kept == nil {
		s.mu.Lock()
		closed := s.ort == nil
		s.mu.Unlock()
		if closed {
			return nil, ErrClosed
		}
		s.kept = map[string]any{}
	}
	if v, ok := s.kept[key]; ok {
		return v, nil
	}
	v, err := make()
	if err != nil {
		return nil, err
	}
	s.kept[key] = v
	return v, nil
}

// Close releases the runtime's session and closes what Keep holds. Runs
// after Close return ErrClosed.
func (s *Session) Close() error {
	s.keptMu.Lock()
	defer s.keptMu.Unlock()
	for _, v := range s.kept {
		if c, ok := v.(interface{ Close() error }); ok {
			c.Close()
		}
	}
	s.kept = nil
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.ort == nil {
		return nil
	}
	s.ort.Destroy()
	s.runOpt.Destroy()
	if s.twin != nil {
		s.twin.Destroy()
	}
	s.ort, s.runOpt, s.twin = nil, nil, nil
	return nil
}

// Run pushes n images through the model and returns its outputs and the
// captured maps, each with Shape[0] == n. input holds the n images one after
// the other in the model's input layout (len = n × the product of
// ImageDims). It stops between chunks, and asks the runtime to stop within
// one, when ctx is cancelled, and then returns ctx.Err().
func (s *Session) Run(ctx context.Context, input []float32, n int) (*Result, error) {
	return s.RunInto(ctx, input, n, nil)
}

// RunInto is Run writing into dst's slices when their capacity suffices
// (typically the Result of the previous call, whose contents are then
// overwritten); dst may be nil. It returns the Result it filled.
func (s *Session) RunInto(ctx context.Context, input []float32, n int, dst *Result) (*Result, error) {
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.ort == nil {
		return nil, ErrClosed
	}
	if s.imageErr != nil {
		return nil, s.imageErr
	}
	if n < 1 {
		return nil, fmt.Errorf("infer: %s: Run with %d images", s.file, n)
	}
	if len(input) != n*s.imageLen {
		return nil, fmt.Errorf("infer: %s: input has %d values; %d images of %v need %d", s.file, len(input), n, s.dims, n*s.imageLen)
	}
	if err := s.checkMemory(n); err != nil {
		return nil, err
	}
	for {
		res, err := s.runChunks(ctx, input, n, dst)
		if errors.Is(err, errRestartSingle) {
			continue
		}
		return res, err
	}
}

// errRestartSingle: an output turned out not to carry the batch as its
// first dimension; the run starts over one image at a time.
var errRestartSingle = errors.New("restart one image at a time")

func (s *Session) chunk() int {
	if s.single {
		return 1
	}
	return s.batch
}

// checkMemory refuses a run whose result alone would not fit in memory.
func (s *Session) checkMemory(n int) error {
	per := s.estBytes
	if s.perImage[0] > 0 {
		per = 0
		for _, p := range s.perImage {
			per += 4 * int64(p)
		}
	}
	need := int64(n)*per + int64(s.chunk())*(s.work+per)
	avail := availableMemory()
	if avail > 0 && need > avail*3/4 {
		return &MemoryError{File: s.file, Need: need, Avail: avail, What: fmt.Sprintf("%d images with %d returned tensors", n, len(s.names))}
	}
	return nil
}

func (s *Session) runChunks(ctx context.Context, input []float32, n int, dst *Result) (*Result, error) {
	b := s.chunk()
	var res *Result
	for start := 0; start < n; start += b {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		c := min(b, n-start)
		in := input[start*s.imageLen : (start+c)*s.imageLen]
		feed := c
		if s.fixed > 1 && c < s.fixed {
			// A batch fixed above 1: pad the last chunk with zero images.
			if s.pad == nil {
				s.pad = make([]float32, s.fixed*s.imageLen)
			}
			clear(s.pad)
			copy(s.pad, in)
			in, feed = s.pad, s.fixed
		}
		shapes, known := s.seen[feed]
		if !known || feed != c {
			raw, err := s.runAlloc(ctx, in, feed)
			if err != nil {
				return nil, err
			}
			err = s.learn(feed, raw)
			if err == nil && res == nil {
				// The shapes are now exact: check again before the
				// Result for all n images is allocated.
				if err = s.checkMemory(n); err == nil {
					res = s.result(n, dst)
				}
			}
			if err == nil {
				for j, v := range raw {
					t := v.(*ort.Tensor[float32])
					per := s.perImage[j]
					copy(s.out(res, j)[start*per:(start+c)*per], t.GetData()[:c*per])
				}
			}
			destroy(raw)
			if err == nil {
				err = s.exactOutputs(ctx, in, feed, c, res, start)
			}
			if err != nil {
				return nil, err
			}
			continue
		}
		if res == nil {
			res = s.result(n, dst)
		}
		if err := s.runInto(ctx, in, c, shapes, res, start); err != nil {
			return nil, err
		}
		if err := s.exactOutputs(ctx, in, feed, c, res, start); err != nil {
			return nil, err
		}
	}
	return res, nil
}

// exactOutputs overwrites the model's outputs of the chunk (c images of the
// feed images in in, starting at image start of res) with those of the
// unchanged model, when the session has a twin.
func (s *Session) exactOutputs(ctx context.Context, in []float32, feed, c int, res *Result, start int) error {
	if s.twin == nil {
		return nil
	}
	x, err := ort.NewTensor(s.inputShape(feed), in)
	if err != nil {
		return fmt.Errorf("infer: %s: input tensor: %w", s.file, err)
	}
	defer x.Destroy()
	outs := make([]ort.Value, s.nOut)
	defer destroy(outs)
	if err := s.execOn(ctx, s.twin, []ort.Value{x}, outs); err != nil {
		return err
	}
	for j, v := range outs {
		t, ok := v.(*ort.Tensor[float32])
		per := s.perImage[j]
		if !ok || len(t.GetData()) < c*per {
			return fmt.Errorf("infer: %s: output %q of the unchanged model does not match the rewritten one's", s.file, s.names[j])
		}
		copy(s.out(res, j)[start*per:(start+c)*per], t.GetData()[:c*per])
	}
	return nil
}

// out returns the slice of the Result that receives returned tensor j.
func (s *Session) out(res *Result, j int) []float32 {
	if j < s.nOut {
		return res.Outputs[j].Data
	}
	return res.Maps[s.names[j]].Data
}

// learn records the raw shapes of a chunk of c images and derives the
// per-image shape of every returned tensor.
func (s *Session) learn(c int, raw []ort.Value) error {
	shapes := make([][]int64, len(raw))
	for j, v := range raw {
		if v.GetONNXType() != ort.ONNXTypeTensor {
			return fmt.Errorf("infer: %s: %q is a %s, not a tensor; only float32 tensors are returned", s.file, s.names[j], v.GetONNXType())
		}
		if _, ok := v.(*ort.Tensor[float32]); !ok {
			return fmt.Errorf("infer: %s: %q is %s; only float32 tensors are returned", s.file, s.names[j], elemName(v))
		}
		sh := []int64(v.GetShape())
		shapes[j] = sh
		count := 1
		for _, d := range sh {
			count *= int(d)
		}
		batched := len(sh) > 0 && sh[0] == int64(c)
		if !batched && c > 1 {
			// The first dimension is not the batch: images cannot be told
			// apart in a chunk, so run them one at a time.
			s.single = true
			clear(s.seen)
			return errRestartSingle
		}
		var img []int64
		per := count
		if batched {
			img = slices.Clone(sh[1:])
			per = count / c
		} else {
			img = slices.Clone(sh)
		}
		if s.perImage[j] == 0 && s.imgShape[j] == nil {
			s.perImage[j], s.imgShape[j] = per, img
		} else if !slices.Equal(img, s.imgShape[j]) {
			return fmt.Errorf("infer: %s: %q has per-image shape %v in a chunk of %d but %v before; shapes that change with the batch are not supported", s.file, s.names[j], img, c, s.imgShape[j])
		}
	}
	s.seen[c] = shapes
	return nil
}

// result makes the Result for n images, reusing dst's slices when they are
// large enough.
func (s *Session) result(n int, dst *Result) *Result {
	res := &Result{N: n, Maps: make(map[string]modelio.Tensor, len(s.capIndex))}
	buf := func(name string, old []float32, size int) []float32 {
		if cap(old) >= size {
			return old[:size]
		}
		return make([]float32, size)
	}
	var oldOut []modelio.Tensor
	var oldMaps map[string]modelio.Tensor
	if dst != nil {
		oldOut, oldMaps = dst.Outputs, dst.Maps
	}
	ts := make([]modelio.Tensor, len(s.names))
	for j, name := range s.names {
		var old []float32
		switch {
		case j < s.nOut && j < len(oldOut) && oldOut[j].Name == name:
			old = oldOut[j].Data
		case j >= s.nOut && oldMaps != nil:
			old = oldMaps[name].Data
		}
		shape := append([]int64{int64(n)}, s.imgShape[j]...)
		ts[j] = modelio.Tensor{Name: name, Shape: shape, Data: buf(name, old, n*s.perImage[j])}
	}
	res.Outputs = ts[:s.nOut:s.nOut]
	for name, j := range s.capIndex {
		res.Maps[name] = ts[j]
	}
	res.Score = s.scoreIndex(res.Outputs)
	if dst != nil {
		*dst = *res
		return dst
	}
	return res
}

// runAlloc runs one chunk of c images and lets the runtime allocate the
// outputs (onnxruntime_go copies them into Go memory), of whatever type.
func (s *Session) runAlloc(ctx context.Context, in []float32, c int) ([]ort.Value, error) {
	x, err := ort.NewTensor(s.inputShape(c), in)
	if err != nil {
		return nil, fmt.Errorf("infer: %s: input tensor: %w", s.file, err)
	}
	defer x.Destroy()
	outs := make([]ort.Value, len(s.names))
	if err := s.exec(ctx, []ort.Value{x}, outs); err != nil {
		destroy(outs)
		return nil, err
	}
	return outs, nil
}

// runInto runs one chunk of c images starting at image start, with every
// output preallocated inside res: the runtime writes the results in place.
func (s *Session) runInto(ctx context.Context, in []float32, c int, shapes [][]int64, res *Result, start int) error {
	x, err := ort.NewTensor(s.inputShape(c), in)
	if err != nil {
		return fmt.Errorf("infer: %s: input tensor: %w", s.file, err)
	}
	defer x.Destroy()
	outs := make([]ort.Value, len(s.names))
	defer destroy(outs)
	for j := range s.names {
		per := s.perImage[j]
		t, err := ort.NewTensor(ort.Shape(shapes[j]), s.out(res, j)[start*per:(start+c)*per])
		if err != nil {
			return fmt.Errorf("infer: %s: output tensor %q: %w", s.file, s.names[j], err)
		}
		outs[j] = t
	}
	return s.exec(ctx, []ort.Value{x}, outs)
}

func (s *Session) inputShape(c int) ort.Shape {
	return append(ort.Shape{int64(c)}, s.dims...)
}

// exec runs the runtime once. A cancelled ctx sets the runtime's terminate
// flag, which it checks between nodes; the callback has finished before
// exec returns, so no goroutine outlives the call.
func (s *Session) exec(ctx context.Context, in, out []ort.Value) error {
	return s.execOn(ctx, s.ort, in, out)
}

func (s *Session) execOn(ctx context.Context, sess *ort.DynamicAdvancedSession, in, out []ort.Value) error {
	if err := s.runOpt.UnsetTerminate(); err != nil {
		return runtimeError(s.file, err)
	}
	fired := make(chan struct{})
	stop := context.AfterFunc(ctx, func() {
		defer close(fired)
		_ = s.runOpt.Terminate()
	})
	if s.execHook != nil {
		s.execHook(ctx)
	}
	err := sess.RunWithOptions(in, out, s.runOpt)
	if !stop() {
		<-fired
	}
	if err != nil {
		// Stopped by the flag, or failed while being cancelled: the
		// caller asked to stop, which is what it should hear about.
		if cerr := ctx.Err(); cerr != nil {
			return cerr
		}
		if isTerminated(err) {
			return context.Canceled
		}
		return runtimeError(s.file, err)
	}
	return nil
}

func destroy(vs []ort.Value) {
	for _, v := range vs {
		if v != nil {
			v.Destroy()
		}
	}
}

func elemName(v ort.Value) string {
	return strings.ToLower(ort.TensorElementDataType(v.DataType()).String())
}
