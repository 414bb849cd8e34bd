package gui

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"image"
	"io"
	"os"
	"path"
	"path/filepath"
	"slices"
	"strings"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/dialog"
	"fyne.io/fyne/v2/storage"

	"fovea/app/core"
	"fovea/assets"
	"fovea/modelio/prep"
)

// Kinds of file the window opens, decided by openKind.
const (
	kindModel  = "model"
	kindImage  = "image"
	kindFolder = "folder"
)

func isImageName(path string) bool {
	return slices.Contains(prep.Extensions, strings.ToLower(filepath.Ext(path)))
}

// imageMagic are the first bytes of the image formats the decoder reads
// (PNG, JPEG, GIF, BMP, TIFF both byte orders, WebP's RIFF container).
var imageMagic = [][]byte{
	[]byte("\x89PNG\r\n\x1a\n"), []byte("\xff\xd8\xff"), []byte("GIF8"), []byte("BM"),
	[]byte("II*\x00"), []byte("MM\x00*"), []byte("RIFF"),
}

// openKind decides what a path is: a folder (probe images), a model (.onnx),
// an image (by extension), and otherwise by its first bytes: an image
// signature means an image, anything else is tried as a model, whose reader
// then says what is wrong with it.
func openKind(path string) string {
	st, err := os.Stat(path)
	if err == nil && st.IsDir() {
		return kindFolder
	}
	switch {
	case strings.EqualFold(filepath.Ext(path), ".onnx"):
		return kindModel
	case isImageName(path):
		return kindImage
	}
	f, err := os.Open(path)
	if err != nil {
		return kindModel // the model reader reports the missing file
	}
	defer f.Close()
	head := make([]byte, 12)
	n, _ := io.ReadFull(f, head)
	for _, m := range imageMagic {
		if bytes.HasPrefix(head[:n], m) {
			return kindImage
		}
	}
	return kindModel
}

// openPaths opens what was dropped or named: the first model, then the
// first image, then the first folder (as the probe folder).
func (u *ui) openPaths(paths []string) {
	var model, img, dir string
	for _, p := range paths {
		switch openKind(p) {
		case kindModel:
			model = cmpOr(model, p)
		case kindImage:
			img = cmpOr(img, p)
		case kindFolder:
			dir = cmpOr(dir, p)
		}
	}
	rest := func() {
		if img != "" {
			u.openImage(img)
		}
		if dir != "" {
			u.setProbeDir(dir)
			u.showView(viewHealth)
		}
	}
	if model != "" {
		u.openModelThen(model, rest)
		return
	}
	rest()
}

func cmpOr(a, b string) string {
	if a != "" {
		return a
	}
	return b
}

// dropped handles files dragged onto the window.
func (u *ui) dropped(_ fyne.Position, uris []fyne.URI) {
	var paths []string
	for _, uri := range uris {
		if uri.Scheme() == "file" {
			paths = append(paths, uri.Path())
		}
	}
	u.openPaths(paths)
}

// fileDialogSize is large enough to show long file names.
var fileDialogSize = fyne.NewSize(900, 600)

// openDialog shows a file-open dialog for the extensions and calls open with
// the chosen path.
func (u *ui) openDialog(title string, exts []string, open func(path string)) {
	d := dialog.NewFileOpen(func(r fyne.URIReadCloser, err error) {
		if err != nil {
			u.showError(title, err)
			return
		}
		if r == nil {
			return
		}
		path := r.URI().Path()
		r.Close()
		u.rememberDir(path)
		open(path)
	}, u.win)
	d.SetTitleText(title)
	d.SetFilter(storage.NewExtensionFileFilter(exts))
	u.startIn(d)
	d.Resize(fileDialogSize)
	d.Show()
}

// saveDialog asks where to save a file and calls save with the path. The
// dialog creates the file empty; save replaces it atomically.
func (u *ui) saveDialog(title, name string, exts []string, save func(path string)) {
	d := dialog.NewFileSave(func(w fyne.URIWriteCloser, err error) {
		if err != nil {
			u.showError(title, err)
			return
		}
		if w == nil {
			return
		}
		path := w.URI().Path()
		w.Close()
		if !slices.Contains(exts, strings.ToLower(filepath.Ext(path))) && len(exts) > 0 {
			os.Remove(path) // the empty file the dialog made under the name typed
			path += exts[0]
		}
		u.rememberDir(path)
		save(path)
	}, u.win)
	d.SetTitleText(title)
	d.SetFileName(name)
	d.SetFilter(storage.NewExtensionFileFilter(exts))
	u.startIn(d)
	d.Resize(fileDialogSize)
	d.Show()
}

// startIn opens a file dialog in the folder used last.
func (u *ui) startIn(d *dialog.FileDialog) {
	dir := u.lastDir()
	if dir == "" {
		return
	}
	if l, err := storage.ListerForURI(storage.NewFileURI(dir)); err == nil {
		d.SetLocation(l)
	}
}

func (u *ui) chooseModel() {
	u.openDialog("Open a model", []string{".onnx"}, u.openModel)
}

func (u *ui) chooseImage() {
	u.openDialog("Open an image", prep.Extensions, u.openImage)
}

func (u *ui) chooseProbeDir() {
	d := dialog.NewFolderOpen(func(l fyne.ListableURI, err error) {
		if err != nil {
			u.showError("Choosing a probe folder", err)
			return
		}
		if l == nil {
			return
		}
		u.rememberDir(l.Path())
		u.setProbeDir(l.Path())
	}, u.win)
	d.SetTitleText("Choose a folder of probe images")
	u.startIn(d)
	d.Resize(fileDialogSize)
	d.Show()
}

func (u *ui) chooseLabels() {
	if u.ws == nil {
		return
	}
	u.openDialog("Open a label file", []string{".txt", ".json", ".csv", ".names", ".labels"}, u.loadLabels)
}

// openModel opens the ONNX file at path in place of the open model.
func (u *ui) openModel(path string) { u.openModelThen(path, nil) }

// openModelThen opens a model off the UI goroutine and calls after once it
// is open (not when it fails: the previous model stays open).
func (u *ui) openModelThen(path string, after func()) {
	u.loadModel("Opening "+filepath.Base(path), func(ctx context.Context) (*core.Workspace, error) {
		return core.OpenModel(path)
	}, func() {
		u.addRecent(prefModels, path)
		if after != nil {
			after()
		}
	})
}

// openDemo goes back to the embedded demo model (or its unhealthy twin) and
// the demo image.
func (u *ui) openDemo(unhealthy bool) {
	u.openDemoThen(unhealthy, func() {
		if u.imgPath != "" || u.img == nil {
			u.openDemoImage("")
		}
	})
}

func (u *ui) openDemoThen(unhealthy bool, after func()) {
	what := "Opening the demo model"
	if unhealthy {
		what = "Opening the unhealthy demo model"
	}
	u.loadModel(what, func(ctx context.Context) (*core.Workspace, error) {
		return core.OpenDemo(unhealthy)
	}, after)
}

// loadModel runs open off the UI goroutine, restores the settings saved for
// the model, observes the layer shapes the file leaves open, and shows it.
func (u *ui) loadModel(what string, open func(context.Context) (*core.Workspace, error), after func()) {
	u.modelRunner.launch(what, "", nil, func(ctx context.Context, _ func(int, int)) (result, error) {
		ws, err := open(ctx)
		if err != nil {
			return nil, err
		}
		var restoreErr error
		if ws.Demo == "" {
			_, restoreErr = ws.Restore()
		}
		if err := ws.ObserveShapes(ctx); err != nil {
			ws.Close()
			return nil, err
		}
		return func(current bool) {
			if !current {
				ws.Close()
				return
			}
			u.setWorkspace(ws)
			if restoreErr != nil {
				u.showError("Restoring the settings saved for "+ws.Name(), restoreErr)
			}
			if after != nil {
				after()
			}
		}, nil
	})
}

// setWorkspace puts ws in place of the open model: the old one's tasks are
// stopped and it is closed once they ended; what was computed with it is
// dropped, and the open image runs through the new model.
func (u *ui) setWorkspace(ws *core.Workspace) {
	old := u.ws
	u.ws = ws
	for _, r := range []*runner{u.imageRunner, u.vOcc.runner, u.vHealth.runner, u.fileRunner, u.vScore.runner, u.vScore.thumbs, u.vPair.runner, u.vPair.occRunner, u.vPair.thumbRunner} {
		if r.cur != nil && r.cur.ws == old {
			r.cancel()
		}
	}
	if old != nil {
		wg := u.perWS[old]
		delete(u.perWS, old)
		go func() {
			if wg != nil {
				wg.Wait()
			}
			old.Close()
		}()
	}
	u.acts, u.occ, u.occPic, u.scan, u.layer = nil, nil, nil, nil, ""
	u.showHeading()
	u.layers.refresh()
	u.vModel.refresh()
	u.vKernels.refresh()
	u.vPredict.refresh()
	u.vMaps.refresh()
	u.vOcc.modelChanged()
	u.vHealth.refresh()
	u.vScore.modelChanged()
	u.vPair.modelChanged()
	u.status.SetText(fmt.Sprintf("Opened %s: %d layers, %s parameters", ws.Name(), len(ws.Model.Layers), core.Compact.Count(ws.Model.Total.Params)))
	if u.img != nil {
		u.analyze()
	}
}

// openImage loads the image at path and runs the model on it.
func (u *ui) openImage(path string) {
	u.runImage(filepath.Base(path), path, func() (image.Image, error) { return core.LoadImage(path) })
}

// openDemoImage opens one of the embedded demo images ("" = the one the
// demo model gets wrong, else the first).
func (u *ui) openDemoImage(name string) {
	if name == "" {
		name = startImage()
		if name == "" {
			return
		}
	}
	u.runImage(name, "", func() (image.Image, error) { return core.DemoImage(name) })
}

// runImage loads an image and runs the open model on it, off the UI
// goroutine; on success the image replaces the open one.
func (u *ui) runImage(name, path string, load func() (image.Image, error)) {
	ws := u.ws
	if ws == nil {
		u.showError("Opening "+name, fmt.Errorf("open a model first"))
		return
	}
	u.imageRunner.launch("Running "+ws.Name()+" on "+name, "", ws, func(ctx context.Context, _ func(int, int)) (result, error) {
		img, err := load()
		if err != nil {
			return nil, err
		}
		acts, err := ws.Activations(ctx, img)
		if err != nil {
			return nil, err
		}
		return func(current bool) {
			if !current {
				return
			}
			u.img, u.imgName, u.imgPath = img, name, path
			if path != "" {
				u.addRecent(prefImages, path)
			}
			if path == "" {
				u.vOcc.expectDemoTruth(name)
			}
			u.setActivations(acts)
		}, nil
	})
}

// analyze runs the open model on the open image again (after the model or
// its settings changed).
func (u *ui) analyze() {
	img, name, path := u.img, u.imgName, u.imgPath
	u.runImage(name, path, func() (image.Image, error) { return img, nil })
}

// setActivations shows a run of the model on the open image; occlusions
// computed before are dropped (they were for another image or setting).
func (u *ui) setActivations(acts *core.Activations) {
	u.acts = acts
	u.occ, u.occPic = nil, nil
	u.showHeading()
	u.vPredict.refresh()
	u.vMaps.refresh()
	u.vOcc.imageChanged()
	if f := u.onImage; f != nil {
		u.onImage = nil
		f()
	}
}

// setProbeDir chooses the folder of probe images for the scan and puts it on
// the recent list.
func (u *ui) setProbeDir(dir string) {
	u.scanDir, u.scanDemo = dir, false
	u.addRecent(prefProbes, dir)
	u.vHealth.refresh()
}

// loadLabels reads a label file and puts its labels in force for the open
// model, remembered with its settings.
func (u *ui) loadLabels(path string) {
	ws := u.ws
	if err := ws.LoadLabels(path); err != nil {
		u.showError("Reading labels", err)
		return
	}
	if ws.Demo == "" {
		if err := ws.Remember(); err != nil {
			u.showError("Saving the settings of "+ws.Name(), err)
		}
	}
	u.vModel.refresh()
	u.vOcc.modelChanged()
	if u.img != nil {
		u.analyze()
	}
}

// addRecent puts path first in the recent list under key.
func (u *ui) addRecent(key, path string) {
	if abs, err := filepath.Abs(path); err == nil {
		path = abs
	}
	list := u.prefs.StringList(key)
	list = slices.DeleteFunc(list, func(s string) bool { return s == path })
	list = append([]string{path}, list...)
	if len(list) > recentLimit {
		list = list[:recentLimit]
	}
	u.prefs.SetStringList(key, list)
	u.win.SetMainMenu(u.menu())
}

// recentMenu lists the recent models, images and probe folders.
func (u *ui) recentMenu() *fyne.Menu {
	var items []*fyne.MenuItem
	section := func(title, key string, open func(string)) {
		list := u.prefs.StringList(key)
		if len(list) == 0 {
			return
		}
		if len(items) > 0 {
			items = append(items, fyne.NewMenuItemSeparator())
		}
		items = append(items, &fyne.MenuItem{Label: title, Disabled: true})
		for _, p := range list {
			items = append(items, fyne.NewMenuItem(shortPath(p), func() { open(p) }))
		}
	}
	section("Models", prefModels, u.openModel)
	section("Images", prefImages, u.openImage)
	section("Probe folders", prefProbes, func(p string) { u.setProbeDir(p); u.showView(viewHealth) })
	if len(items) == 0 {
		items = append(items, &fyne.MenuItem{Label: "Nothing opened yet", Disabled: true})
	} else {
		items = append(items, fyne.NewMenuItemSeparator(), fyne.NewMenuItem("Clear this list", func() {
			for _, k := range []string{prefModels, prefImages, prefProbes} {
				u.prefs.SetStringList(k, nil)
			}
			u.win.SetMainMenu(u.menu())
		}))
	}
	return fyne.NewMenu("Recent", items...)
}

// shortPath shows a path as "name — folder", with the home folder as ~.
func shortPath(p string) string {
	dir := filepath.Dir(p)
	if home, err := os.UserHomeDir(); err == nil && home != "" && strings.HasPrefix(dir, home) {
		dir = "~" + strings.TrimPrefix(dir, home)
	}
	return filepath.Base(p) + "  —  " + dir
}

// startImage is the demo image the window opens on: the genuine mistake of
// the demo model that demo.json names, so that the explanation flow has
// something to explain; the first demo image when there is none.
func startImage() string {
	names := core.DemoImages()
	var info struct {
		Wrong struct {
			File string `json:"file"`
		} `json:"misclassified"`
	}
	if b, err := assets.Files.ReadFile(assets.InfoFile); err == nil && json.Unmarshal(b, &info) == nil {
		if n := path.Base(info.Wrong.File); slices.Contains(names, n) {
			return n
		}
	}
	if len(names) > 0 {
		return names[0]
	}
	return ""
}
