package core

import (
	"testing"

	"fovea/modelio"
)

// Numbers in tables: SI prefixes for counts (k = 10³, M = 10⁶, G = 10⁹) and
// IEC binary prefixes for memory (KiB = 2¹⁰ B, MiB = 2²⁰ B; IEC 80000-13),
// three significant digits in the compact style, every digit in the exact
// one. Expected strings worked out by hand.
func TestNumbers(t *testing.T) {
	counts := []struct {
		n            int64
		exact, short string
	}{
		{-1, "-1", "?"}, {0, "0", "0"}, {999, "999", "999"}, {1000, "1,000", "1.00 k"}, {15335, "15,335", "15.3 k"},
		{138_357_544, "138,357,544", "138 M"}, {11_689_512, "11,689,512", "11.7 M"}, {1_814_000_000, "1,814,000,000", "1.81 G"},
	}
	for _, c := range counts {
		if got := Exact.Count(c.n); got != c.exact {
			t.Errorf("Exact.Count(%d) = %q, want %q", c.n, got, c.exact)
		}
		if got := Compact.Count(c.n); got != c.short {
			t.Errorf("Compact.Count(%d) = %q, want %q", c.n, got, c.short)
		}
	}
	sizes := []struct {
		n            int64
		exact, short string
	}{
		{28, "28 B", "28 B"}, {1023, "1023 B", "1023 B"}, {1024, "1.0 KiB", "1.00 KiB"}, {262144, "256.0 KiB", "256 KiB"},
		{950272, "928.0 KiB", "928 KiB"}, {3 << 20, "3.0 MiB", "3.00 MiB"}, {5 << 30, "5.00 GiB", "5.00 GiB"},
	}
	for _, c := range sizes {
		if got := Exact.Bytes(c.n); got != c.exact {
			t.Errorf("Exact.Bytes(%d) = %q, want %q", c.n, got, c.exact)
		}
		if got := Compact.Bytes(c.n); got != c.short {
			t.Errorf("Compact.Bytes(%d) = %q, want %q", c.n, got, c.short)
		}
	}
}

// One row, two styles: the command line's exact numbers and "-", the
// window's compact ones and "–" for none.
func TestLayerRow(t *testing.T) {
	l := modelio.Layer{Name: "conv1", Op: "Conv", Width: 32, Height: 32, Depth: 16, Params: 448, MACs: 442_368,
		Bytes: 65536, RF: 3, Jump: 1, ShapeSource: modelio.SourceStatic}
	for _, c := range []struct {
		name string
		n    Numbers
		l    modelio.Layer
		want LayerRow
	}{
		{"exact", Exact, l, LayerRow{"conv1", "Conv", "32×32×16", "448", "442,368", "64.0 KiB", "3", "1", "static"}},
		{"compact", Compact, l, LayerRow{"conv1", "Conv", "32×32×16", "448", "442 k", "64.0 KiB", "3", "1", "static"}},
		{"exact, no weights", Exact, modelio.Layer{Name: "relu", Op: "Relu", Width: -1, Height: -1, Depth: -1},
			LayerRow{"relu", "Relu", "?×?×?", "0", "0", "0 B", "-", "-", ""}},
		{"compact, no weights", Compact, modelio.Layer{Name: "relu", Op: "Relu", Width: -1, Height: -1, Depth: -1},
			LayerRow{"relu", "Relu", "?×?×?", "–", "–", "0 B", "–", "–", ""}},
	} {
		t.Run(c.name, func(t *testing.T) {
			if got := NewLayerRow(c.l, c.n); got != c.want {
				t.Errorf("NewLayerRow = %+v, want %+v", got, c.want)
			}
		})
	}
}
