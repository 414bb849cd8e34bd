package gui

import (
	"fmt"
	"slices"
	"strconv"
	"strings"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/widget"

	"fovea/modelio"
	"fovea/viz"
)

// kernelView is the "Kernels" tab: the filters of a convolution (the first
// by default) as tiles, with the filters a weight check or the last scan
// flagged framed and listed.
type kernelView struct {
	u       *ui
	content fyne.CanvasObject

	layer     *widget.Select
	slice     *widget.Select
	perFilter *widget.Check
	byNorm    *widget.Check
	numbers   *widget.Check
	pic       *picture
	about     *widget.Label
	flagged   *widget.Label
	legend    *widget.Label

	convs []modelio.Layer
	info  []viz.TileInfo // the tiles drawn last (tests read them)
	quiet bool
}

// flagNames are the flags as the window words them.
var flagNames = map[modelio.Flag]string{
	modelio.FlagDead:       "dead",
	modelio.FlagRare:       "rare",
	modelio.FlagConstant:   "constant output",
	modelio.FlagZeroKernel: "all-zero weights",
	modelio.FlagDuplicate:  "near-duplicate",
}

func flagText(flags []modelio.Flag) string {
	var out []string
	for _, f := range flags {
		if n, ok := flagNames[f]; ok {
			out = append(out, n)
		} else {
			out = append(out, string(f))
		}
	}
	return strings.Join(out, ", ")
}

// Legends of the tiles: how weights become colours, then the marks.
const (
	legendRGB = "Each weight is a colour made of its three input channels, mid-grey for zero"
	legendOne = "Each weight of the chosen input channel is orange when positive, blue when negative, pale when near zero"
	legendEnd = ", on one scale for all filters unless each is scaled on its own. " +
		"Frames: solid red = dead or all-zero weights, dashed amber = rare, constant or near-duplicate. " +
		"Under a tile: #filter index, |w| = L2 norm of the whole filter (all input channels, also when one is drawn), " +
		"then letters: X dead, R rare, C constant, Z zero weights, D duplicate."
)

func newKernelView(u *ui) *kernelView {
	v := &kernelView{u: u}
	v.layer = widget.NewSelect(nil, func(string) { v.draw() })
	v.slice = widget.NewSelect(nil, func(string) { v.draw() })
	v.perFilter = widget.NewCheck("Scale each filter on its own", func(bool) { v.draw() })
	v.byNorm = widget.NewCheck("Strongest first", func(bool) { v.draw() })
	v.numbers = widget.NewCheck("Numbers", func(bool) { v.draw() })
	v.numbers.Checked = true
	v.pic = newPicture(fyne.NewSize(320, 320), 4)
	v.about = widget.NewLabel("")
	v.about.Wrapping = fyne.TextWrapWord
	v.flagged = widget.NewLabel("")
	v.flagged.Wrapping = fyne.TextWrapWord
	v.flagged.Importance = widget.DangerImportance
	v.legend = hint(legendRGB + legendEnd)
	slice := container.NewGridWrap(fyne.NewSize(170, v.slice.MinSize().Height), v.slice)
	controls := container.NewVBox(
		container.NewHBox(widget.NewLabel("Convolution"), v.layer, slice),
		container.NewHBox(v.perFilter, v.byNorm, v.numbers))
	v.content = container.NewBorder(
		container.NewVBox(controls, v.about),
		container.NewVBox(v.flagged, v.legend),
		nil, nil, v.pic.box)
	return v
}

// refresh lists the open model's convolutions and draws the chosen one.
func (v *kernelView) refresh() {
	ws := v.u.ws
	v.convs = nil
	var names []string
	if ws != nil {
		v.convs = convLayers(ws.Model)
		for _, l := range v.convs {
			names = append(names, l.Name)
		}
	}
	v.quiet = true
	v.layer.Options = names
	if !slices.Contains(names, v.layer.Selected) {
		v.layer.Selected = ""
		if len(names) > 0 {
			v.layer.Selected = names[0]
		}
	}
	v.layer.Refresh()
	v.quiet = false
	v.draw()
}

// draw renders the tiles of the chosen convolution with the current
// options and the flags of the last scan.
func (v *kernelView) draw() {
	if v.quiet {
		return
	}
	ws := v.u.ws
	v.info = nil
	if ws == nil || v.layer.Selected == "" {
		v.pic.set(nil)
		v.about.SetText("This model has no convolution, so there are no filters to draw.")
		v.flagged.SetText("")
		v.slice.Hide()
		return
	}
	k, err := ws.Kernels(v.layer.Selected)
	if err != nil {
		v.pic.set(nil)
		v.about.SetText(plainError(err))
		return
	}
	// The input-channel choice: RGB for colour first layers, one channel
	// otherwise (a deeper filter has too many channels to show at once).
	choices := []string{}
	if k.C == 3 {
		choices = append(choices, "as colour")
	}
	for c := range k.C {
		choices = append(choices, "input channel "+strconv.Itoa(c))
	}
	v.quiet = true
	v.slice.Options = choices
	if !containsStr(choices, v.slice.Selected) {
		v.slice.Selected = choices[0]
	}
	v.slice.Refresh()
	v.quiet = false
	if len(choices) > 1 {
		v.slice.Show()
	} else {
		v.slice.Hide()
	}
	slice := -1
	if s, ok := strings.CutPrefix(v.slice.Selected, "input channel "); ok && (k.C != 1) {
		slice, _ = strconv.Atoi(s)
	}
	if slice == -1 && k.C == 3 {
		v.legend.SetText(legendRGB + legendEnd)
	} else {
		v.legend.SetText(legendOne + legendEnd)
	}
	// Frames, gaps and the number line under each tile take about 30
	// pixels; the rows above and below the picture about 170.
	extra := 14
	if v.numbers.Checked {
		extra = 32
	}
	// The colour legend under the tiles takes about 80 pixels more.
	cols, cell := gridFit(k.M, max(k.KH, k.KW), extra, v.u.area(fyne.NewSize(16, 250)), 40)
	c, _ := ws.Prep()
	img, info, err := ws.Tiles(v.layer.Selected, viz.TileOptions{
		Cell: max(2, cell), Columns: cols, PerFilter: v.perFilter.Checked, SortByNorm: v.byNorm.Checked,
		Slice: slice, BGR: c.BGR, Labels: v.numbers.Checked,
	}, v.u.scan)
	if err != nil {
		v.pic.set(nil)
		v.about.SetText(plainError(err))
		return
	}
	v.info = info
	v.pic.set(img)
	what := fmt.Sprintf("%d filters of %d×%d over %d input channel", k.M, k.KH, k.KW, k.C)
	if k.C != 1 {
		what += "s"
	}
	if v.u.scan != nil {
		what += fmt.Sprintf(". Marks include the scan of %d probe images.", v.u.scan.Images)
	} else {
		what += ". Marks come from the weights only; scan probe images under Filter health to mark dead and rare filters."
	}
	v.about.SetText(what)
	var lines []string
	for _, t := range info {
		if len(t.Flags) > 0 {
			lines = append(lines, fmt.Sprintf("filter %d: %s", t.Index, flagText(t.Flags)))
		}
	}
	if len(lines) == 0 {
		v.flagged.SetText("No filter is flagged.")
		v.flagged.Importance = widget.MediumImportance
	} else {
		slicesSortByIndex(lines)
		v.flagged.SetText(fmt.Sprintf("%d flagged: %s", len(lines), strings.Join(lines, " · ")))
		v.flagged.Importance = widget.DangerImportance
	}
	v.flagged.Refresh()
}

func containsStr(list []string, s string) bool { return slices.Contains(list, s) }

// slicesSortByIndex orders "filter N: …" lines by N.
func slicesSortByIndex(lines []string) {
	num := func(s string) int {
		s = strings.TrimPrefix(s, "filter ")
		n, _ := strconv.Atoi(s[:strings.IndexByte(s, ':')])
		return n
	}
	slices.SortFunc(lines, func(a, b string) int { return num(a) - num(b) })
}
