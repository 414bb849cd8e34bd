package gui

import (
	"fmt"
	"net/url"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/dialog"
	"fyne.io/fyne/v2/driver/desktop"
	"fyne.io/fyne/v2/widget"

	"fovea/app/core"
	"fovea/modelio/infer"
)

// Keyboard shortcuts, shown in the menus (Ctrl, or Cmd on macOS).
var (
	keyOpenModel = shortcut(fyne.KeyO, 0)
	keyOpenImage = shortcut(fyne.KeyI, 0)
	keyDemo      = shortcut(fyne.KeyD, 0)
	keyRun       = shortcut(fyne.KeyR, 0)
	keyScan      = shortcut(fyne.KeyR, fyne.KeyModifierShift)
	keyExport    = shortcut(fyne.KeyE, 0)
	keyExportCSV = shortcut(fyne.KeyE, fyne.KeyModifierShift)
	keyStop      = shortcut(fyne.KeyPeriod, 0)
)

func shortcut(k fyne.KeyName, extra fyne.KeyModifier) *desktop.CustomShortcut {
	return &desktop.CustomShortcut{KeyName: k, Modifier: fyne.KeyModifierShortcutDefault | extra}
}

// menu builds the main menu; it is rebuilt when the recent files or the
// theme change.
func (u *ui) menu() *fyne.MainMenu {
	item := func(label string, key fyne.Shortcut, action func()) *fyne.MenuItem {
		return &fyne.MenuItem{Label: label, Shortcut: key, Action: action}
	}
	recent := fyne.NewMenuItem("Open recent", nil)
	recent.ChildMenu = u.recentMenu()
	file := fyne.NewMenu("File",
		item("Open model…", keyOpenModel, u.chooseModel),
		item("Open image…", keyOpenImage, u.chooseImage),
		item("Open label file…", nil, u.chooseLabels),
		item("Choose probe folder…", nil, u.chooseProbeDir),
		item("Compare with another model…", nil, u.vPair.choose),
		recent,
		fyne.NewMenuItemSeparator(),
		item("Back to the demo", keyDemo, func() { u.openDemo(false) }),
		item("Open the unhealthy demo", nil, func() { u.openDemo(true) }),
		fyne.NewMenuItemSeparator(),
		item("Export explanation picture…", keyExport, u.vOcc.export),
		item("Export scan table as CSV…", keyExportCSV, u.vHealth.exportCSV),
		item("Export confusion matrix as PNG…", nil, u.vScore.exportPNG),
		item("Export per-class table as CSV…", nil, u.vScore.exportCSV),
	)
	analyse := fyne.NewMenu("Analyse",
		item("Run occlusion", keyRun, u.vOcc.run),
		item("Scan probe folder", keyScan, u.vHealth.run),
		item("Evaluate labelled images", nil, u.vScore.run),
		fyne.NewMenuItemSeparator(),
		item("Stop everything", keyStop, u.stopAll),
	)
	var views []*fyne.MenuItem
	for i, v := range Views {
		name := v.Name
		views = append(views, item(v.Title, shortcut(fyne.KeyName(fmt.Sprint(i+1)), 0), func() { u.showView(name) }))
	}
	current := u.prefs.StringWithFallback(prefTheme, themeSystem)
	if u.opts.Theme != "" {
		current = u.opts.Theme
	}
	themeItem := func(label, choice string) *fyne.MenuItem {
		it := item(label, nil, func() { u.setTheme(choice) })
		it.Checked = current == choice
		return it
	}
	views = append(views, fyne.NewMenuItemSeparator(),
		themeItem("Desktop theme", themeSystem), themeItem("Light theme", themeLight), themeItem("Dark theme", themeDark))
	help := fyne.NewMenu("Help",
		item("Reading the pictures", nil, u.showReading),
		item("About Fovea", nil, u.showAbout),
	)
	return fyne.NewMainMenu(file, analyse, fyne.NewMenu("View", views...), help)
}

// setTheme switches the theme and remembers the choice.
func (u *ui) setTheme(choice string) {
	u.opts.Theme = ""
	u.prefs.SetString(prefTheme, choice)
	u.app.Settings().SetTheme(themeFor(choice))
	u.win.SetMainMenu(u.menu())
}

// stopAll cancels every running task.
func (u *ui) stopAll() {
	for _, r := range []*runner{u.modelRunner, u.imageRunner, u.fileRunner, u.vOcc.runner, u.vHealth.runner, u.vScore.runner, u.vScore.thumbs} {
		r.cancel()
	}
}

// readingText explains the pictures and their limits.
const readingText = `Kernels: each tile is one first-layer filter, drawn at the size it is applied. Mid-grey is zero; with a shared scale, faint tiles are weak filters.

Layer maps: one small picture per channel of the chosen layer's output. A layer with no negative value (after a ReLU) runs from dark violet at zero to pale yellow at its strongest response; a layer with negative values (a convolution before its ReLU) is near-white at zero, orange where positive, blue where negative. The legend says whether the scale is shared across the layer or each channel's own; a channel over the image has the same colours and scale as its tile. The receptive field says how much of the image one value of that layer can see.

Occlusion: a grey square slides over the image; each position is coloured by how much hiding it lowered the score of a class. Warm colours: hiding that area hurt the class (the model relied on it). Cool colours: hiding it helped. Both heatmaps share one colour scale.

Filter health: a filter that never responds on any probe image (dead), rarely responds (rare) or has all-zero weights passes little or nothing on. A few can be normal; many point at a training problem (for example a learning rate far too high).

Caution: every picture here is evidence about this model on these images, not proof of why it decides. Do not base safety-critical decisions on it without proper validation.`

func (u *ui) showReading() {
	l := widget.NewLabel(wrapText(readingText, 90))
	dialog.NewCustom("Reading the pictures", "Close", container.NewVScroll(l), u.win).Show()
}

func (u *ui) showAbout() {
	lib := core.Library()
	if lib == "" {
		lib = u.opts.ORTLib
	}
	name := "Fovea"
	if v := u.app.Metadata().Version; v != "" {
		name += " " + v
	}
	text := fmt.Sprintf("%s\nSee what a trained image classifier responds to.\n\nONNX Runtime %s\n%s",
		name, infer.RuntimeVersion, lib)
	src, _ := url.Parse("https://onnx.ai/")
	dialog.NewCustom("About Fovea", "Close", container.NewVBox(widget.NewLabel(wrapText(text, 80)),
		widget.NewHyperlink("The ONNX format", src)), u.win).Show()
}
