package gui

import (
	"os"
	"path/filepath"
	"strings"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/driver/desktop"
	"fyne.io/fyne/v2/widget"
)

// homePath is how the window shows a folder or file the user chose:
// relative to the home folder ("~/probes/set1") when it lies inside it,
// otherwise by its name alone ("set1"). The full path, which names the
// machine's folders and would show in every screenshot, is only shown on
// hover (pathLabel).
func homePath(p string) string {
	if p == "" {
		return ""
	}
	abs, err := filepath.Abs(p)
	if err != nil {
		abs = p
	}
	if home, err := os.UserHomeDir(); err == nil && home != "" && home != "/" {
		if rel, err := filepath.Rel(home, abs); err == nil && rel != ".." && !strings.HasPrefix(rel, "../") {
			if rel == "." {
				return "~"
			}
			return "~/" + rel
		}
	}
	return filepath.Base(abs)
}

// pathLabel is a label that shows a short text and, while the pointer is
// over it, the full path in a small pop-up below it.
type pathLabel struct {
	widget.Label
	full string
	pop  *widget.PopUp
}

var _ desktop.Hoverable = (*pathLabel)(nil)

func newPathLabel() *pathLabel {
	l := &pathLabel{}
	l.ExtendBaseWidget(l)
	return l
}

// setPath shows p in its short form (homePath), with p in full on hover.
func (l *pathLabel) setPath(p string) {
	l.full = p
	l.SetText(homePath(p))
}

// setPlain shows text with nothing on hover.
func (l *pathLabel) setPlain(text string) {
	l.full = ""
	l.SetText(text)
}

func (l *pathLabel) MouseIn(e *desktop.MouseEvent) {
	if l.full == "" || l.full == l.Text {
		return
	}
	c := fyne.CurrentApp().Driver().CanvasForObject(l)
	if c == nil {
		return
	}
	l.pop = widget.NewPopUp(widget.NewLabel(l.full), c)
	pos := fyne.CurrentApp().Driver().AbsolutePositionForObject(l)
	l.pop.ShowAtPosition(pos.Add(fyne.NewPos(0, l.Size().Height)))
}

func (l *pathLabel) MouseMoved(*desktop.MouseEvent) {}

func (l *pathLabel) MouseOut() {
	if l.pop != nil {
		l.pop.Hide()
		l.pop = nil
	}
}
