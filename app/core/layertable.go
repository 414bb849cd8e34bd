package core

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"fovea/modelio"
)

// Numbers is how a layer table writes its numbers: the command line and the
// window show the same rows (LayerRow) with different number styles.
type Numbers int

const (
	// Exact writes every digit, thousands separated by commas ("1,234,567"),
	// sizes with one decimal ("3.4 MiB") and "-" where a value is not
	// defined: the command line's table, which people diff and scripts read.
	Exact Numbers = iota
	// Compact writes three significant digits with an SI prefix ("1.23 M",
	// k = 10³, M = 10⁶, G = 10⁹), sizes with three ("3.40 MiB") and "–" for
	// none: the window's narrow columns.
	Compact
)

// Count writes a count: "1,234" (Exact) or "1.23 k" (Compact, "?" when
// negative, i.e. unknown).
func (n Numbers) Count(v int64) string {
	if n == Exact {
		s := strconv.FormatInt(v, 10)
		neg := strings.HasPrefix(s, "-")
		s = strings.TrimPrefix(s, "-")
		var b strings.Builder
		for i, r := range s {
			if i > 0 && (len(s)-i)%3 == 0 {
				b.WriteByte(',')
			}
			b.WriteRune(r)
		}
		if neg {
			return "-" + b.String()
		}
		return b.String()
	}
	switch {
	case v < 0:
		return "?"
	case v < 1000:
		return strconv.FormatInt(v, 10)
	}
	f := float64(v)
	for _, u := range []string{" k", " M", " G", " T"} {
		f /= 1000
		if f < 1000 || u == " T" {
			return sig3(f) + u
		}
	}
	return strconv.FormatInt(v, 10)
}

// Bytes writes a size with an IEC binary prefix (KiB = 2¹⁰ B, MiB = 2²⁰ B;
// IEC 80000-13): "3.4 MiB" (Exact) or "3.40 MiB" (Compact, "?" when
// negative).
func (n Numbers) Bytes(v int64) string {
	if n == Exact {
		switch {
		case v < 1024:
			return strconv.FormatInt(v, 10) + " B"
		case v < 1<<20:
			return fmt.Sprintf("%.1f KiB", float64(v)/(1<<10))
		case v < 1<<30:
			return fmt.Sprintf("%.1f MiB", float64(v)/(1<<20))
		}
		return fmt.Sprintf("%.2f GiB", float64(v)/(1<<30))
	}
	switch {
	case v < 0:
		return "?"
	case v < 1024:
		return strconv.FormatInt(v, 10) + " B"
	}
	f := float64(v)
	for _, u := range []string{" KiB", " MiB", " GiB", " TiB"} {
		f /= 1024
		if f < 1024 || u == " TiB" {
			return sig3(f) + u
		}
	}
	return strconv.FormatInt(v, 10) + " B"
}

// sig3 prints v ≥ 1 with three significant digits.
func sig3(v float64) string {
	switch {
	case v >= 100:
		return strconv.FormatFloat(math.Round(v), 'f', 0, 64)
	case v >= 10:
		return strconv.FormatFloat(v, 'f', 1, 64)
	}
	return strconv.FormatFloat(v, 'f', 2, 64)
}

// pixels writes a receptive field or jump in pixels, the style's mark for
// "not defined" when v ≤ 0.
func (n Numbers) pixels(v int) string {
	switch {
	case v > 0:
		return strconv.Itoa(v)
	case n == Exact:
		return "-"
	}
	return "–"
}

// LayerRow is one layer of the layer table as text, in one number style:
// the row both the command line's `fovea layers` and the window's layer
// panel show.
type LayerRow struct {
	Name, Op string
	Volume   string // W×H×D of the output for one image ("64×64×16")
	Params   string // Compact writes "–" for none
	MACs     string // multiply-accumulates for one image; Compact writes "–" for none
	Memory   string // the output at float32 for one image
	RF, Jump string // receptive field and jump in input pixels
	Source   string // where the shape came from (modelio.Layer.ShapeSource)
}

// NewLayerRow writes layer l in the number style n.
func NewLayerRow(l modelio.Layer, n Numbers) LayerRow {
	r := LayerRow{Name: l.Name, Op: l.Op, Volume: l.WHD(), Params: n.Count(l.Params), MACs: n.Count(l.MACs),
		Memory: n.Bytes(l.Bytes), RF: n.pixels(l.RF), Jump: n.pixels(l.Jump), Source: string(l.ShapeSource)}
	if n == Compact {
		if l.Params == 0 {
			r.Params = "–"
		}
		if l.MACs == 0 {
			r.MACs = "–"
		}
	}
	return r
}
