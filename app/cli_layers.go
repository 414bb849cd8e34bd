package main

import (
	"flag"
	"fmt"
	"io"
	"strconv"
	"strings"
	"unicode/utf8"

	"fovea/app/core"
	"fovea/modelio"
)

var layersCommand = &command{
	name:    "layers",
	args:    "[--json] [--model FILE]",
	summary: "print the layer table: volume, parameters, MACs, memory, receptive field",
	about: `Prints one row per layer in execution order: its output volume as width×height×depth,
parameters, multiply-accumulates for one image, the output's memory at float32,
the receptive field and jump (cumulative stride) in input pixels, and whether the
shape was inferred from the file (static) or measured on a run (observed).
Totals are in the last row.`,
	setup: func(fs *flag.FlagSet, cf *common) func(*invocation) int {
		asJSON := fs.Bool("json", false, "print JSON instead of a table")
		return func(j *invocation) int {
			if err := j.ws.ObserveShapes(j.ctx); err != nil {
				// The static table is still worth printing; the unknown
				// shapes say so in their notes.
				fmt.Fprintf(j.stderr, "fovea layers: shapes left unknown: %s\n", core.Message(err))
			}
			if *asJSON {
				return j.writeJSON(layersJSON(j.ws.Model))
			}
			writeLayerTable(j.stdout, j.ws.Model)
			return exitOK
		}
	},
}

// The JSON form of `fovea layers`; field names are part of the interface.
type layersDoc struct {
	Model  string     `json:"model"`
	Inputs []inputDoc `json:"inputs"`
	Layers []layerDoc `json:"layers"`
	Total  totalsDoc  `json:"total"`
	Image  *imageDoc  `json:"image_input,omitempty"`
	Notes  []string   `json:"notes,omitempty"`
}

type inputDoc struct {
	Name string `json:"name"`
	Type string `json:"type,omitempty"`
	// Shape: -1 for a dimension that is not a fixed number; its symbolic
	// name, if any, is at the same index of Params.
	Shape  []int64  `json:"shape"`
	Params []string `json:"symbolic,omitempty"`
	// Weight: the input only carries weights (an architecture-only model).
	Weight bool `json:"weight,omitempty"`
}

type imageDoc struct {
	Name     string         `json:"name"`
	Layout   modelio.Layout `json:"layout"`
	Channels int            `json:"channels"`
	Height   int            `json:"height"`
	Width    int            `json:"width"`
}

type layerDoc struct {
	Name        string              `json:"name"`
	Op          string              `json:"op"`
	Output      string              `json:"output"`
	Shape       []int64             `json:"shape"`
	Volume      string              `json:"volume"`
	Params      int64               `json:"params"`
	MACs        int64               `json:"macs"`
	Bytes       int64               `json:"bytes"`
	RF          int                 `json:"receptive_field"`
	Jump        int                 `json:"jump"`
	ShapeSource modelio.ShapeSource `json:"shape_source"`
	Note        string              `json:"note,omitempty"`
}

type totalsDoc struct {
	Params int64 `json:"params"`
	MACs   int64 `json:"macs"`
	Bytes  int64 `json:"bytes"`
}

func layersJSON(m *modelio.Model) layersDoc {
	d := layersDoc{Model: m.Name, Inputs: []inputDoc{}, Layers: []layerDoc{},
		Total: totalsDoc{m.Total.Params, m.Total.MACs, m.Total.Bytes}}
	for _, in := range m.Inputs {
		id := inputDoc{Name: in.Name, Type: in.ElemType, Shape: in.Shape.Ints(), Weight: in.Weight}
		symbolic := false
		for _, dim := range in.Shape {
			id.Params = append(id.Params, dim.Param)
			symbolic = symbolic || dim.Param != ""
		}
		if !symbolic {
			id.Params = nil
		}
		d.Inputs = append(d.Inputs, id)
	}
	d.Notes = m.Notes
	if im := m.Image; im != nil {
		d.Image = &imageDoc{im.Name, im.Layout, im.Channels, im.Height, im.Width}
	}
	for _, l := range m.Layers {
		d.Layers = append(d.Layers, layerDoc{
			Name: l.Name, Op: l.Op, Output: l.Output, Shape: l.Shape.Ints(), Volume: l.WHD(),
			Params: l.Params, MACs: l.MACs, Bytes: l.Bytes, RF: l.RF, Jump: l.Jump,
			ShapeSource: l.ShapeSource, Note: l.Note,
		})
	}
	return d
}

// writeLayerTable prints the aligned text table of `fovea layers`.
func writeLayerTable(w io.Writer, m *modelio.Model) {
	fmt.Fprintf(w, "model %s", m.Name)
	if p := strings.TrimSpace(m.Producer + " " + m.ProducerVersion); p != "" {
		fmt.Fprintf(w, " (made by %s)", p)
	}
	fmt.Fprintln(w)
	weights := 0
	for _, in := range m.Inputs {
		if in.Weight {
			weights++
			continue
		}
		fmt.Fprintf(w, "input %s: %s %s\n", in.Name, in.ElemType, in.Shape)
	}
	if weights > 0 {
		fmt.Fprintf(w, "and %d inputs that only carry weights\n", weights)
	}
	fmt.Fprintln(w)
	t := table{right: []bool{false, false, true, true, true, true, true, true, false}}
	t.add("name", "op", "volume (W×H×D)", "params", "MACs", "memory", "receptive field", "jump", "shape source")
	notes := 0
	for _, l := range m.Layers {
		r := core.NewLayerRow(l, core.Exact)
		if l.Note != "" {
			notes++
			r.Source += " [" + strconv.Itoa(notes) + "]"
		}
		t.add(r.Name, r.Op, r.Volume, r.Params, r.MACs, r.Memory, r.RF, r.Jump, r.Source)
	}
	t.rule()
	t.add("total", strconv.Itoa(len(m.Layers))+" layers", "", core.Exact.Count(m.Total.Params), core.Exact.Count(m.Total.MACs), core.Exact.Bytes(m.Total.Bytes), "", "", "")
	t.write(w)
	if notes > 0 {
		fmt.Fprintln(w)
		n := 0
		for _, l := range m.Layers {
			if l.Note != "" {
				n++
				fmt.Fprintf(w, "[%d] %s: %s\n", n, l.Name, l.Note)
			}
		}
	}
	for _, n := range m.Notes {
		fmt.Fprintf(w, "\nnote: %s", n)
	}
	if len(m.Notes) > 0 {
		fmt.Fprintln(w)
	}
	fmt.Fprintln(w, "\nMACs: multiply-accumulates for one image. memory: the output at float32 for one image.")
	fmt.Fprintln(w, "receptive field and jump in input pixels; - where not defined.")
}

// table lays out rows of text in columns, numbers right-aligned.
type table struct {
	rows  [][]string // nil row = a rule
	right []bool
}

func (t *table) add(cells ...string) { t.rows = append(t.rows, cells) }
func (t *table) rule()               { t.rows = append(t.rows, nil) }

func (t *table) write(w io.Writer) {
	var width []int
	for _, r := range t.rows {
		for i, c := range r {
			if i >= len(width) {
				width = append(width, 0)
			}
			width[i] = max(width[i], utf8.RuneCountInString(c))
		}
	}
	total := 0
	for _, n := range width {
		total += n + 2
	}
	for _, r := range t.rows {
		if r == nil {
			fmt.Fprintln(w, strings.Repeat("-", max(0, total-2)))
			continue
		}
		var b strings.Builder
		for i, c := range r {
			pad := strings.Repeat(" ", width[i]-utf8.RuneCountInString(c))
			if i < len(t.right) && t.right[i] {
				b.WriteString(pad + c)
			} else {
				b.WriteString(c + pad)
			}
			if i < len(r)-1 {
				b.WriteString("  ")
			}
		}
		fmt.Fprintln(w, strings.TrimRight(b.String(), " "))
	}
}
