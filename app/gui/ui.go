package gui

import (
	"context"
	"fmt"
	"image"
	"os"
	"path/filepath"
	"runtime"
	"sync"
	"unicode"
	"unicode/utf8"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/app"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/dialog"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"

	"fovea/app/core"
	"fovea/app/core/envlocale"
	"fovea/viz"
	"fovea/viz/analysis"
)

// appID keys the preferences (window size, last view, recent files, theme).
const appID = "org.fovea.app"

// Preference keys.
const (
	prefWidth   = "window.width"
	prefHeight  = "window.height"
	prefView    = "view"
	prefTheme   = "theme"
	prefDir     = "dir.last"
	prefModels  = "recent.models"
	prefImages  = "recent.images"
	prefProbes  = "recent.probes"
	recentLimit = 8
)

// Default window size: fits a 1366×768 laptop screen with its panels.
const defaultWidth, defaultHeight = 1280, 760

// ui is the window and everything it shows. All fields are used on the UI
// goroutine only, except running, ctx and the runners' tasks' atomics.
type ui struct {
	app   fyne.App
	win   fyne.Window
	opts  Options
	prefs fyne.Preferences

	ctx     context.Context    // cancelled when the window closes
	cancel  context.CancelFunc //
	running sync.WaitGroup     // running task goroutines
	uiMu    sync.Mutex         // held by the bridge's callbacks (see bridge.go)
	perWS   map[*core.Workspace]*sync.WaitGroup

	// What is open.
	ws       *core.Workspace
	img      image.Image          // the image as loaded (nil: none)
	imgName  string               // its file name, or the demo image's name
	imgPath  string               // its path ("" for an embedded demo image)
	acts     *core.Activations    // the model's run on img: maps and top-k
	occ      []*viz.Occlusion     // the last occlusion: predicted class first, then the expected one
	occPic   *image.NRGBA         // its rendering
	scan     *analysis.ScanReport // the last dead-filter scan of ws
	scanDir  string               // the probe folder ("" none chosen)
	scanDemo bool                 // the last scan read the demo's embedded probe images
	layer    string               // output tensor of the layer chosen in the layer panel
	// onImage runs once after the next image was run through the model
	// (start-up: occlusion when the window opens on that view).
	onImage func()

	// Widgets.
	heading     *widget.RichText
	status      *widget.Label
	modelRunner *runner // opening models
	imageRunner *runner // running the model on an image
	fileRunner  *runner // exports
	tabs        *container.AppTabs
	tabByView   map[string]*container.TabItem
	layers      *layerPanel
	vModel      *modelView
	vKernels    *kernelView
	vPredict    *predictView
	vMaps       *mapsView
	vOcc        *occlusionView
	vHealth     *healthView
	vScore      *scorecardView
	vPair       *pairView
	vPatches    *patchesView
	errShown    int // errors shown so far (tests read it)
}

func run(o Options) (status int) {
	if !validTheme(o.Theme) {
		fmt.Fprintf(os.Stderr, "fovea: theme %q: use light, dark or leave it out for the system's\n", o.Theme)
		return 2
	}
	if o.View != "" && !validView(o.View) {
		fmt.Fprintf(os.Stderr, "fovea: view %q: use one of %s\n", o.View, viewNames())
		return 2
	}
	if runtime.GOOS == "linux" && os.Getenv("DISPLAY") == "" && os.Getenv("WAYLAND_DISPLAY") == "" {
		fmt.Fprintln(os.Stderr, "fovea: no display to open the window on (DISPLAY and WAYLAND_DISPLAY are unset); the command-line mode needs none: see `fovea help`")
		return 1
	}
	// The graphics driver panics when the display cannot be opened (a DISPLAY
	// naming no server): say so instead of a stack trace.
	defer func() {
		if r := recover(); r != nil {
			fmt.Fprintf(os.Stderr, "fovea: cannot open the window: %v\n", r)
			status = 1
		}
	}()
	envlocale.Fix() // again, for a caller that did not import it first (main does)
	a := app.NewWithID(appID)
	a.SetIcon(appIcon())
	w := a.NewWindow("Fovea")
	u := newUI(a, w, o)
	w.SetCloseIntercept(func() {
		u.close()
		w.Close()
	})
	a.Lifecycle().SetOnStopped(u.close) // File ▸ Quit does not pass the intercept
	u.start()
	w.ShowAndRun()
	return 0
}

// validView reports whether name is one of Views.
func validView(name string) bool {
	for _, v := range Views {
		if v.Name == name {
			return true
		}
	}
	return false
}

func viewNames() string {
	s := ""
	for i, v := range Views {
		if i > 0 {
			s += ", "
		}
		s += v.Name
	}
	return s
}

// newUI builds the window's content and menus; nothing is open yet (see
// start). It applies the theme: Options.Theme, else the one chosen last.
func newUI(a fyne.App, w fyne.Window, o Options) *ui {
	u := &ui{app: a, win: w, opts: o, prefs: a.Preferences(), perWS: map[*core.Workspace]*sync.WaitGroup{}}
	u.ctx, u.cancel = context.WithCancel(context.Background())
	th := o.Theme
	if th == "" {
		th = u.prefs.StringWithFallback(prefTheme, themeSystem)
		if !validTheme(th) {
			th = themeSystem
		}
	}
	a.Settings().SetTheme(themeFor(th))

	u.status = widget.NewLabel("")
	u.status.Truncation = fyne.TextTruncateEllipsis
	u.modelRunner = u.newRunner(false)
	u.imageRunner = u.newRunner(false)
	u.fileRunner = u.newRunner(false)

	u.layers = newLayerPanel(u)
	u.vModel = newModelView(u)
	u.vKernels = newKernelView(u)
	u.vPredict = newPredictView(u)
	u.vMaps = newMapsView(u)
	u.vOcc = newOcclusionView(u)
	u.vHealth = newHealthView(u)
	u.vScore = newScorecardView(u)
	u.vPair = newPairView(u)
	u.vPatches = newPatchesView(u)

	contents := map[string]fyne.CanvasObject{
		viewModel: u.vModel.content, viewKernels: u.vKernels.content, viewPredict: u.vPredict.content,
		viewMaps: u.vMaps.content, viewOcclusion: u.vOcc.content, viewHealth: u.vHealth.content,
		viewScorecard: u.vScore.content, viewPair: u.vPair.content,
		viewPatches: u.vPatches.content,
	}
	u.tabs = container.NewAppTabs()
	u.tabByView = map[string]*container.TabItem{}
	for _, v := range Views {
		item := container.NewTabItem(v.Title, contents[v.Name])
		u.tabByView[v.Name] = item
		u.tabs.Append(item)
	}
	u.tabs.OnSelected = func(item *container.TabItem) {
		for name, it := range u.tabByView {
			if it == item {
				if u.prefs.String(prefView) != name {
					u.prefs.SetString(prefView, name)
				}
				u.redraw(name)
			}
		}
	}

	u.heading = widget.NewRichText()
	u.heading.Wrapping = fyne.TextWrapOff
	u.heading.Truncation = fyne.TextTruncateEllipsis
	openModel := widget.NewButtonWithIcon("Model…", theme.FolderOpenIcon(), u.chooseModel)
	openImage := widget.NewButtonWithIcon("Image…", theme.FileImageIcon(), u.chooseImage)
	demo := widget.NewButtonWithIcon("Demo", theme.HomeIcon(), func() { u.openDemo(false) })
	var recent *widget.Button
	recent = widget.NewButtonWithIcon("Recent", theme.HistoryIcon(), func() {
		widget.ShowPopUpMenuAtRelativePosition(u.recentMenu(), w.Canvas(), fyne.NewPos(0, recent.Size().Height), recent)
	})
	header := container.NewBorder(nil, nil, nil,
		container.NewHBox(openModel, openImage, demo, recent), u.heading)

	split := container.NewHSplit(u.layers.content, u.tabs)
	split.SetOffset(0.42)
	bottom := container.NewVBox(u.modelRunner.box, u.imageRunner.box, u.fileRunner.box, u.status)
	w.SetContent(container.NewBorder(
		container.NewVBox(header, widget.NewSeparator()),
		container.NewVBox(widget.NewSeparator(), bottom),
		nil, nil, split))
	w.SetMainMenu(u.menu())
	w.SetOnDropped(u.dropped)
	w.Resize(fyne.NewSize(
		float32(u.prefs.FloatWithFallback(prefWidth, defaultWidth)),
		float32(u.prefs.FloatWithFallback(prefHeight, defaultHeight))))
	u.showHeading()
	return u
}

// start opens what the options name (the demo model and a demo image by
// default) and the first view.
func (u *ui) start() {
	view := u.opts.View
	if view == "" {
		view = u.prefs.StringWithFallback(prefView, viewModel)
	}
	if !validView(view) {
		view = viewModel
	}
	u.showView(view)
	if view == viewOcclusion {
		u.onImage = u.vOcc.run
	}
	after := func() {
		if u.opts.Image != "" {
			u.openImage(u.opts.Image)
		} else {
			u.openDemoImage("")
		}
		switch {
		case u.opts.Probe != "":
			u.setProbeDir(u.opts.Probe)
			u.vHealth.run()
		case (u.opts.View == viewHealth || u.opts.View == viewPatches) && u.ws != nil && u.ws.Demo != "":
			u.vHealth.run() // asked for on the command line: show the demo's scan
		}
		switch {
		case u.opts.Data != "":
			u.vScore.setData(u.opts.Data)
			u.vScore.run()
		case u.opts.View == viewScorecard && u.ws != nil && u.ws.Demo != "":
			u.vScore.run() // the demo's probe images
		}
	}
	if u.opts.Model != "" {
		u.openModelThen(u.opts.Model, after)
	} else {
		u.openDemoThen(u.opts.Demo == "unhealthy", after)
	}
}

// showView selects a view's tab (and remembers it, also when it was
// already selected).
func (u *ui) showView(name string) {
	if it, ok := u.tabByView[name]; ok {
		u.tabs.Select(it)
		if u.prefs.String(prefView) != name {
			u.prefs.SetString(prefView, name)
		}
	}
}

// redraw draws a view's pictures again for the space it has now (the window
// may have changed size since they were drawn).
func (u *ui) redraw(view string) {
	switch view {
	case viewKernels:
		u.vKernels.draw()
	case viewMaps:
		u.vMaps.draw()
	case viewHealth:
		u.vHealth.drawTiles()
	}
}

// close remembers the window's size and cancels every task; called when the
// window closes (more than once is harmless).
func (u *ui) close() {
	s := u.win.Canvas().Size()
	if s.Width > 100 && s.Height > 100 {
		u.prefs.SetFloat(prefWidth, float64(s.Width))
		u.prefs.SetFloat(prefHeight, float64(s.Height))
	}
	u.cancel()
}

// wsRunning returns the wait group of the tasks working on ws (a fresh one for
// nil), so that a model is closed only after its last task ended.
func (u *ui) wsRunning(ws *core.Workspace) *sync.WaitGroup {
	if ws == nil {
		return new(sync.WaitGroup)
	}
	wg, ok := u.perWS[ws]
	if !ok {
		wg = new(sync.WaitGroup)
		u.perWS[ws] = wg
	}
	return wg
}

// wait blocks until no task goroutine is running (tests).
func (u *ui) wait() { u.running.Wait() }

// showHeading names the open model and image in the header and the title.
func (u *ui) showHeading() {
	var segs []widget.RichTextSegment
	add := func(text string, style widget.RichTextStyle) {
		segs = append(segs, &widget.TextSegment{Text: text, Style: style})
	}
	inline := func(s widget.RichTextStyle) widget.RichTextStyle { s.Inline = true; return s }
	if u.ws == nil {
		add("No model open", inline(widget.RichTextStyleStrong))
		u.win.SetTitle("Fovea")
	} else {
		name := u.ws.Name()
		add(name, inline(widget.RichTextStyleStrong))
		if u.ws.Demo != "" {
			add("  (built-in demo)", inline(widget.RichTextStyleInline))
		}
		if u.imgName != "" {
			add("   ·   image ", inline(widget.RichTextStyleInline))
			add(u.imgName, inline(widget.RichTextStyleStrong))
		}
		u.win.SetTitle("Fovea — " + name)
	}
	u.heading.Segments = segs
	u.heading.Refresh()
}

// showError shows err in a dialog titled after what failed. Errors from core
// already name the file and the problem.
func (u *ui) showError(what string, err error) {
	u.errShown++
	msg := widget.NewLabel(wrapText(plainError(err), 72))
	d := dialog.NewCustom(what+" failed", "OK", container.NewBorder(nil, nil, widget.NewIcon(theme.ErrorIcon()), nil, msg), u.win)
	d.Show()
}

// lastDir is the folder the file dialogs open in.
func (u *ui) lastDir() string {
	return u.prefs.StringWithFallback(prefDir, "")
}

func (u *ui) rememberDir(path string) {
	if st, err := os.Stat(path); err == nil && st.IsDir() {
		u.prefs.SetString(prefDir, path)
		return
	}
	u.prefs.SetString(prefDir, filepath.Dir(path))
}

// plainError is an error's message as core.Message gives it (no package
// prefixes, the file named once), starting with a capital for a dialog.
func plainError(err error) string {
	msg := core.Message(err)
	if msg == "" {
		return msg
	}
	r, n := utf8.DecodeRuneInString(msg)
	return string(unicode.ToUpper(r)) + msg[n:]
}
