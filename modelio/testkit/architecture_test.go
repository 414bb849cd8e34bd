package testkit

import (
	"bufio"
	"os"
	"slices"
	"sort"
	"strings"
	"testing"
)

// windowPackages are the only packages that may link Fyne: the window and
// the program's main package, which starts it.
var windowPackages = []string{"fovea/app", "fovea/app/gui"}

// TestArchitecture: no package but the window's imports Fyne, directly or
// through another package (STYLE.md: viz and modelio never import Fyne; the
// window is a thin layer over app/core); viz draws from data and never
// depends on the runtime session package or ONNX Runtime's Go binding.
func TestArchitecture(t *testing.T) {
	pkgs := Packages(t)
	for _, w := range windowPackages {
		if _, ok := pkgs[w]; !ok {
			t.Errorf("window package %s is not in go list fovea/...: update windowPackages", w)
		}
	}
	for p, deps := range pkgs {
		if slices.Contains(windowPackages, p) {
			continue
		}
		for _, d := range deps {
			if strings.HasPrefix(d, "fyne.io/") {
				t.Errorf("%s depends on %s: only %v may link Fyne", p, d, windowPackages)
				break
			}
		}
	}
	viz, ok := pkgs["fovea/viz"]
	if !ok || !slices.Contains(viz, "image/color") {
		t.Fatalf("go list output does not look like viz's dependencies: %v", viz)
	}
	for _, d := range viz {
		if d == "fovea/modelio/infer" || strings.Contains(d, "onnxruntime") {
			t.Errorf("viz depends on %s: it draws from data and never runs a model", d)
		}
	}
}

// TestPackageMap: DEVELOPERS.md's package map lists exactly the packages of
// go list ./..., so that the guide cannot drift from the tree. A row of the
// map is a table row whose first cell is a package path in backquotes.
func TestPackageMap(t *testing.T) {
	f, err := os.Open("../../DEVELOPERS.md")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var listed []string
	in := false
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		line := sc.Text()
		switch {
		case strings.HasPrefix(line, "## "):
			in = line == "## Package map"
		case in && strings.HasPrefix(line, "| `fovea"):
			cell := strings.TrimSpace(strings.Split(line, "|")[1])
			listed = append(listed, strings.Trim(cell, "`"))
		}
	}
	if len(listed) == 0 {
		t.Fatal(`DEVELOPERS.md has no "## Package map" table with rows | ` + "`fovea/...`" + ` |`)
	}
	var actual []string
	for p := range Packages(t) {
		actual = append(actual, p)
	}
	sort.Strings(actual)
	for _, p := range actual {
		if !slices.Contains(listed, p) {
			t.Errorf("DEVELOPERS.md's package map lacks %s", p)
		}
	}
	for _, p := range listed {
		if !slices.Contains(actual, p) {
			t.Errorf("DEVELOPERS.md's package map lists %s, which go list ./... does not", p)
		}
	}
}
