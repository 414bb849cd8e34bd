package analysis

import (
	"cmp"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"fovea/modelio"
)

// ScanRow is one channel of a scan with the layer it belongs to: the flat
// form tables and sorting work on.
type ScanRow struct {
	Layer  string // ScanLayer.Name
	Output string // ScanLayer.Output
	Conv   string // ScanLayer.Conv
	Order  int    // the layer's position in the report (execution order)
	ChannelScan
}

// Rows returns every channel of the report as one row, in report order
// (layers in execution order, channels by index).
func (r *ScanReport) Rows() []ScanRow {
	var rows []ScanRow
	for i, l := range r.Layers {
		for _, c := range l.Channels {
			rows = append(rows, ScanRow{Layer: l.Name, Output: l.Output, Conv: l.Conv, Order: i, ChannelScan: c})
		}
	}
	return rows
}

// SortKey is a column SortRows sorts by. Its string is the spelling on the
// command line (fovea scan --sort).
type SortKey string

// The sort keys.
const (
	SortFires SortKey = "fires" // fraction of images fired on
	SortMax   SortKey = "max"   // largest value
	SortMean  SortKey = "mean"  // mean value
	SortName  SortKey = "name"  // layer name, then channel index
	SortOrder SortKey = "order" // report order: layers in execution order, then channel index
)

// SortRows sorts rows by key (SortFires, SortMax, SortMean, SortName or
// SortOrder), ascending or, with desc, descending. Ties keep report order,
// so sorting by fires ascending lists the dead channels first, layer by
// layer.
func SortRows(rows []ScanRow, key SortKey, desc bool) error {
	var f func(a, b ScanRow) int
	switch key {
	case SortFires:
		f = func(a, b ScanRow) int { return cmp.Compare(a.Fires, b.Fires) }
	case SortMax:
		f = func(a, b ScanRow) int { return cmp.Compare(a.Max, b.Max) }
	case SortMean:
		f = func(a, b ScanRow) int { return cmp.Compare(a.Mean, b.Mean) }
	case SortName:
		f = func(a, b ScanRow) int {
			return cmp.Or(strings.Compare(a.Layer, b.Layer), cmp.Compare(a.Index, b.Index))
		}
	case SortOrder:
		f = func(a, b ScanRow) int { return 0 }
	default:
		return fmt.Errorf("viz: scan: unknown sort key %q (want %s, %s, %s, %s or %s)", key, SortFires, SortMax, SortMean, SortName, SortOrder)
	}
	slices.SortStableFunc(rows, func(a, b ScanRow) int {
		c := f(a, b)
		if desc {
			c = -c
		}
		return cmp.Or(c, cmp.Compare(a.Order, b.Order), cmp.Compare(a.Index, b.Index))
	})
	return nil
}

// WriteCSV writes one row per channel, in report order, under the header
//
//	layer,output,conv,channel,fires,max,mean,flags
//
// fires is a fraction in [0, 1]; flags are separated by spaces.
func (r *ScanReport) WriteCSV(w io.Writer) error {
	cw := csv.NewWriter(w)
	cw.Write([]string{"layer", "output", "conv", "channel", "fires", "max", "mean", "flags"})
	g := func(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
	for _, row := range r.Rows() {
		cw.Write([]string{row.Layer, row.Output, row.Conv, strconv.Itoa(row.Index), g(row.Fires), g(row.Max), g(row.Mean),
			joinFlags(row.Flags)})
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fmt.Errorf("viz: scan: writing CSV: %w", err)
	}
	return nil
}

// WriteJSON writes the report as indented JSON (see ScanReport for the
// fields).
func (r *ScanReport) WriteJSON(w io.Writer) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	if err := enc.Encode(r); err != nil {
		return fmt.Errorf("viz: scan: writing JSON: %w", err)
	}
	return nil
}

// ProbeFiles lists the image files directly inside dir (not in its
// subfolders), recognised by extension (png, jpg, jpeg, gif, bmp, tif, tiff,
// webp, any case), sorted by name. Hidden files are left out.
func ProbeFiles(dir string) ([]string, error) {
	names, err := listProbes(os.DirFS(dir), ".")
	if pe := (*fs.PathError)(nil); errors.As(err, &pe) {
		pe.Path = filepath.Join(dir, filepath.FromSlash(pe.Path)) // os.DirFS names paths inside dir
	}
	if err != nil {
		return nil, fmt.Errorf("viz: probe folder: %w", err)
	}
	if len(names) == 0 {
		return nil, fmt.Errorf("viz: probe folder %s: no image files (png, jpg, gif, bmp, tiff, webp)", dir)
	}
	for i, n := range names {
		names[i] = filepath.Join(dir, filepath.FromSlash(n))
	}
	return names, nil
}

// ProbeFilesFS is [ProbeFiles] for the folder dir inside fsys (an io/fs
// path); the names it returns are io/fs paths for ScanOptions.FS.
func ProbeFilesFS(fsys fs.FS, dir string) ([]string, error) {
	names, err := listProbes(fsys, dir)
	if err != nil {
		return nil, fmt.Errorf("viz: probe folder: %w", err)
	}
	if len(names) == 0 {
		return nil, fmt.Errorf("viz: probe folder %s: no image files (png, jpg, gif, bmp, tiff, webp)", dir)
	}
	return names, nil
}

// listProbes is the listing both ProbeFiles and ProbeFilesFS make: the
// probe images directly inside dir of fsys, as io/fs paths, sorted by name.
func listProbes(fsys fs.FS, dir string) ([]string, error) {
	ents, err := fs.ReadDir(fsys, dir)
	if err != nil {
		return nil, err
	}
	var files []string
	for _, e := range ents {
		name := e.Name()
		if !isImageName(name) {
			continue
		}
		if !e.Type().IsRegular() && e.Type()&fs.ModeSymlink == 0 {
			continue
		}
		files = append(files, path.Join(dir, name))
	}
	return files, nil
}

// Count returns the number of channels carrying flag (for example FlagDead,
// for a gate that fails a training run with too many dead filters).
func (r *ScanReport) Count(flag modelio.Flag) int {
	n := 0
	for _, l := range r.Layers {
		for _, c := range l.Channels {
			if slices.Contains(c.Flags, flag) {
				n++
			}
		}
	}
	return n
}

// joinFlags spells flags as the CSV column holds them: separated by spaces.
func joinFlags(flags []modelio.Flag) string {
	s := make([]string, len(flags))
	for i, f := range flags {
		s[i] = string(f)
	}
	return strings.Join(s, " ")
}
