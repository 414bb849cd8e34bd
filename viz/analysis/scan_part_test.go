package analysis

import (
	"context"
	"encoding/json"
	"math"
	"path/filepath"
	"testing"

	"fovea/modelio"
	"fovea/modelio/infer"
	"fovea/modelio/prep"
)

// TestExactSum: the sum does not depend on order or grouping. Values by
// hand: 2⁵³ + 1 − 2⁵³ is 1 exactly, where float64 addition left to right
// gives 0; the smallest subnormal (2⁻¹⁰⁷⁴) survives beside 1 until the
// final rounding; NaN and Inf propagate as in float64 arithmetic.
func TestExactSum(t *testing.T) {
	var a, b exactSum
	for _, v := range []float64{1 << 53, 1, -(1 << 53)} {
		a.add(v)
	}
	if got := a.float64(); got != 1 {
		t.Errorf("2^53 + 1 - 2^53 = %v, want 1", got)
	}
	tiny := math.SmallestNonzeroFloat64
	b.add(tiny)
	b.add(1)
	b.add(-1)
	if got := b.float64(); got != tiny {
		t.Errorf("tiny + 1 - 1 = %v, want %v", got, tiny)
	}
	var c exactSum
	c.add(1.5)
	c.add(math.Inf(1))
	if !math.IsInf(c.float64(), 1) {
		t.Errorf("1.5 + Inf = %v", c.float64())
	}
	// Through JSON.
	raw, err := json.Marshal(b)
	if err != nil {
		t.Fatal(err)
	}
	var back exactSum
	if err := json.Unmarshal(raw, &back); err != nil || back.float64() != tiny {
		t.Errorf("JSON round trip %s: %v, %v", raw, back.float64(), err)
	}
}

// TestScanShards: the scans of 1, 3 and 7 shards of the demo's probe
// images, merged, give exactly the report of one scan over all of them
// (compared as JSON, byte for byte).
func TestScanShards(t *testing.T) {
	m, err := modelio.Open(filepath.Join(demoDir(), "parts_unhealthy.onnx"))
	if err != nil {
		t.Fatal(err)
	}
	files, err := ProbeFiles(filepath.Join(demoDir(), "probe"))
	if err != nil {
		t.Fatal(err)
	}
	s := newSession(t, m, infer.Options{Capture: ScanCapture(m)})
	cfg := prep.Guess(m)
	ctx := context.Background()
	whole, err := Scan(ctx, s, m, cfg, files, ScanOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	want, _ := json.Marshal(whole)
	for _, n := range []int{1, 3, 7} {
		var parts []*ScanPart
		for k := range n {
			sh := files[len(files)*k/n : len(files)*(k+1)/n]
			r, err := Scan(ctx, s, m, cfg, sh, ScanOptions{}, nil)
			if err != nil {
				t.Fatal(err)
			}
			raw, _ := json.Marshal(r.Part())
			var back ScanPart
			if err := json.Unmarshal(raw, &back); err != nil {
				t.Fatal(err)
			}
			parts = append(parts, &back)
		}
		merged, err := MergeScan(parts)
		if err != nil {
			t.Fatal(err)
		}
		rep, err := merged.Report()
		if err != nil {
			t.Fatal(err)
		}
		got, _ := json.Marshal(rep)
		if string(got) != string(want) {
			t.Errorf("n = %d: merged scan differs from the single scan", n)
		}
	}
}
