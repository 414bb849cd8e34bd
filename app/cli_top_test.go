package main

import (
	"cmp"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"fovea/assets"
)

// topDocTest is the documented JSON of fovea top.
type topDocTest struct {
	Layer    string `json:"layer"`
	Channels []struct {
		Index  int `json:"index"`
		Images []struct {
			File  string  `json:"file"`
			Value float64 `json:"value"`
			Y     int     `json:"y"`
			X     int     `json:"x"`
			Box   []int   `json:"box"`
		} `json:"images"`
		PerClass []struct {
			Class  string  `json:"class"`
			Images int     `json:"images"`
			Fires  float64 `json:"fires"`
		} `json:"per_class"`
	} `json:"channels"`
}

// TestCLITop: on a labelled folder of demo probes (class subfolders from
// the demo's label file), fovea top --json gives, for each asked channel,
// the k images whose largest value (measured image by image with fovea maps
// --json, one run per image) is highest, equal values by file name, with
// that value; its per-class firing agrees with a count over the same
// per-image runs; boxes lie inside the 64×64 input. (The reference is the
// definition: top-k of the per-image maxima; common practice.)
func TestCLITop(t *testing.T) {
	d := newDemoFiles(t)
	probe, err := assets.Probe()
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(d.dir, "labelled ü")
	var files []string
	class := map[string]string{}
	per := map[string]int{}
	for _, p := range probe {
		if per[p.Label] >= 3 { // three of each class keeps the test short
			continue
		}
		per[p.Label]++
		b, err := assets.Files.ReadFile(p.File)
		if err != nil {
			t.Fatal(err)
		}
		path := filepath.Join(dir, p.Label, filepath.Base(p.File))
		os.MkdirAll(filepath.Dir(path), 0o755)
		if err := os.WriteFile(path, b, 0o644); err != nil {
			t.Fatal(err)
		}
		files = append(files, path)
		class[path] = p.Label
	}
	const layer = "/relu2/Relu"
	chans := []int{0, 3, 5}
	out := mustRun(t, "top", "--model", d.model, "--probe", dir, "--layer", layer, "--channels", "0,3,5", "--k", "4", "--json")
	var doc topDocTest
	decodeJSON(t, out, &doc)
	if doc.Layer != layer || len(doc.Channels) != len(chans) {
		t.Fatalf("layer %q, %d channels", doc.Layer, len(doc.Channels))
	}
	// The per-image maxima and firing, one run per image.
	type one struct {
		file  string
		max   float64
		fired bool
	}
	byChan := map[int][]one{}
	for _, f := range files {
		var m mapsDoc
		decodeJSON(t, mustRun(t, "maps", "--model", d.model, "--image", f, "--layer", layer, "--out", filepath.Join(t.TempDir(), "m.png"), "--json"), &m)
		for _, ch := range chans {
			c := m.Channels[ch]
			byChan[ch] = append(byChan[ch], one{f, c.Max, c.ActiveFraction > 0})
		}
	}
	for i, ch := range chans {
		c := doc.Channels[i]
		if c.Index != ch || len(c.Images) != 4 {
			t.Fatalf("channel %d: index %d, %d images", ch, c.Index, len(c.Images))
		}
		want := slices.Clone(byChan[ch])
		slices.SortFunc(want, func(a, b one) int { return cmp.Or(cmp.Compare(b.max, a.max), strings.Compare(a.file, b.file)) })
		for r, img := range c.Images {
			if img.File != want[r].file || !near(img.Value, want[r].max) {
				t.Errorf("channel %d #%d: %s %g, want %s %g", ch, r+1, img.File, img.Value, want[r].file, want[r].max)
			}
			if len(img.Box) != 4 || img.Box[0] < 0 || img.Box[1] < 0 || img.Box[2] > 64 || img.Box[3] > 64 || img.Box[0] >= img.Box[2] || img.Box[1] >= img.Box[3] {
				t.Errorf("channel %d #%d: box %v", ch, r+1, img.Box)
			}
			if img.Y < 0 || img.Y >= 32 || img.X < 0 || img.X >= 32 {
				t.Errorf("channel %d #%d: position %d,%d outside the 32×32 map", ch, r+1, img.Y, img.X)
			}
		}
		if len(c.PerClass) != len(per) {
			t.Fatalf("channel %d: %d classes, want %d", ch, len(c.PerClass), len(per))
		}
		for _, pc := range c.PerClass {
			n, fired := 0, 0
			for _, o := range byChan[ch] {
				if class[o.file] == pc.Class {
					n++
					if o.fired {
						fired++
					}
				}
			}
			if pc.Images != n || !near(pc.Fires, float64(fired)/float64(n)) {
				t.Errorf("channel %d class %s: %d images fired %g, direct count %d of %d", ch, pc.Class, pc.Images, pc.Fires, fired, n)
			}
		}
	}
	// scan --json on the same labelled folder, with the unhealthy
	// checkpoint: every dead channel says how far below zero its input
	// stayed (≤ 0), every channel that fired after a Relu has its peak there
	// (> 0), and the per-class counts add up to the overall firing (the
	// images of the classes are all the images; a direct identity).
	var scan struct {
		Images int `json:"images"`
		Layers []struct {
			Name     string `json:"name"`
			Channels []struct {
				Index    int      `json:"index"`
				Fires    float64  `json:"fires"`
				Flags    []string `json:"flags"`
				MaxPre   *float64 `json:"max_preactivation"`
				PerClass []struct {
					Images int     `json:"images"`
					Fires  float64 `json:"fires"`
				} `json:"per_class"`
			} `json:"channels"`
		} `json:"layers"`
	}
	decodeJSON(t, mustRun(t, "scan", "--model", d.unhealthy, "--probe", dir, "--json"), &scan)
	deadSeen := 0
	for _, l := range scan.Layers {
		for _, c := range l.Channels {
			dead := slices.Contains(c.Flags, "dead")
			switch {
			case c.MaxPre == nil:
				t.Errorf("%s channel %d: no max_preactivation", l.Name, c.Index)
			case dead && *c.MaxPre > 0, !dead && *c.MaxPre <= 0:
				t.Errorf("%s channel %d: dead %v, max_preactivation %g", l.Name, c.Index, dead, *c.MaxPre)
			}
			if dead {
				deadSeen++
			}
			n, fired := 0, 0.0
			for _, pc := range c.PerClass {
				n += pc.Images
				fired += pc.Fires * float64(pc.Images)
			}
			if len(c.PerClass) != len(per) || n != scan.Images || math.Abs(fired-c.Fires*float64(scan.Images)) > 1e-9 {
				t.Errorf("%s channel %d: per-class %d images, %g fired; overall %d, %g", l.Name, c.Index, n, fired, scan.Images, c.Fires*float64(scan.Images))
			}
		}
	}
	if deadSeen == 0 {
		t.Error("the unhealthy checkpoint shows no dead channel on these probes: the check above could not fail")
	}

	// Layers besides the activations the scan always covers: a pooling and
	// a Conv output, against the same per-image references.
	for _, other := range []string{"/pool2/MaxPool", "/conv2/Conv"} {
		t.Run(other, func(t *testing.T) {
			var doc topDocTest
			decodeJSON(t, mustRun(t, "top", "--model", d.model, "--probe", dir, "--layer", other, "--channels", "1,4", "--k", "3", "--json"), &doc)
			if doc.Layer != other || len(doc.Channels) != 2 {
				t.Fatalf("layer %q, %d channels", doc.Layer, len(doc.Channels))
			}
			maxima := map[int][]one{}
			for _, f := range files {
				var m mapsDoc
				decodeJSON(t, mustRun(t, "maps", "--model", d.model, "--image", f, "--layer", other, "--out", filepath.Join(t.TempDir(), "m.png"), "--json"), &m)
				for _, ch := range []int{1, 4} {
					maxima[ch] = append(maxima[ch], one{f, m.Channels[ch].Max, m.Channels[ch].ActiveFraction > 0})
				}
			}
			for i, ch := range []int{1, 4} {
				want := maxima[ch]
				slices.SortFunc(want, func(a, b one) int { return cmp.Or(cmp.Compare(b.max, a.max), strings.Compare(a.file, b.file)) })
				got := doc.Channels[i]
				if got.Index != ch || len(got.Images) != 3 {
					t.Fatalf("channel %d: index %d, %d images", ch, got.Index, len(got.Images))
				}
				for r, img := range got.Images {
					if img.File != want[r].file || !near(img.Value, want[r].max) {
						t.Errorf("channel %d #%d: %s %g, want %s %g", ch, r+1, img.File, img.Value, want[r].file, want[r].max)
					}
				}
			}
		})
	}

	// Bad input: a layer the model does not have, a channel out of range.
	if _, errs, code := runCLI(t, "top", "--model", d.model, "--probe", dir, "--layer", "/no/such/layer"); code != exitUsage || !strings.Contains(errs, `"/no/such/layer"`) {
		t.Errorf("a layer the model lacks: exit %d, %s", code, errs)
	}
	if _, errs, code := runCLI(t, "top", "--model", d.model, "--probe", dir, "--layer", layer, "--channels", "99"); code == exitOK || !strings.Contains(errs, "99") {
		t.Errorf("channel 99: exit %d, %s", code, errs)
	}
}
