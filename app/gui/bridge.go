package gui

import (
	"errors"
	"fmt"

	"fyne.io/fyne/v2"
)

// The bridge: the only methods that task goroutines call, and the only
// callers of fyne.Do. Each hops onto the UI goroutine and does the least it
// can there.
//
// Each callback also holds u.uiMu. In the window that lock is never
// contended (every holder runs on the UI goroutine); Fyne's headless test
// driver, though, runs fyne.Do callbacks on the task's own goroutine, and the
// tests hold the lock (ui.do) while they tap widgets a running task updates.

// progress moves t's progress bar to done of total.
func (u *ui) progress(t *task, done, total int) {
	fyne.Do(func() {
		u.uiMu.Lock()
		defer u.uiMu.Unlock()
		r := t.r
		if r.cur != t {
			return
		}
		r.bar.Max = float64(total)
		r.bar.SetValue(float64(done))
		if t.unit != "" {
			r.note.SetText(fmt.Sprintf("%s: %d of %d %s", t.what, done, total, t.unit))
		}
	})
}

// finish ends t: it shows the result when the task succeeded, was not
// replaced and its model is still open; the error in a dialog when it
// failed; a note when it was stopped. It waits until the window has done so,
// so that when a task's goroutine ends, the window shows its outcome.
func (u *ui) finish(t *task, res result, err error) {
	fyne.DoAndWait(func() {
		u.uiMu.Lock()
		defer u.uiMu.Unlock()
		r := t.r
		current := false
		switch {
		case t.ctx.Err() != nil && (err == nil || errors.Is(err, t.ctx.Err())):
			r.ended(t, t.what+": stopped")
		case err != nil:
			r.ended(t, t.what+": failed")
			u.showError(t.what, err)
		case r.cur != t || t.ws != nil && t.ws != u.ws:
			r.ended(t, "")
		default:
			r.ended(t, fmt.Sprintf("%s took %s", t.what, t.elapsed()))
			current = true
		}
		if res != nil {
			res(current)
		}
	})
}
