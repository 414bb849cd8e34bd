package gui

import (
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"

	"fovea/app/core"
	"fovea/modelio"
	"fovea/modelio/prep"
)

// modelView is the "Model" tab: what the file is (inputs, outputs, classes,
// size), how images are prepared for it, and its class labels. The
// preparation and the labels are editable and remembered per model.
type modelView struct {
	u       *ui
	content fyne.CanvasObject

	summary *widget.Form
	notes   *widget.Label

	prepFrom *widget.Label
	preset   *widget.Select
	size     *widget.Entry
	channels *widget.Select
	order    *widget.Select
	vrange   *widget.Select
	mean     *widget.Entry
	std      *widget.Entry
	layout   *widget.Select
	resize   *widget.SelectEntry // a choice or a typed crop:S
	bg       *widget.Entry
	apply    *widget.Button

	labelsFrom *widget.Label
	labels     *widget.Entry
}

const presetCustom = "custom"

// Choices of the preparation selects, as shown.
var (
	channelChoices = []string{"3 (colour)", "1 (grey)"}
	orderChoices   = []string{"RGB", "BGR"}
	rangeChoices   = []string{prep.RangeUnit, prep.RangeByte, prep.RangeSigned}
	layoutChoices  = []string{string(modelio.LayoutNCHW), string(modelio.LayoutNHWC)}
	// crop:256 is the common evaluation pipeline for 224-pixel inputs (shorter
	// side to 256, centre cut); any crop:S can be typed.
	resizeChoices = []string{prep.ResizeStretch, prep.ResizeCrop, "crop:256"}
)

func newModelView(u *ui) *modelView {
	v := &modelView{u: u}
	v.summary = widget.NewForm()
	v.notes = widget.NewLabel("")
	v.notes.Wrapping = fyne.TextWrapWord
	v.notes.Importance = widget.WarningImportance

	var presets []string
	for _, p := range prep.Presets() {
		presets = append(presets, p.Name)
	}
	presets = append(presets, presetCustom)
	v.preset = widget.NewSelect(presets, func(name string) {
		p, ok := prep.PresetNamed(name)
		if !ok {
			return
		}
		v.mean.SetText(triple(p.Mean))
		v.std.SetText(triple(p.Std))
		v.vrange.SetSelected(p.Range)
		v.order.SetSelected(orderChoices[b2i(p.BGR)])
	})
	v.size = widget.NewEntry()
	v.channels = widget.NewSelect(channelChoices, nil)
	v.order = widget.NewSelect(orderChoices, nil)
	v.vrange = widget.NewSelect(rangeChoices, nil)
	v.mean = widget.NewEntry()
	v.std = widget.NewEntry()
	v.layout = widget.NewSelect(layoutChoices, nil)
	v.resize = widget.NewSelectEntry(resizeChoices)
	v.bg = widget.NewEntry()
	v.prepFrom = note("")
	v.apply = widget.NewButtonWithIcon("Apply and remember", theme.ConfirmIcon(), v.applyPrep)
	v.apply.Importance = widget.HighImportance
	undo := widget.NewButtonWithIcon("Undo edits", theme.ContentUndoIcon(), v.refresh)
	prepForm := widget.NewForm(
		widget.NewFormItem("Preset", v.preset),
		widget.NewFormItem("Input size", v.size),
		widget.NewFormItem("Channels", v.channels),
		widget.NewFormItem("Channel order", v.order),
		widget.NewFormItem("Value range", v.vrange),
		widget.NewFormItem("Mean", v.mean),
		widget.NewFormItem("Std", v.std),
		widget.NewFormItem("Layout", v.layout),
		widget.NewFormItem("Resize", v.resize),
		widget.NewFormItem("Background", v.bg),
	)
	v.size.SetPlaceHolder("width x height")
	v.mean.SetPlaceHolder("r, g, b")
	v.std.SetPlaceHolder("r, g, b")
	v.bg.SetPlaceHolder("#rrggbb (shows through transparency)")
	v.resize.SetPlaceHolder("stretch, crop or crop:S (shorter side to S, then the centre)")

	v.labelsFrom = note("")
	v.labels = widget.NewMultiLineEntry()
	v.labels.SetPlaceHolder("one class name per line, class 0 first")
	loadLabels := widget.NewButtonWithIcon("Load file…", theme.FolderOpenIcon(), u.chooseLabels)
	useLabels := widget.NewButtonWithIcon("Apply", theme.ConfirmIcon(), v.applyLabels)

	v.labels.SetMinRowsVisible(7)
	left := container.NewVScroll(container.NewVBox(heading("What the file holds"), v.summary, v.notes,
		widget.NewSeparator(),
		container.NewBorder(nil, nil, heading("Class names"), container.NewHBox(useLabels, loadLabels)),
		v.labelsFrom,
		v.labels,
	))
	right := container.NewVScroll(container.NewVBox(
		heading("How images are prepared"),
		v.prepFrom,
		prepForm,
		container.NewHBox(v.apply, undo),
		hint("Settings are checked against the model's input and remembered for this model file (by its content), with the class names."),
	))
	v.content = container.NewPadded(container.NewGridWithColumns(2, left, right))
	return v
}

// heading is a section title inside a view.
func heading(text string) *widget.Label {
	return widget.NewLabelWithStyle(text, fyne.TextAlignLeading, fyne.TextStyle{Bold: true})
}

// hint is secondary, wrapped text: italic in the normal text colour (the
// theme's faint colour is hard to read on white).
func hint(text string) *widget.Label {
	l := widget.NewLabel(text)
	l.Wrapping = fyne.TextWrapWord
	l.TextStyle.Italic = true
	return l
}

// note is a one-line secondary text, cut with an ellipsis when too long.
func note(text string) *widget.Label {
	l := widget.NewLabel(text)
	l.Truncation = fyne.TextTruncateEllipsis
	l.TextStyle.Italic = true
	return l
}

func b2i(b bool) int {
	if b {
		return 1
	}
	return 0
}

// triple prints three values the way ParseTriple reads them.
func triple(v [3]float32) string {
	return fmt.Sprintf("%g, %g, %g", v[0], v[1], v[2])
}

// refresh shows the open model; it also discards edits not applied.
func (v *modelView) refresh() {
	ws := v.u.ws
	v.summary.Items = nil
	if ws == nil {
		v.summary.Refresh()
		return
	}
	m := ws.Model
	add := func(key, value string) {
		l := widget.NewLabel(value)
		l.Wrapping = fyne.TextWrapWord
		v.summary.Append(key, l)
	}
	add("File", m.Name)
	switch ws.Demo {
	case "":
		add("Folder", filepath.Dir(m.Path))
	default:
		add("Source", "built-in demo ("+ws.Demo+")")
	}
	format := fmt.Sprintf("ONNX IR %d", m.IRVersion)
	if op, ok := m.Opsets[""]; ok {
		format += fmt.Sprintf(", opset %d", op)
	}
	if m.Producer != "" {
		format += ", from " + strings.TrimSpace(m.Producer+" "+m.ProducerVersion)
	}
	add("Format", format)
	for _, in := range m.Inputs {
		if in.Weight {
			continue
		}
		s := fmt.Sprintf("%s: %s %s", in.Name, in.ElemType, in.Shape)
		if m.Image != nil && m.Image.Name == in.Name {
			s += " (" + strings.ToUpper(string(m.Image.Layout)) + " image)"
		}
		add("Input", s)
	}
	for _, out := range m.Outputs {
		shape := out.Shape.String()
		if out.Shape == nil {
			if l, ok := ws.Layer(out.Name); ok && l.Shape != nil {
				how := "inferred"
				if l.ShapeSource == modelio.SourceObserved {
					how = "seen in a run"
				}
				shape = l.Shape.String() + " (" + how + "; the file does not declare it)"
			}
		}
		add("Output", fmt.Sprintf("%s: %s %s", out.Name, out.ElemType, shape))
	}
	classes := "not fixed by the file"
	if n := ws.Classes(); n > 0 {
		classes = fmt.Sprint(n)
	}
	add("Classes", classes)
	convs := 0
	for _, l := range m.Layers {
		if l.Op == "Conv" {
			convs++
		}
	}
	add("Layers", fmt.Sprintf("%d, of which %d convolutions", len(m.Layers), convs))
	add("Parameters", fmt.Sprintf("%s (%d)", core.Compact.Count(m.Total.Params), m.Total.Params))
	add("MACs per image", core.Compact.Count(m.Total.MACs))
	add("Output memory", core.Compact.Bytes(m.Total.Bytes)+" per image (float32)")
	v.summary.Refresh()
	notes := slices.Clone(m.Notes)
	notes = append(notes, ws.GuessNotes()...)
	v.notes.SetText(strings.Join(notes, "\n"))
	v.notes.Hidden = len(notes) == 0
	v.notes.Refresh()

	c, from := ws.Prep()
	v.prepFrom.SetText("In force: " + from)
	name := c.Preset()
	if name == "" {
		name = presetCustom
	}
	v.preset.SetSelected(name)
	v.size.SetText(fmt.Sprintf("%dx%d", c.Width, c.Height))
	v.channels.SetSelected(channelChoices[b2i(c.Channels == 1)])
	v.order.SetSelected(orderChoices[b2i(c.BGR)])
	v.vrange.SetSelected(c.Range)
	v.mean.SetText(triple(c.Mean))
	v.std.SetText(triple(c.Std))
	v.layout.SetSelected(string(c.Layout))
	v.resize.SetText(c.Resize)
	v.bg.SetText(fmt.Sprintf("#%02x%02x%02x", c.Background.R, c.Background.G, c.Background.B))

	labels, lfrom := ws.Labels()
	v.labels.SetText(strings.Join(labels, "\n"))
	if strings.HasPrefix(lfrom, labelsDir()) {
		lfrom = "edited here"
	}
	v.labelsFrom.SetText(fmt.Sprintf("From %s; one name per line, class 0 first.", lfrom))
}

// labelsDir is where labels edited in the window are kept, one file per
// model (named by the model file's hash), beside the per-model settings.
func labelsDir() string {
	dir, err := os.UserConfigDir()
	if err != nil {
		return ""
	}
	return filepath.Join(dir, "fovea", "labels")
}

// applyLabels puts the edited class names in force: they are written to a
// label file of the window's own (atomically) and loaded from there, so the
// model's settings remember them like any label file.
func (v *modelView) applyLabels() {
	u := v.u
	ws := u.ws
	if ws == nil {
		return
	}
	text := strings.TrimRight(strings.ReplaceAll(v.labels.Text, "\r\n", "\n"), "\n ")
	dir := labelsDir()
	if dir == "" || ws.Hash == "" {
		u.showError("Changing the class names", fmt.Errorf("no folder to keep edited class names in"))
		return
	}
	path := filepath.Join(dir, ws.Hash+".txt")
	err := os.MkdirAll(dir, 0o755)
	if err == nil {
		err = core.WriteFile(path, func(w io.Writer) error { _, err := io.WriteString(w, text+"\n"); return err })
	}
	if err != nil {
		u.showError("Saving the class names", err)
		return
	}
	u.loadLabels(path)
}

// applyPrep puts the edited preparation in force, remembers it for the
// model and runs the open image again.
func (v *modelView) applyPrep() {
	u := v.u
	ws := u.ws
	if ws == nil {
		return
	}
	c, _ := ws.Prep()
	fields := []struct{ key, value string }{
		{"size", v.size.Text},
		{"channels", strings.Fields(v.channels.Selected + " 3")[0]},
		{"order", strings.ToLower(v.order.Selected)},
		{"range", v.vrange.Selected},
		{"mean", v.mean.Text},
		{"std", v.std.Text},
		{"layout", v.layout.Selected},
		{"resize", v.resize.Text},
		{"background", v.bg.Text},
	}
	for _, f := range fields {
		if err := c.Set(f.key, f.value); err != nil {
			u.showError("Changing the input preparation", err)
			return
		}
	}
	if err := ws.SetPrep(c); err != nil {
		u.showError("Changing the input preparation", err)
		return
	}
	if ws.Demo == "" {
		if err := ws.Remember(); err != nil {
			u.showError("Saving the settings of "+ws.Name(), err)
		}
	}
	v.refresh()
	u.vOcc.modelChanged()
	if u.img != nil {
		u.analyze()
	}
}

// convLayers lists the model's convolutions, in execution order.
func convLayers(m *modelio.Model) []modelio.Layer {
	var out []modelio.Layer
	for _, l := range m.Layers {
		if l.Op == "Conv" {
			out = append(out, l)
		}
	}
	return out
}
