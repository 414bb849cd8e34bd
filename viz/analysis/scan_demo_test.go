package analysis

import (
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"fovea/modelio"
	"fovea/modelio/prep"
	"fovea/modelio/testkit"
)

// demoDir is the demo's folder (assets/make_demo.py writes it);
// $FOVEA_DEMO_DIR points elsewhere, e.g. at a fresh run of the script.
func demoDir() string {
	if d := os.Getenv("FOVEA_DEMO_DIR"); d != "" {
		return d
	}
	return filepath.Join("..", "..", "assets", "demo")
}

// demoTruth is the part of truth_*.json the scan is checked against: which
// ReLU channels fire on the probe images, measured by assets/make_demo.py
// with PyTorch in float32 and re-checked in float64 numpy, outside Go and
// ONNX Runtime.
type demoTruth struct {
	Model string `json:"model"`
	Probe struct {
		Folder string `json:"folder"`
		Images int    `json:"images"`
	} `json:"probe"`
	Margins struct {
		AllStable bool `json:"all_stable"`
	} `json:"margins"`
	Relus []struct {
		Node           string    `json:"node"`
		Output         string    `json:"output"`
		Follows        string    `json:"follows"`
		FollowsOp      string    `json:"follows_op"`
		Channels       int       `json:"channels"`
		Dead           []int     `json:"dead"`
		Rare           []int     `json:"rare"`
		FireCount      []int     `json:"fire_count"`
		MaxPre         []float64 `json:"max_preactivation"`
		WithinMargin   []int     `json:"images_within_margin"`
		CategoryStable bool      `json:"category_stable"`
	} `json:"relus"`
}

// TestScanDemoTruth: the scan of each demo checkpoint flags dead and rare
// exactly the channels its truth file lists, with the default
// rare threshold of 1 %, the one the truth file uses.
func TestScanDemoTruth(t *testing.T) {
	for _, kind := range []string{"healthy", "unhealthy"} {
		t.Run(kind, func(t *testing.T) {
			dir := demoDir()
			data, err := os.ReadFile(filepath.Join(dir, "truth_"+kind+".json"))
			if err != nil {
				t.Fatalf("the demo assets are needed (assets/make_demo.py): %v", err)
			}
			var truth demoTruth
			if err := json.Unmarshal(data, &truth); err != nil {
				t.Fatalf("truth_%s.json: %v", kind, err)
			}
			// The truth is exact only where float rounding cannot change a
			// verdict; its script says so per channel.
			if !truth.Margins.AllStable || len(truth.Relus) == 0 {
				t.Fatalf("truth_%s.json: verdicts not stable under float rounding or no ReLU listed", kind)
			}
			m, err := modelio.Open(filepath.Join(dir, truth.Model))
			if err != nil {
				t.Fatal(err)
			}
			files, err := ProbeFiles(filepath.Join(dir, truth.Probe.Folder))
			if err != nil {
				t.Fatal(err)
			}
			cfg := prep.Guess(m)
			// Both ways of reading the maps: whole (Go statistics) and
			// summarised in the graph (ScanSession), each against the truth.
			for _, how := range scanReads(t, m) {
				s := newSession(t, m, how.opt)
				r, err := Scan(context.Background(), s, m, cfg, files, ScanOptions{}, nil)
				if err != nil {
					t.Fatal(err)
				}
				t.Logf("maps read %s", how.name)
				if r.Images != truth.Probe.Images {
					t.Errorf("%d images scanned, the truth has %d", r.Images, truth.Probe.Images)
				}
				if len(r.Layers) != len(truth.Relus) {
					t.Errorf("%d layers scanned, the truth lists %d ReLUs", len(r.Layers), len(truth.Relus))
				}
				dead, rare := 0, 0
				for _, tr := range truth.Relus {
					i := slices.IndexFunc(r.Layers, func(l ScanLayer) bool { return l.Name == tr.Node })
					if i < 0 {
						t.Errorf("ReLU %s not scanned", tr.Node)
						continue
					}
					l := r.Layers[i]
					if l.Output != tr.Output || len(l.Channels) != tr.Channels {
						t.Errorf("%s: output %q with %d channels, truth %q with %d", tr.Node, l.Output, len(l.Channels), tr.Output, tr.Channels)
						continue
					}
					if tr.FollowsOp == "Conv" && l.Conv != tr.Follows {
						t.Errorf("%s: fed by %q, truth %q", tr.Node, l.Conv, tr.Follows)
					}
					var gotDead, gotRare []int
					for _, ch := range l.Channels {
						if slices.Contains(ch.Flags, modelio.FlagDead) {
							gotDead = append(gotDead, ch.Index)
						}
						if slices.Contains(ch.Flags, modelio.FlagRare) {
							gotRare = append(gotRare, ch.Index)
						}
						// Firing counts agree up to the images whose largest
						// pre-activation lies within the truth's margin of 0.
						got := int(math.Round(ch.Fires * float64(r.Images)))
						if d := got - tr.FireCount[ch.Index]; d < -tr.WithinMargin[ch.Index] || d > tr.WithinMargin[ch.Index] {
							t.Errorf("%s channel %d fires on %d images, truth %d (± %d)", tr.Node, ch.Index, got, tr.FireCount[ch.Index], tr.WithinMargin[ch.Index])
						}
						// The ReLU's largest output is max(0, largest input);
						// float32 in two runtimes, 6 digits in the file.
						want := math.Max(0, tr.MaxPre[ch.Index])
						if math.Abs(ch.Max-want) > 1e-3*math.Max(1, want) {
							t.Errorf("%s channel %d: max %g, truth %g", tr.Node, ch.Index, ch.Max, want)
						}
					}
					if !slices.Equal(gotDead, orNil(tr.Dead)) || !slices.Equal(gotRare, orNil(tr.Rare)) {
						t.Errorf("%s: dead %v rare %v, truth dead %v rare %v", tr.Node, gotDead, gotRare, tr.Dead, tr.Rare)
					}
					dead += len(gotDead)
					rare += len(gotRare)
				}
				if r.Count(modelio.FlagDead) != dead || r.Count(modelio.FlagRare) != rare {
					t.Errorf("flags outside the truth's layers: %d dead, %d rare in all", r.Count(modelio.FlagDead), r.Count(modelio.FlagRare))
				}
				t.Logf("%s: %d images, %d dead, %d rare, %d constant, %d zero_kernel, %d duplicate", kind, r.Images, dead, rare,
					r.Count(modelio.FlagConstant), r.Count(modelio.FlagZeroKernel), r.Count(modelio.FlagDuplicate))
			}
		})
	}
}

// orNil returns s, or nil for an empty s, for slices.Equal against a
// list collected with append.
func orNil(s []int) []int {
	if len(s) == 0 {
		return nil
	}
	return s
}

// TestScanReadsAgree: on both demo checkpoints over every third demo probe,
// with the strongest images and per-class rates asked for, a scan whose
// maps are summarised in the graph (ScanSession) reports what one reading
// the maps whole reports (sameUpToSums), with batches of 1 and 7 images.
// TestScanDemoTruth checks both against the PyTorch truth; this covers the
// figures that truth does not list (strongest images and their positions,
// class rates, pre-activation maxima).
func TestScanReadsAgree(t *testing.T) {
	testkit.NeedRuntime(t)
	dir := demoDir()
	all, err := ProbeFiles(filepath.Join(dir, "probe"))
	if err != nil {
		t.Fatalf("the demo assets are needed (assets/make_demo.py): %v", err)
	}
	var files []string
	labels := map[string]string{}
	for i := 0; i < len(all); i += 3 {
		files = append(files, all[i])
		labels[all[i]] = []string{"first", "second", "third"}[i%9/3] // any grouping will do
	}
	for _, name := range []string{"parts.onnx", "parts_unhealthy.onnx"} {
		m, err := modelio.Open(filepath.Join(dir, name))
		if err != nil {
			t.Fatal(err)
		}
		cfg := prep.Guess(m)
		o := ScanOptions{TopK: 9, Labels: labels}
		var reports []*ScanReport
		for i, how := range scanReads(t, m) {
			how.opt.Batch = []int{1, 7}[i]
			r, err := Scan(context.Background(), newSession(t, m, how.opt), m, cfg, files, o, nil)
			if err != nil {
				t.Fatalf("%s, maps read %s: %v", name, how.name, err)
			}
			reports = append(reports, r)
		}
		if d := sameUpToSums(reports[0], reports[1]); d != "" {
			t.Errorf("%s: maps read whole against summarised in the graph: %s", name, d)
		}
	}
}
