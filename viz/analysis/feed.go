package analysis

import (
	"context"
	"io"
	"io/fs"
	"runtime"
	"sync"
	"sync/atomic"
	"time"

	"fovea/modelio/prep"
)

// Feed decodes and prepares a list of image files on a bounded pool of
// goroutines and hands them out as batches of model input, in file order.
// It is the front half of every analysis that runs a model over a folder
// (the scan, the evaluation of a labelled folder, ...): one decoder would
// leave most cores idle while PNG or JPEG decoding, not the model, sets the
// pace.
//
// Batch k holds files [k·B, (k+1)·B) (B the batch size) minus those that
// could not be read, so what a batch contains depends on the files only,
// never on the number of workers or on timing; an analysis that handles
// the batches in order gets bit-identical results with any pool size.
//
// Memory is bounded by the batches in flight: at most InFlight buffers of
// B images exist, whatever the number of files. Workers decode ahead only
// as far as those buffers allow and then wait, leaving the cores to the
// model.
//
// A Feed is used by one consumer goroutine: Next, Release, Close and
// Stages are not safe for concurrent use.
type Feed struct {
	ctx     context.Context
	cancel  context.CancelFunc
	cfg     prep.Config
	size    int
	names   []string
	opt     FeedOptions
	batch   int
	workers int

	order chan *pendingBatch // batches in file order, as they are started
	free  chan []float32     // buffers given back by Release
	wg    sync.WaitGroup
	done  int // files covered by the batches handed out so far

	decode, prepare atomic.Int64 // nanoseconds summed over workers
	closed          bool
}

// FeedOptions are the knobs of a Feed. The zero value decodes OS paths one
// image per batch with one worker per GOMAXPROCS.
type FeedOptions struct {
	// FS, when not nil, is where the names are opened (fs.ValidPath names);
	// nil means they are paths of the operating system.
	FS fs.FS
	// Batch is the number of images per batch; below 1 means 1.
	Batch int
	// Workers is the number of decoding goroutines; 0 means
	// runtime.GOMAXPROCS(0). More workers than the cores the model leaves
	// idle cost little: they wait as soon as the buffers in flight are full.
	Workers int
	// InFlight is the number of batch buffers; 0 means enough for one
	// batch in the model, one ready and the workers' share being filled
	// (at least 3).
	InFlight int
	// SkipUnreadable: a file that cannot be read is listed in
	// Batch.Skipped and left out. By default Next returns its error.
	SkipUnreadable bool
	// gate, when not nil, keeps the workers from decoding while the model
	// runs (coreGate).
	gate *coreGate
}

// Batch is a batch of prepared images.
type Batch struct {
	// Data holds N images of prep.Config.Len() values each, back to back,
	// each in the Config's layout (NCHW or NHWC); it belongs to the Feed
	// and is reused after Release.
	Data    []float32
	N       int
	Files   []string  // the names of the N images, in order
	Skipped []Skipped // files of this batch's range left out (SkipUnreadable), in order
	// Done is the number of files covered by this batch and the ones
	// before it (read or skipped), for progress.
	Done int
}

// Skipped is a file a Feed left out and why.
type Skipped struct {
	File string
	Err  error
}

// pendingBatch is a batch being filled by the workers.
type pendingBatch struct {
	b     *Batch
	first int     // index of its first file
	errs  []error // per slot
	left  atomic.Int32
	ready chan struct{} // closed when every slot is done
}

// feedJob is one file to decode into one slot of a batch.
type feedJob struct {
	p    *pendingBatch
	slot int
}

// NewFeed starts decoding names with c into batches. Its goroutines run
// until the last batch is filled, ctx is cancelled or Close is called;
// call Close when done with the Feed (also after an error).
func NewFeed(ctx context.Context, names []string, c prep.Config, o FeedOptions) *Feed {
	bs := max(1, o.Batch)
	w := o.Workers
	if w <= 0 {
		w = runtime.GOMAXPROCS(0)
	}
	inFlight := o.InFlight
	if inFlight <= 0 {
		inFlight = max(3, 2+(w+bs-1)/bs)
	}
	ctx, cancel := context.WithCancel(ctx)
	f := &Feed{ctx: ctx, cancel: cancel, cfg: c, size: c.Len(), names: names, opt: o, batch: bs, workers: w,
		order: make(chan *pendingBatch, inFlight), free: make(chan []float32, inFlight)}
	jobs := make(chan feedJob, w*2)
	f.wg.Add(1 + w)
	go func() {
		defer f.wg.Done()
		defer close(f.order)
		defer close(jobs)
		f.dispatch(inFlight, jobs)
	}()
	for range w {
		go func() {
			defer f.wg.Done()
			f.work(jobs)
		}()
	}
	return f
}

// dispatch starts one batch after another as buffers become free: it
// queues the batch for Next first, then its files for the workers, so the
// workers take files roughly in order and earlier batches finish first.
func (f *Feed) dispatch(inFlight int, jobs chan<- feedJob) {
	made := 0
	for first := 0; first < len(f.names); first += f.batch {
		var buf []float32
		if made < inFlight {
			made++
		} else {
			select {
			case buf = <-f.free:
			case <-f.ctx.Done():
				return
			}
		}
		n := min(f.batch, len(f.names)-first)
		if buf == nil {
			buf = make([]float32, f.batch*f.size)
		}
		p := &pendingBatch{b: &Batch{Data: buf}, first: first, errs: make([]error, n), ready: make(chan struct{})}
		p.left.Store(int32(n))
		select {
		case f.order <- p: // never blocks: at most inFlight batches exist
		case <-f.ctx.Done():
			return
		}
		for slot := range n {
			select {
			case jobs <- feedJob{p, slot}:
			case <-f.ctx.Done():
				return
			}
		}
	}
}

// work decodes and prepares files until jobs closes or the Feed stops, with
// one prep.Decoder of its own: the same values as prep.Load, prep.Fit and
// TensorFromImage, with buffers and inflate state kept from file to file.
func (f *Feed) work(jobs <-chan feedJob) {
	var dec prep.Decoder
	for {
		var j feedJob
		var ok bool
		select {
		case j, ok = <-jobs:
			if !ok {
				return
			}
		case <-f.ctx.Done():
			return
		}
		f.opt.gate.work(func() {
			d0, p0 := dec.Stages()
			err := f.load(&dec, f.names[j.p.first+j.slot], j.p.b.Data[j.slot*f.size:(j.slot+1)*f.size])
			d1, p1 := dec.Stages()
			f.decode.Add(int64(d1 - d0))
			f.prepare.Add(int64(p1 - p0))
			j.p.errs[j.slot] = err
		})
		if j.p.left.Add(-1) == 0 {
			close(j.p.ready)
		}
	}
}

// load decodes and prepares one file into dst, from the FS when there is one
// (prep.LoadFS's reading).
func (f *Feed) load(dec *prep.Decoder, name string, dst []float32) error {
	if f.opt.FS == nil {
		return dec.LoadInto(name, f.cfg, dst)
	}
	return dec.LoadIntoFS(f.opt.FS, name, f.cfg, dst)
}

// Next returns the next batch in file order, io.EOF after the last, or the
// error of the first unreadable file (unless FeedOptions.SkipUnreadable) or
// ctx's error. With SkipUnreadable a batch may hold no image (N == 0) and
// only Skipped files. Give each batch back with Release when done with its
// Data.
func (f *Feed) Next() (*Batch, error) {
	var p *pendingBatch
	var ok bool
	select {
	case p, ok = <-f.order:
		if !ok {
			if err := f.ctx.Err(); err != nil {
				return nil, err
			}
			return nil, io.EOF
		}
	case <-f.ctx.Done():
		return nil, f.ctx.Err()
	}
	select {
	case <-p.ready:
	case <-f.ctx.Done():
		return nil, f.ctx.Err()
	}
	b := p.b
	for slot, err := range p.errs {
		name := f.names[p.first+slot]
		if err != nil {
			if !f.opt.SkipUnreadable {
				return nil, err
			}
			b.Skipped = append(b.Skipped, Skipped{File: name, Err: err})
			continue
		}
		if b.N != slot { // close the gap a skipped file left
			copy(b.Data[b.N*f.size:(b.N+1)*f.size], b.Data[slot*f.size:(slot+1)*f.size])
		}
		b.Files = append(b.Files, name)
		b.N++
	}
	f.done = p.first + len(p.errs)
	b.Done = f.done
	return b, nil
}

// Release gives a batch's buffer back for the batches still to come; b
// must not be used afterwards.
func (f *Feed) Release(b *Batch) {
	select {
	case f.free <- b.Data[:cap(b.Data)]:
	default: // cannot happen: at most InFlight buffers exist
	}
}

// Close stops the workers and waits for them. It is safe to call more than
// once.
func (f *Feed) Close() {
	if f.closed {
		return
	}
	f.closed = true
	f.cancel()
	f.wg.Wait()
}

// Workers is the number of decoding goroutines.
func (f *Feed) Workers() int { return f.workers }

// Stages returns the time spent so far decoding (reading and decompressing
// files; for PNG files at the input size also unfiltering their rows) and
// preparing (compositing, fitting to the input size and converting to
// values), each summed over the workers (prep.Decoder.Stages).
func (f *Feed) Stages() (decode, prepare time.Duration) {
	return time.Duration(f.decode.Load()), time.Duration(f.prepare.Load())
}
