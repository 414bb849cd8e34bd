package gui

import (
	"context"
	"fmt"
	"sync/atomic"
	"time"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"

	"fovea/app/core"
)

// A runner is one place in the window where a kind of long task shows its
// progress: a line of text, a progress bar and a Stop button. It runs one task
// at a time; starting another cancels the one before.
type runner struct {
	u    *ui
	note *widget.Label
	bar  *widget.ProgressBar
	stop *widget.Button
	box  *fyne.Container
	cur  *task
	// keep: the bar and the outcome stay visible after the task ends (the
	// views' runners); otherwise the whole box hides and the outcome goes to
	// the status line.
	keep bool
}

// A task is one run of a task. Its fields other than permille are used on
// the UI goroutine only.
type task struct {
	r       *runner
	what    string          // "Occlusion", shown in the note
	ws      *core.Workspace // the model the task works on
	ctx     context.Context
	cancel  context.CancelFunc
	started time.Time
	unit    string // what progress counts: "positions", "images"

	permille atomic.Int64 // last progress shown, in thousandths, to skip needless redraws
}

// newRunner makes a runner; keep says whether its bar stays visible (with the
// outcome in the note) after the task ends.
func (u *ui) newRunner(keep bool) *runner {
	r := &runner{u: u, note: widget.NewLabel(""), bar: widget.NewProgressBar(), keep: keep}
	r.note.Truncation = fyne.TextTruncateEllipsis
	r.stop = widget.NewButtonWithIcon("Stop", theme.CancelIcon(), func() { r.cancel() })
	r.stop.Importance = widget.DangerImportance
	r.stop.Hide()
	r.bar.TextFormatter = func() string {
		if r.bar.Max <= 0 {
			return ""
		}
		return fmt.Sprintf("%.0f %%", 100*r.bar.Value/r.bar.Max)
	}
	r.box = container.NewBorder(nil, nil, nil, r.stop, container.NewGridWithColumns(2, r.note, r.bar))
	r.box.Hide() // until the first task
	return r
}

// cancel stops the running task, if any; its end is reported by finish.
func (r *runner) cancel() {
	if r.cur != nil {
		r.cur.cancel()
		r.note.SetText(r.cur.what + ": stopping…")
	}
}

// work is a long task: it runs on its own goroutine, must stop promptly when
// ctx is cancelled, reports progress through progress, and returns either its
// result or an error.
type work func(ctx context.Context, progress func(done, total int)) (result, error)

// A result shows a task's outcome; it runs on the UI goroutine. current is
// false when the outcome is no longer wanted (the task was stopped or
// replaced, or its model was closed meanwhile): the result then only
// releases what it holds.
type result func(current bool)

// launch starts task on its own goroutine and shows its progress in r. ws is
// the model the task works on: its result is shown only if that model is
// still open (nil for tasks that open a model). unit names what the progress
// counts ("" when it counts nothing worth naming). Call on the UI goroutine.
func (r *runner) launch(what, unit string, ws *core.Workspace, w work) *task {
	u := r.u
	if r.cur != nil {
		r.cur.cancel()
	}
	ctx, cancel := context.WithCancel(u.ctx)
	t := &task{r: r, what: what, unit: unit, ws: ws, ctx: ctx, cancel: cancel, started: time.Now()}
	t.permille.Store(-1)
	r.cur = t
	r.note.SetText(what + "…")
	r.bar.Max = 1
	r.bar.SetValue(0)
	r.bar.Show()
	r.stop.Show()
	r.box.Show()
	wsRunning := u.wsRunning(ws)
	u.running.Add(1)
	wsRunning.Add(1)
	go func() {
		defer u.running.Done()
		defer wsRunning.Done()
		defer cancel()
		res, err := w(ctx, t.report)
		u.finish(t, res, err)
	}()
	return t
}

// report is the task's progress callback: it forwards a change of at least a
// thousandth (and always the end) to the window.
func (t *task) report(done, total int) {
	if total <= 0 {
		return
	}
	pm := int64(1000 * done / total)
	if old := t.permille.Swap(pm); old == pm && done != total {
		return
	}
	t.r.u.progress(t, done, total)
}

// ended shows how the task ended, on the UI goroutine.
func (r *runner) ended(t *task, outcome string) {
	if r.cur != t {
		return
	}
	r.cur = nil
	r.stop.Hide()
	if r.keep {
		r.note.SetText(outcome)
		return
	}
	r.box.Hide()
	if outcome != "" {
		r.u.status.SetText(outcome)
	}
}

// elapsed says how long t ran, for the notes.
func (t *task) elapsed() string {
	d := time.Since(t.started)
	if d < time.Second {
		return fmt.Sprintf("%d ms", d.Milliseconds())
	}
	return fmt.Sprintf("%.1f s", d.Seconds())
}
