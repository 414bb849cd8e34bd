package gui

import (
	"fmt"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/widget"

	"fovea/app/core"
	"fovea/modelio"
)

// layerColumns are the layer panel's columns: title, width, and whether the
// values are numbers (aligned right).
var layerColumns = []struct {
	title string
	width float32
	num   bool
}{
	{"Layer", 118, false},
	{"Op", 76, false},
	{"W × H × D", 86, true},
	{"Params", 60, true},
	{"MACs", 60, true},
	{"Memory", 70, true},
	{"RF", 36, true},
}

// layerPanel is the side panel: every layer of the open model with its
// output volume, parameters, multiply-accumulates, output memory and
// receptive field. Choosing a row shows that layer's activation maps.
type layerPanel struct {
	u       *ui
	table   *widget.Table
	totals  *widget.Label
	content fyne.CanvasObject
	rows    []modelio.Layer
	quiet   bool      // selection changed by the window, not the user
	widths  []float32 // the column widths in force (fitColumns)
}

func newLayerPanel(u *ui) *layerPanel {
	p := &layerPanel{u: u}
	p.table = widget.NewTable(
		func() (int, int) { return len(p.rows), len(layerColumns) },
		func() fyne.CanvasObject {
			l := widget.NewLabel("conv_name_long")
			l.Truncation = fyne.TextTruncateEllipsis
			return l
		},
		func(id widget.TableCellID, o fyne.CanvasObject) {
			l := o.(*widget.Label)
			text := p.cell(id.Row, id.Col)
			if id.Col == 0 {
				text = middleEllipsis(text, nameMax)
			}
			l.SetText(text)
			if layerColumns[id.Col].num {
				l.Alignment = fyne.TextAlignTrailing
			} else {
				l.Alignment = fyne.TextAlignLeading
			}
			l.Refresh()
		})
	p.table.ShowHeaderRow = true
	p.table.CreateHeader = func() fyne.CanvasObject {
		return widget.NewLabelWithStyle("", fyne.TextAlignLeading, fyne.TextStyle{Bold: true})
	}
	p.table.UpdateHeader = func(id widget.TableCellID, o fyne.CanvasObject) {
		l := o.(*widget.Label)
		if id.Col >= 0 {
			l.SetText(layerColumns[id.Col].title)
			if layerColumns[id.Col].num {
				l.Alignment = fyne.TextAlignTrailing
			} else {
				l.Alignment = fyne.TextAlignLeading
			}
		}
		l.Refresh()
	}
	for i, c := range layerColumns {
		p.table.SetColumnWidth(i, c.width)
	}
	p.table.OnSelected = func(id widget.TableCellID) {
		if p.quiet || id.Row < 0 || id.Row >= len(p.rows) {
			return
		}
		u.chooseLayer(p.rows[id.Row].Output, true)
	}
	p.totals = widget.NewLabel("")
	p.totals.Wrapping = fyne.TextWrapWord
	title := widget.NewLabelWithStyle("Layers", fyne.TextAlignLeading, fyne.TextStyle{Bold: true})
	p.content = container.NewBorder(container.NewBorder(nil, nil, title, nil, note("Choose a row to see its activation maps.")),
		p.totals, nil, nil, p.table)
	return p
}

// cell renders one value of the table.
func (p *layerPanel) cell(row, col int) string {
	if row < 0 || row >= len(p.rows) {
		return ""
	}
	r := core.NewLayerRow(p.rows[row], core.Compact)
	switch col {
	case 0:
		return r.Name
	case 1:
		return r.Op
	case 2:
		return r.Volume
	case 3:
		return r.Params
	case 4:
		return r.MACs
	case 5:
		return r.Memory
	case 6:
		return r.RF
	}
	return ""
}

// refresh shows the open model's layers.
func (p *layerPanel) refresh() {
	ws := p.u.ws
	p.rows = nil
	p.totals.SetText("")
	if ws != nil {
		p.rows = ws.Model.Layers
		t := ws.Model.Total
		p.totals.SetText(fmt.Sprintf("%d layers · %s parameters · %s MACs per image · %s of outputs per image · RF in pixels of the input",
			len(p.rows), core.Compact.Count(t.Params), core.Compact.Count(t.MACs), core.Compact.Bytes(t.Bytes)))
	}
	p.fitColumns()
	p.quiet = true
	p.table.UnselectAll()
	p.quiet = false
	p.table.Refresh()
	p.table.ScrollToTop()
}

// show selects the row of the layer with output tensor out, without acting
// on it.
func (p *layerPanel) show(out string) {
	for i, l := range p.rows {
		if l.Output == out {
			p.quiet = true
			p.table.Select(widget.TableCellID{Row: i, Col: 0})
			p.quiet = false
			return
		}
	}
}
