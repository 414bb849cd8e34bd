package analysis

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"fovea/modelio"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"testing"
)

// literalReport is a small report written by hand.
func literalReport() *ScanReport {
	return &ScanReport{Images: 40, Rare: 0.05, Layers: []ScanLayer{
		{Name: "relu_b", Output: "rb", Conv: "conv_b", Channels: []ChannelScan{
			{Index: 0, Fires: 1, Max: 2.5, Mean: 0.75, Flags: []modelio.Flag{}},
			{Index: 1, Fires: 0, Max: 0, Mean: 0, Flags: []modelio.Flag{modelio.FlagDead, modelio.FlagZeroKernel}},
			{Index: 2, Fires: 0.025, Max: 0.125, Mean: 0.001, Flags: []modelio.Flag{modelio.FlagRare}},
		}},
		{Name: "relu_a", Output: "ra", Channels: []ChannelScan{
			{Index: 0, Fires: 0, Max: 0, Mean: 0, Flags: []modelio.Flag{modelio.FlagDead}},
			{Index: 1, Fires: 0.5, Max: 4, Mean: 1.5, Flags: []modelio.Flag{}},
		}},
	}}
}

func TestScanJSON(t *testing.T) {
	// Field names of the command line's scan JSON:
	// {"images", "layers":[{"name","channels":[{"index","fires","max","mean","flags":[...]}]}]}.
	var buf bytes.Buffer
	if err := literalReport().WriteJSON(&buf); err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Images *int `json:"images"`
		Layers []struct {
			Name     *string `json:"name"`
			Channels []struct {
				Index *int      `json:"index"`
				Fires *float64  `json:"fires"`
				Max   *float64  `json:"max"`
				Mean  *float64  `json:"mean"`
				Flags *[]string `json:"flags"`
			} `json:"channels"`
		} `json:"layers"`
	}
	if err := json.Unmarshal(buf.Bytes(), &doc); err != nil {
		t.Fatalf("%v\n%s", err, buf.String())
	}
	if doc.Images == nil || *doc.Images != 40 || len(doc.Layers) != 2 {
		t.Fatalf("images/layers missing:\n%s", buf.String())
	}
	if *doc.Layers[0].Name != "relu_b" || len(doc.Layers[0].Channels) != 3 {
		t.Errorf("first layer: %s", buf.String())
	}
	ch := doc.Layers[0].Channels[2]
	if ch.Index == nil || *ch.Index != 2 || *ch.Fires != 0.025 || *ch.Max != 0.125 || *ch.Mean != 0.001 || !slices.Equal(*ch.Flags, []string{"rare"}) {
		t.Errorf("channel 2 of relu_b: %+v", ch)
	}
	// A healthy channel has "flags": [], not null.
	if f := doc.Layers[0].Channels[0].Flags; f == nil || *f == nil || len(*f) != 0 {
		t.Errorf("healthy channel flags: %v", f)
	}
	if !strings.Contains(buf.String(), `"flags": []`) {
		t.Errorf("no empty flag list in\n%s", buf.String())
	}
	// Round trip into the report type itself.
	var back ScanReport
	if err := json.Unmarshal(buf.Bytes(), &back); err != nil || !reflect.DeepEqual(&back, literalReport()) {
		t.Errorf("round trip: %v\n%+v", err, back)
	}
}

func TestScanCSV(t *testing.T) {
	var buf bytes.Buffer
	if err := literalReport().WriteCSV(&buf); err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(&buf).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	want := [][]string{
		{"layer", "output", "conv", "channel", "fires", "max", "mean", "flags"},
		{"relu_b", "rb", "conv_b", "0", "1", "2.5", "0.75", ""},
		{"relu_b", "rb", "conv_b", "1", "0", "0", "0", "dead zero_kernel"},
		{"relu_b", "rb", "conv_b", "2", "0.025", "0.125", "0.001", "rare"},
		{"relu_a", "ra", "", "0", "0", "0", "0", "dead"},
		{"relu_a", "ra", "", "1", "0.5", "4", "1.5", ""},
	}
	if !reflect.DeepEqual(recs, want) {
		t.Errorf("CSV\n%v\nwant\n%v", recs, want)
	}
}

func TestScanSortRows(t *testing.T) {
	key := func(rows []ScanRow) []string {
		var k []string
		for _, r := range rows {
			k = append(k, r.Layer+"/"+string(rune('0'+r.Index)))
		}
		return k
	}
	for _, c := range []struct {
		key  SortKey
		desc bool
		want []string
	}{
		{SortOrder, false, []string{"relu_b/0", "relu_b/1", "relu_b/2", "relu_a/0", "relu_a/1"}},
		// Ties keep report order: relu_b/1 before relu_a/0.
		{SortFires, false, []string{"relu_b/1", "relu_a/0", "relu_b/2", "relu_a/1", "relu_b/0"}},
		{SortFires, true, []string{"relu_b/0", "relu_a/1", "relu_b/2", "relu_b/1", "relu_a/0"}},
		{SortMax, true, []string{"relu_a/1", "relu_b/0", "relu_b/2", "relu_b/1", "relu_a/0"}},
		{SortMean, false, []string{"relu_b/1", "relu_a/0", "relu_b/2", "relu_b/0", "relu_a/1"}},
		{SortName, false, []string{"relu_a/0", "relu_a/1", "relu_b/0", "relu_b/1", "relu_b/2"}},
	} {
		rows := literalReport().Rows()
		if err := SortRows(rows, c.key, c.desc); err != nil {
			t.Fatal(err)
		}
		if got := key(rows); !slices.Equal(got, c.want) {
			t.Errorf("sort by %s desc=%v: %v, want %v", c.key, c.desc, got, c.want)
		}
	}
	if err := SortRows(nil, "colour", false); err == nil || !strings.Contains(err.Error(), `unknown sort key "colour"`) {
		t.Errorf("bad key: %v", err)
	}
	if n := literalReport().Count(modelio.FlagDead); n != 2 {
		t.Errorf("Count(dead) = %d, want 2", n)
	}
}

func TestProbeFiles(t *testing.T) {
	dir := t.TempDir()
	for _, name := range []string{"b.png", "a.JPG", "notes.txt", ".hidden.png", "c.webp", "ünï côde.jpeg"} {
		if err := os.WriteFile(filepath.Join(dir, name), []byte("x"), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	if err := os.Mkdir(filepath.Join(dir, "sub.png"), 0o755); err != nil {
		t.Fatal(err)
	}
	got, err := ProbeFiles(dir)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, p := range got {
		names = append(names, filepath.Base(p))
	}
	if want := []string{"a.JPG", "b.png", "c.webp", "ünï côde.jpeg"}; !slices.Equal(names, want) {
		t.Errorf("ProbeFiles: %v, want %v", names, want)
	}
	empty := t.TempDir()
	if _, err := ProbeFiles(empty); err == nil || !strings.Contains(err.Error(), "no image files") {
		t.Errorf("empty folder: %v", err)
	}
	if _, err := ProbeFiles(filepath.Join(dir, "nope")); err == nil || !strings.Contains(err.Error(), "nope") {
		t.Errorf("missing folder: %v", err)
	}
	for i, p := range got {
		if filepath.Dir(p) != dir {
			t.Errorf("ProbeFiles[%d] = %q, not a path inside %s", i, p, dir)
		}
	}
	// The same listing inside a file system gives io/fs paths.
	fsys := os.DirFS(filepath.Dir(dir))
	inFS, err := ProbeFilesFS(fsys, filepath.Base(dir))
	if err != nil {
		t.Fatal(err)
	}
	if len(inFS) != len(names) {
		t.Fatalf("ProbeFilesFS: %q, ProbeFiles %q", inFS, names)
	}
	for i := range inFS {
		if want := filepath.Base(dir) + "/" + names[i]; inFS[i] != want {
			t.Errorf("ProbeFilesFS[%d] = %q, want %q", i, inFS[i], want)
		}
	}
}
