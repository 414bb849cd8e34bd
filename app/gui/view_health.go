package gui

import (
	"cmp"
	"context"
	"fmt"
	"io"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"

	"fovea/app/core"
	"fovea/modelio"
	"fovea/viz"
	"fovea/viz/analysis"
)

// healthView is the "Filter health" tab: a scan of a folder of probe images
// for filters that never or rarely respond, listed in a sortable table and
// marked on the filter tiles.
type healthView struct {
	u       *ui
	content fyne.CanvasObject
	runner  *runner

	folder     *pathLabel // the probe folder, short (~/… or its name), in full on hover
	rare       *widget.Entry
	scanBtn    *widget.Button
	csvBtn     *widget.Button
	onlyFlags  *widget.Check
	summary    *widget.Label
	table      *widget.Table
	tilesAbout *widget.Label
	tiles      *picture

	rows    []analysis.ScanRow // as shown: filtered and sorted
	sortCol int                // column sorted by; -1 = scan order
	desc    bool
	conv    string // convolution whose tiles are shown
	// selected is the row chosen in the table (-1: none); patchBtn opens
	// its strongest patches.
	selected int
	patchBtn *widget.Button
	info     []viz.TileInfo // those tiles (tests read them)
}

// healthColumns are the scan table's columns.
var healthColumns = []struct {
	title string
	width float32
	num   bool
}{
	{"Layer", 92, false},
	{"Filter", 54, true},
	{"Fires on", 76, true},
	{"Peak", 60, true},
	{"Mean", 60, true},
	{"Flags", 130, false},
}

func newHealthView(u *ui) *healthView {
	v := &healthView{u: u, sortCol: 2, selected: -1} // fires, ascending: dead filters first
	v.runner = u.newRunner(true)
	v.folder = newPathLabel()
	v.folder.Truncation = fyne.TextTruncateEllipsis
	choose := widget.NewButtonWithIcon("Folder…", theme.FolderOpenIcon(), u.chooseProbeDir)
	sick := widget.NewButton("Unhealthy demo", func() { u.openDemo(true) })
	v.rare = widget.NewEntry()
	v.rare.SetText("1")
	v.scanBtn = widget.NewButtonWithIcon("Scan", theme.SearchIcon(), v.run)
	v.scanBtn.Importance = widget.HighImportance
	v.csvBtn = widget.NewButtonWithIcon("Export CSV…", theme.DocumentSaveIcon(), v.exportCSV)
	v.onlyFlags = widget.NewCheck("Flagged only", func(bool) { v.fill() })
	v.summary = widget.NewLabel("")
	v.summary.Wrapping = fyne.TextWrapWord

	v.table = widget.NewTable(
		func() (int, int) { return len(v.rows), len(healthColumns) },
		func() fyne.CanvasObject {
			l := widget.NewLabel("relu_name")
			l.Truncation = fyne.TextTruncateEllipsis
			return l
		},
		func(id widget.TableCellID, o fyne.CanvasObject) {
			l := o.(*widget.Label)
			l.SetText(v.cell(id.Row, id.Col))
			l.Alignment = fyne.TextAlignLeading
			if healthColumns[id.Col].num {
				l.Alignment = fyne.TextAlignTrailing
			}
			l.Importance = widget.MediumImportance
			if id.Col == 5 && id.Row < len(v.rows) && len(v.rows[id.Row].Flags) > 0 {
				l.Importance = widget.DangerImportance
			}
			l.Refresh()
		})
	v.table.ShowHeaderRow = true
	v.table.CreateHeader = func() fyne.CanvasObject {
		b := widget.NewButton("", nil)
		b.Importance = widget.LowImportance
		b.Alignment = widget.ButtonAlignLeading
		return b
	}
	v.table.UpdateHeader = func(id widget.TableCellID, o fyne.CanvasObject) {
		b := o.(*widget.Button)
		if id.Col < 0 {
			return
		}
		col := id.Col
		b.SetText(healthColumns[col].title)
		b.Icon = nil
		if col == v.sortCol {
			b.Icon = theme.MenuDropUpIcon()
			if v.desc {
				b.Icon = theme.MenuDropDownIcon()
			}
		}
		b.IconPlacement = widget.ButtonIconTrailingText
		b.OnTapped = func() { v.sortBy(col) }
		b.Refresh()
	}
	for i, c := range healthColumns {
		v.table.SetColumnWidth(i, c.width)
	}
	v.table.OnSelected = func(id widget.TableCellID) {
		v.selected = id.Row
		if id.Row >= 0 && id.Row < len(v.rows) {
			v.patchBtn.Enable()
		}
		if id.Row >= 0 && id.Row < len(v.rows) && v.rows[id.Row].Conv != "" {
			v.conv = v.rows[id.Row].Conv
			v.drawTiles()
		}
	}
	v.tiles = newPicture(fyne.NewSize(240, 240), 4)
	v.tilesAbout = widget.NewLabel("")
	v.tilesAbout.Wrapping = fyne.TextWrapWord

	v.patchBtn = widget.NewButtonWithIcon("Strongest patches", theme.ZoomInIcon(), func() {
		if r := v.selected; r >= 0 && r < len(v.rows) {
			u.showPatches(v.rows[r].Layer, v.rows[r].Index)
		}
	})
	v.patchBtn.Disable()
	bar := container.NewVBox(
		container.NewBorder(nil, nil, widget.NewLabel("Probe images:"), nil, v.folder),
		container.NewHBox(choose, sick, widget.NewLabel("   Rare below"),
			container.NewGridWrap(fyne.NewSize(48, v.rare.MinSize().Height), v.rare), widget.NewLabel("% of images"), v.scanBtn, v.csvBtn, v.patchBtn))
	right := container.NewBorder(v.tilesAbout, nil, nil, nil, v.tiles.box)
	tip := note("Click a column title to sort; choose a row to see its filters.")
	tableSide := container.NewBorder(container.NewBorder(nil, nil, v.onlyFlags, nil, tip), nil, nil, nil, v.table)
	split := container.NewHSplit(tableSide, right)
	split.SetOffset(0.64)
	v.content = container.NewBorder(container.NewVBox(bar, v.runner.box, v.summary), nil, nil, nil, split)
	return v
}

// cell renders one value of the table.
func (v *healthView) cell(row, col int) string {
	if row >= len(v.rows) {
		return ""
	}
	r := v.rows[row]
	switch col {
	case 0:
		return r.Layer
	case 1:
		return strconv.Itoa(r.Index)
	case 2:
		return percent(r.Fires)
	case 3:
		return number(r.Max)
	case 4:
		return number(r.Mean)
	case 5:
		return flagText(r.Flags)
	}
	return ""
}

// sortBy sorts by a column; the same column again reverses the order.
func (v *healthView) sortBy(col int) {
	if v.sortCol == col {
		v.desc = !v.desc
	} else {
		v.sortCol, v.desc = col, false
	}
	v.fill()
}

// sortKeys map the columns analysis.SortRows knows; the others sort here.
var sortKeys = map[int]analysis.SortKey{0: analysis.SortName, 1: analysis.SortOrder, 2: analysis.SortFires, 3: analysis.SortMax, 4: analysis.SortMean}

// fill rebuilds the shown rows from the scan: filter, then sort.
func (v *healthView) fill() {
	v.rows = nil
	if v.u.scan != nil {
		for _, r := range v.u.scan.Rows() {
			if !v.onlyFlags.Checked || len(r.Flags) > 0 {
				v.rows = append(v.rows, r)
			}
		}
	}
	switch key, ok := sortKeys[v.sortCol]; {
	case ok:
		analysis.SortRows(v.rows, key, v.desc)
	case v.sortCol == 5:
		// Flags: by the most severe flag, then how many.
		slices.SortStableFunc(v.rows, func(a, b analysis.ScanRow) int {
			c := cmp.Or(cmp.Compare(severity(a.Flags), severity(b.Flags)), cmp.Compare(len(a.Flags), len(b.Flags)))
			if v.desc {
				return -c
			}
			return c
		})
	}
	v.table.UnselectAll()
	v.selected = -1
	v.patchBtn.Disable()
	v.table.Refresh()
}

// severity ranks a channel's flags: what does nothing first.
func severity(flags []modelio.Flag) int {
	s := 0
	for _, f := range flags {
		switch f {
		case modelio.FlagDead, modelio.FlagZeroKernel:
			s = max(s, 3)
		case modelio.FlagRare, modelio.FlagConstant:
			s = max(s, 2)
		default:
			s = max(s, 1)
		}
	}
	return s
}

// refresh shows the probe folder, the scan and the tiles.
func (v *healthView) refresh() {
	u := v.u
	switch {
	case u.scanDir == "" && u.scanDemo:
		v.folder.setPlain("the demo's probe images")
	case u.scanDir != "":
		v.folder.setPath(u.scanDir)
	case u.ws != nil && u.ws.Demo != "":
		v.folder.setPlain("the demo's probe images (choose a folder to use your own)")
	default:
		v.folder.setPlain("no folder chosen")
	}
	v.csvBtn.Disable()
	if r := u.scan; r != nil {
		v.csvBtn.Enable()
		text := fmt.Sprintf("%d probe images: %d dead, %d rare, %d constant filters; %d with all-zero weights, %d near-duplicates (in %d layers).",
			r.Images, r.Count(modelio.FlagDead), r.Count(modelio.FlagRare), r.Count(modelio.FlagConstant),
			r.Count(modelio.FlagZeroKernel), r.Count(modelio.FlagDuplicate), len(r.Layers))
		if len(r.Skipped) > 0 {
			text += fmt.Sprintf(" %d unreadable files were skipped, the first: %s.", len(r.Skipped), r.Skipped[0])
		}
		v.summary.SetText(text)
	} else if u.ws != nil {
		v.summary.SetText("Scan a folder of typical images to find filters that never respond (dead) or hardly ever do (rare).")
	}
	// The tiles shown first: the first convolution with a flagged filter,
	// else the first convolution.
	v.conv = ""
	if u.ws != nil {
		if cs := convLayers(u.ws.Model); len(cs) > 0 {
			v.conv = cs[0].Name
		}
	}
	if r := u.scan; r != nil {
	find:
		for _, l := range r.Layers {
			for _, c := range l.Channels {
				if len(c.Flags) > 0 && l.Conv != "" {
					v.conv = l.Conv
					break find
				}
			}
		}
	}
	v.fill()
	v.drawTiles()
}

// drawTiles draws the filters of v.conv with the scan's marks.
func (v *healthView) drawTiles() {
	u := v.u
	v.info = nil
	if u.ws == nil || v.conv == "" {
		v.tiles.set(nil)
		v.tilesAbout.SetText("")
		return
	}
	k, err := u.ws.Kernels(v.conv)
	if err != nil {
		v.tiles.set(nil)
		v.tilesAbout.SetText(plainError(err))
		return
	}
	slice := -1
	if k.C != 3 && k.C != 1 {
		slice = 0
	}
	a := u.area(fyne.NewSize(0, 280)) // 80 of them for the colour legend under the tiles
	cols, cell := gridFit(k.M, max(k.KH, k.KW), 14, fyne.NewSize(a.Width*0.34, a.Height), 24)
	img, info, err := u.ws.Tiles(v.conv, viz.TileOptions{Cell: max(2, cell), Columns: cols, Slice: slice}, u.scan)
	if err != nil {
		v.tiles.set(nil)
		v.tilesAbout.SetText(plainError(err))
		return
	}
	v.info = info
	v.tiles.set(img)
	about := "Filters of " + v.conv
	if slice == 0 {
		about += " (input channel 0)"
	}
	flagged := 0
	for _, t := range info {
		if len(t.Flags) > 0 {
			flagged++
		}
	}
	v.tilesAbout.SetText(fmt.Sprintf("%s: %d of %d flagged.", about, flagged, len(info)))
}

// run scans the probe folder (the demo's when none is chosen and the demo
// is open) off the UI goroutine.
func (v *healthView) run() {
	u := v.u
	ws := u.ws
	if ws == nil {
		return
	}
	rare, err := strconv.ParseFloat(strings.TrimSpace(strings.TrimSuffix(v.rare.Text, "%")), 64)
	if err != nil || rare <= 0 || rare >= 100 {
		u.showError("Scanning", fmt.Errorf("rare threshold %q: give a percentage between 0 and 100", v.rare.Text))
		return
	}
	dir := u.scanDir
	demo := dir == ""
	if demo && ws.Demo == "" {
		u.showError("Scanning", fmt.Errorf("choose a folder of probe images first"))
		return
	}
	if u.tabs.Selected() != u.tabByView[viewPatches] {
		u.showView(viewHealth)
	}
	v.runner.launch("Scan", "images", ws, func(ctx context.Context, progress func(int, int)) (result, error) {
		o := analysis.ScanOptions{Rare: rare / 100, SkipUnreadable: true}
		var files []string
		var err error
		if demo {
			o.FS, files, err = core.DemoProbes() // read from the embedded files
		} else {
			files, o.Labels, err = ws.ProbeSet(dir)
		}
		if err != nil {
			return nil, err
		}
		rep, err := ws.Scan(ctx, files, o, progress)
		if err != nil {
			return nil, err
		}
		return func(current bool) {
			if demo {
				u.scanDemo, u.scanDir = true, ""
			}
			if current {
				u.scan = rep
				v.refresh()
				u.vKernels.draw()
				u.vPatches.refresh()
			}
		}, nil
	})
}

// exportCSV asks where to save the scan table and saves it there.
func (v *healthView) exportCSV() {
	u := v.u
	if u.scan == nil {
		u.showError("Exporting the scan", fmt.Errorf("run a scan first"))
		return
	}
	name := strings.TrimSuffix(u.ws.Name(), filepath.Ext(u.ws.Name())) + "-filter-scan.csv"
	u.saveDialog("Export the scan table", name, []string{".csv"}, v.writeCSV)
}

// writeCSV saves the scan table (one row per filter) at path, atomically,
// off the UI goroutine.
func (v *healthView) writeCSV(path string) {
	u := v.u
	r := u.scan
	u.fileRunner.launch("Exporting "+filepath.Base(path), "", nil, func(context.Context, func(int, int)) (result, error) {
		if err := core.WriteFile(path, func(w io.Writer) error { return r.WriteCSV(w) }); err != nil {
			return nil, err
		}
		return func(bool) { u.status.SetText("Saved the scan table to " + path) }, nil
	})
}
