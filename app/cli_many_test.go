package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// TestCLIManyImages: classify, occlude and report over several images or a
// folder open the model once and give each image its output: classify
// --json one object per line, equal to what a run on that image alone
// prints; occlude and report one PNG per image in --out-dir, names made
// unique; an unreadable image is reported by name, the others are done, and
// the exit status is 2.
func TestCLIManyImages(t *testing.T) {
	d := newDemoFiles(t)
	dir := filepath.Join(t.TempDir(), "zwei ü")
	other := filepath.Join(t.TempDir(), "other")
	os.MkdirAll(dir, 0o755)
	os.MkdirAll(other, 0o755)
	for i, src := range []string{d.image, d.image2, d.mistake} {
		b, _ := os.ReadFile(src)
		os.WriteFile(filepath.Join(dir, []string{"a.png", "b.png", "c.png"}[i]), b, 0o644)
	}
	b, _ := os.ReadFile(d.mistake)
	os.WriteFile(filepath.Join(other, "a.png"), b, 0o644)

	out := mustRun(t, "classify", "--model", d.model, "--json", "--k", "3", dir)
	lines := strings.Split(strings.TrimSpace(out), "\n")
	if len(lines) != 3 {
		t.Fatalf("classify over a folder of 3 images printed %d lines:\n%s", len(lines), out)
	}
	for i, name := range []string{"a.png", "b.png", "c.png"} {
		var many, one classifyDoc
		if err := json.Unmarshal([]byte(lines[i]), &many); err != nil {
			t.Fatalf("line %d is not one JSON object: %v", i+1, err)
		}
		decodeJSON(t, mustRun(t, "classify", "--model", d.model, "--json", "--k", "3", "--image", filepath.Join(dir, name)), &one)
		if many.Image != filepath.Join(dir, name) || !slices.Equal(many.Top, one.Top) {
			t.Errorf("line %d: %+v; alone: %+v", i+1, many, one)
		}
	}

	outDir := filepath.Join(t.TempDir(), "heat maps")
	mustRun(t, "occlude", "--model", d.model, "--out-dir", outDir, "--patch", "16", filepath.Join(dir, "a.png"), filepath.Join(other, "a.png"))
	if got := listDir(t, outDir); !slices.Equal(got, []string{"a-2.occlusion.png", "a.occlusion.png"}) {
		t.Errorf("occlude --out-dir holds %v", got)
	}
	noTempFiles(t, outDir)

	pages := filepath.Join(t.TempDir(), "pages")
	os.WriteFile(filepath.Join(dir, "broken.png"), []byte("not a picture"), 0o644)
	_, errs, code := runCLI(t, "report", "--model", d.model, "--out-dir", pages, "--patch", "16", "--date", "2026-01-02", dir)
	if code != exitUsage || !strings.Contains(errs, "broken.png") {
		t.Errorf("report with a broken image among 4: exit %d, stderr %q; want 2 naming broken.png", code, errs)
	}
	if got := listDir(t, pages); !slices.Equal(got, []string{"a.report.png", "b.report.png", "c.report.png"}) {
		t.Errorf("report --out-dir holds %v", got)
	}
	if _, errs, code := runCLI(t, "occlude", "--model", d.model, "--out", "x.png", dir); code != exitUsage || !strings.Contains(errs, "--out-dir") {
		t.Errorf("occlude --out with a folder: exit %d, %q", code, errs)
	}
}
